package strict_test

import (
	"encoding/json"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/lib/strict"
)

// FuzzJSON: strict.JSON never panics, never accepts what encoding/json refuses, decodes what
// it accepts to the same value encoding/json gives, and accepts what encoding/json writes.
func FuzzJSON(f *testing.F) {
	for _, s := range []string{
		`{"name":"a","on":true,"in":{"rate":48000,"gain":1.5},"list":["x"],"pair":[1,2],"extra":{"k":1},"any":null,"when":"2031-05-01T00:00:00Z","opt":"o"}`,
		`{"NAME":"a"}`, `{"name":"a","name":"b"}`, `{"in":{"rate":1e3}}`, `{"pair":[1,2,3]}`, `{"when":"2031-05-01T0:00:00Z"}`,
		`{"any":{"deep":[1,{"x":null}]}}`, `null`, `[]`, ``, `{"extra":{"":-0}}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		var got doc
		err := strict.JSON(b, &got)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error of more than one line: %q", err)
			}
			return
		}
		var want doc
		if err := json.Unmarshal(b, &want); err != nil {
			t.Fatalf("accepted %q, which encoding/json refuses: %v", b, err)
		}
		if !reflect.DeepEqual(got, want) {
			t.Fatalf("%q: decoded %+v, encoding/json gives %+v", b, got, want)
		}
		if got.List == nil || got.Extra == nil {
			return // encoding/json writes a nil slice or map as null, which strict refuses
		}
		out, err := json.Marshal(got)
		if err != nil {
			return // e.g. a time outside year 0-9999 that encoding/json cannot write
		}
		var again doc
		if err := strict.JSON(out, &again); err != nil {
			t.Fatalf("refuses its own output %s: %v", out, err)
		}
	})
}

// FuzzParseTime: what Go's RFC 3339 reader (time.Time.UnmarshalText) accepts, ParseTime
// accepts as the same instant, except where Go is laxer than RFC 3339 sections 5.6 and 5.7:
// a one-digit hour ("2031-05-01T0:00:00Z", hence the fixed widths checked here), offset
// hours above 23 and minutes above 59 ("+24:00", "+00:60") and a comma before the fraction (ISO 8601's, not RFC 3339's
// time-secfrac). (Go refuses lower-case "t"/"z" and leap seconds, which RFC 3339 allows.)
// Whatever ParseTime accepts, written back in RFC 3339, reads as the same instant.
func FuzzParseTime(f *testing.F) {
	for _, s := range []string{"1985-04-12T23:20:50.52Z", "1996-12-19T16:39:57-08:00", "1990-12-31T23:59:60Z",
		"1937-01-01T12:00:27.87+00:20", "2031-05-01T0:00:00Z", "2031-05-01t00:00:00z", "2031-02-29T00:00:00Z", "0000-01-01T00:00:00+23:59"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := strict.ParseTime(s)
		var ref time.Time
		fixed := len(s) >= 20 && s[4] == '-' && s[7] == '-' && s[13] == ':' && s[16] == ':'
		if n := len(s); fixed && n >= 6 && (s[n-6] == '+' || s[n-6] == '-') && s[n-3] == ':' && (s[n-5:n-3] > "23" || s[n-2:] > "59") {
			fixed = false // offset hours beyond 23 or minutes beyond 59
		}
		if fixed && s[19] == ',' {
			fixed = false // a decimal comma
		}
		if fixed && ref.UnmarshalText([]byte(s)) == nil && (err != nil || !got.Equal(ref)) {
			t.Fatalf("%q: ParseTime gives %v, %v; time.Time.UnmarshalText %v", s, got, err, ref)
		}
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error of more than one line: %q", err)
			}
			return
		}
		if got.Year() < 0 || got.Year() > 9999 {
			return // an offset moved it out of the four-digit years
		}
		back, err := strict.ParseTime(got.Format(time.RFC3339Nano))
		if err != nil || !back.Equal(got) {
			t.Fatalf("%q: %v written back reads as %v, %v", s, got, back, err)
		}
	})
}
