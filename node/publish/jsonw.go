package publish

import (
	"encoding/json"
	"math"
	"strconv"
	"time"
	"unicode/utf8"
)

// jw appends JSON to a byte slice. It writes fields in a fixed order (stable payloads, small
// diffs) without reflection; commas are inserted by looking at the previous byte.
type jw struct{ b []byte }

func (w *jw) sep() {
	if n := len(w.b); n > 0 {
		switch w.b[n-1] {
		case '{', '[', ':':
		default:
			w.b = append(w.b, ',')
		}
	}
}

func (w *jw) open()  { w.sep(); w.b = append(w.b, '{') }
func (w *jw) close() { w.b = append(w.b, '}') }
func (w *jw) arr()   { w.sep(); w.b = append(w.b, '[') }
func (w *jw) end()   { w.b = append(w.b, ']') }

func (w *jw) key(k string) {
	w.sep()
	w.b = append(w.b, '"')
	w.b = append(w.b, k...) // keys are plain ASCII chosen in this package
	w.b = append(w.b, '"', ':')
}

func (w *jw) str(s string) {
	w.sep()
	if isPlain(s) {
		w.b = append(w.b, '"')
		w.b = append(w.b, s...)
		w.b = append(w.b, '"')
		return
	}
	q, _ := json.Marshal(s) // a string always marshals
	w.b = append(w.b, q...)
}

// isPlain reports whether s needs no JSON escaping.
func isPlain(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < 0x20 || c == '"' || c == '\\' || c >= utf8.RuneSelf || c == '<' || c == '>' || c == '&' {
			return false
		}
	}
	return true
}

func (w *jw) int(v int64)   { w.sep(); w.b = strconv.AppendInt(w.b, v, 10) }
func (w *jw) uint(v uint64) { w.sep(); w.b = strconv.AppendUint(w.b, v, 10) }
func (w *jw) bool(v bool)   { w.sep(); w.b = strconv.AppendBool(w.b, v) }
func (w *jw) null()         { w.sep(); w.b = append(w.b, "null"...) }

// level writes a level in dB rounded to 0.01 dB (the store's resolution), or null for NaN.
func (w *jw) level(v float64) { w.num(v, 2) }

// num writes v rounded to digits decimals, null when v is NaN or infinite.
func (w *jw) num(v float64, digits int) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		w.null()
		return
	}
	p := math.Pow10(digits)
	r := math.Round(v*p) / p
	if r == 0 {
		r = 0 // no "-0"
	}
	w.sep()
	w.b = strconv.AppendFloat(w.b, r, 'f', -1, 64)
}

// stamp writes t as RFC 3339 UTC with milliseconds.
func (w *jw) stamp(t time.Time) {
	w.sep()
	w.b = append(w.b, '"')
	w.b = t.UTC().AppendFormat(w.b, "2006-01-02T15:04:05.000Z07:00")
	w.b = append(w.b, '"')
}

// times writes key and key_ms: RFC 3339 UTC and Unix milliseconds.
func (w *jw) times(key string, t time.Time) {
	w.key(key)
	w.stamp(t)
	w.key(key + "_ms")
	w.int(t.UnixMilli())
}
