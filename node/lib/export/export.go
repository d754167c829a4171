// Package export writes a store's records as CSV or JSON lines: the form in which records leave
// a node for a spreadsheet, a script or another database.
//
// # Model
//
// Write reads the records of one kind in a half-open time range [from, to) from a
// *buffer.Store, oldest first, and writes one line per record. Keys are the quantity names of
// `leqnode analyze` and, for everything else, those of the MQTT payloads (configs/schema):
// every record has "store" (the store's id), "seq" and "start" (its time), ranges have "end";
// times are RFC 3339 in UTC; flags are an array of names in JSON and "a|b" in CSV; a level that
// does not exist is null (JSON) or empty (CSV). A one-third-octave spectrum is an object keyed
// by the nominal midband frequency (IEC 61260-1:2014 Annex E) in JSON, and one column per band
// in CSV; a minute's fast level histogram is written in JSON only.
//
// CSV needs its header before the first row, and the header names every band that any record
// of the range holds: for CSV of a kind with spectra Write reads the range twice, once for the
// band span and once for the rows. The output is buffered; nothing is held in memory per
// record.
package export

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp/reference"
)

// The formats Write takes.
const (
	CSV   = "csv"   // RFC 4180, a header line first
	JSONL = "jsonl" // one JSON object per line
)

// Write writes the records of kind whose time is in [from, to) from st to w, in format (CSV or
// JSONL), oldest first. It stops with ctx's error when ctx ends, and with the first error of st
// or w. What it wrote before an error stays written: a caller that needs all or nothing writes
// to a file and renames it.
func Write(ctx context.Context, w io.Writer, st *buffer.Store, kind record.Kind, from, to time.Time, format string) error {
	if format != CSV && format != JSONL {
		return fmt.Errorf("export format %q: use %s or %s", format, CSV, JSONL)
	}
	bw := bufio.NewWriterSize(w, 1<<16)
	ex := &writer{w: bw, format: format, kind: kind, store: st.ID(), lowBand: 1, highBand: 0} // no band columns unless a spectrum is found
	if format == CSV && hasSpectrum(kind) {
		// The CSV header needs the span of bands over the whole range: a first pass finds it.
		ex.lowBand, ex.highBand = math.MaxInt, math.MinInt
		err := st.Range(kind, from, to, func(r record.Record) error {
			if first, s := spectrumOf(r); len(s) > 0 {
				ex.lowBand, ex.highBand = min(ex.lowBand, first), max(ex.highBand, first+len(s)-1)
			}
			return ctx.Err()
		})
		if err != nil {
			return err
		}
	}
	ex.header()
	err := st.Range(kind, from, to, func(r record.Record) error {
		ex.record(r)
		if ex.err != nil {
			return ex.err
		}
		return ctx.Err()
	})
	if err == nil {
		err = ex.err
	}
	if err != nil {
		return err
	}
	return bw.Flush()
}

func hasSpectrum(k record.Kind) bool {
	return k == record.KindSecond || k == record.KindMinute || k == record.KindEvent
}

func spectrumOf(r record.Record) (int, []float64) {
	switch v := r.(type) {
	case *record.Second:
		return v.FirstBand, v.Spectrum
	case *record.Minute:
		return v.FirstBand, v.Spectrum
	case *record.Event:
		return v.FirstBand, v.Spectrum
	}
	return 0, nil
}

// writer writes records as CSV or JSON lines; the first write error is kept in err and ends
// the writing.
type writer struct {
	w                 io.Writer
	format            string
	kind              record.Kind
	store             string
	lowBand, highBand int // band span of the CSV spectrum columns (low > high: none)
	err               error
}

// field is one exported value: a level, a number, a string, a time, a boolean, or raw JSON.
type field struct {
	key  string
	val  string // the CSV text
	json string // the JSON text
}

func level(key string, v float64) field {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return field{key, "", "null"}
	}
	s := strconv.FormatFloat(v, 'f', 2, 64)
	return field{key, s, s}
}

// rounded formats v, already rounded by the record model, in its shortest form.
func rounded(key string, v float64) field {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return field{key, "", "null"}
	}
	if v == 0 {
		v = 0 // no "-0"
	}
	s := strconv.FormatFloat(v, 'f', -1, 64)
	return field{key, s, s}
}

func integer(key string, v uint64) field {
	s := strconv.FormatUint(v, 10)
	return field{key, s, s}
}

func text(key, v string) field { return field{key, csvQuote(v), strconv.Quote(v)} }

func stamp(key string, t time.Time) field { return text(key, t.UTC().Format(time.RFC3339Nano)) }

// flagList is the flags as "a|b" in CSV and as an array of names in JSON, as in the MQTT payloads.
func flagList(f record.Flags) field {
	names := f.Names()
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = strconv.Quote(n)
	}
	return field{"flags", csvQuote(f.String()), "[" + strings.Join(q, ",") + "]"}
}

func boolean(key string, v bool) field {
	s := strconv.FormatBool(v)
	return field{key, s, s}
}

// csvQuote quotes a field that holds a comma, a quote or a line break (RFC 4180 section 2).
func csvQuote(s string) string {
	if strings.ContainsAny(s, ",\"\r\n") {
		return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
	}
	return s
}

const spectrumKey = "third_octave_LZeq"

// bandName is the nominal midband frequency of one-third-octave band x (IEC 61260-1:2014
// Annex E, as dsp/reference writes it).
func bandName(x int) string { return reference.NominalMidband(3, x) }

// fields returns the record's fields as the record model names and rounds them
// (record.Fields), after the store, the sequence number and the record's time.
func (e *writer) fields(r record.Record) []field {
	f := []field{text("store", e.store), integer("seq", r.Seq()), stamp("start", r.Time())}
	for _, m := range record.Fields(r.Kind()) {
		switch v := m.Value(r).(type) {
		case float64:
			f = append(f, rounded(m.Name, v))
		case uint64:
			f = append(f, integer(m.Name, v))
		case bool:
			f = append(f, boolean(m.Name, v))
		case string:
			f = append(f, text(m.Name, v))
		case time.Time:
			f = append(f, stamp(m.Name, v))
		case record.Flags:
			f = append(f, flagList(v))
		}
	}
	return f
}

// header writes the CSV header line: the fields of an empty record, then the spectrum columns.
func (e *writer) header() {
	if e.format != CSV {
		return
	}
	r, err := record.NewRecord(e.kind)
	if err != nil {
		e.err = fmt.Errorf("export: %w", err)
		return
	}
	var cols []string
	for _, f := range e.fields(r) {
		cols = append(cols, f.key)
	}
	for x := e.lowBand; x <= e.highBand; x++ {
		cols = append(cols, spectrumKey+"_"+bandName(x))
	}
	e.write(strings.Join(cols, ",") + "\n")
}

func (e *writer) write(s string) {
	if e.err == nil {
		_, e.err = io.WriteString(e.w, s)
	}
}

func (e *writer) record(r record.Record) {
	fs := e.fields(r)
	first, spec := spectrumOf(r)
	var b strings.Builder
	if e.format == CSV {
		for i, f := range fs {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString(f.val)
		}
		for x := e.lowBand; x <= e.highBand; x++ {
			b.WriteByte(',')
			if i := x - first; i >= 0 && i < len(spec) {
				b.WriteString(level("", spec[i]).val)
			}
		}
		b.WriteByte('\n')
		e.write(b.String())
		return
	}
	b.WriteByte('{')
	for i, f := range fs {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, "%q:%s", f.key, f.json)
	}
	if len(spec) > 0 {
		fmt.Fprintf(&b, ",%q:{", spectrumKey)
		for i, l := range spec {
			if i > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, "%q:%s", bandName(first+i), level("", l).json)
		}
		b.WriteByte('}')
	}
	if m, ok := r.(*record.Minute); ok && len(m.Histogram.Counts) > 0 {
		// Fast level histogram: counts[i] is the number of 10 ms samples in
		// [first_dB + i/10, first_dB + (i+1)/10) dB.
		fmt.Fprintf(&b, `,"LAF_histogram":{"first_dB":%s,"bin_dB":0.1,"counts":[`, strconv.FormatFloat(float64(m.Histogram.First)/10, 'f', 1, 64))
		for i, c := range m.Histogram.Counts {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString(strconv.FormatUint(uint64(c), 10))
		}
		b.WriteString("]}")
	}
	b.WriteString("}\n")
	e.write(b.String())
}
