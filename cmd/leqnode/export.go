package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp/reference"
)

func runExport(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("export", "(--db FILE | --config FILE) --kind KIND [--from T] [--to T] [--format csv|jsonl]", std.err)
	sf := addStoreFlags(fl)
	kindName := fl.String("kind", "", "record kind: second, minute, event, calibration, health, gap, annotation or session")
	from := fl.String("from", "", "start of the half-open range: RFC 3339 or YYYY-MM-DD (default: the oldest record)")
	to := fl.String("to", "", "end of the half-open range, excluded (default: after the newest record)")
	format := fl.String("format", "jsonl", "output: csv or jsonl")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("unexpected argument %q: the store is given with --db FILE", pos[0])
	}
	if *kindName == "" {
		return badInput("give the record kind with --kind (second, minute, event, calibration, health, gap, annotation or session)")
	}
	kind, err := record.ParseKind(*kindName)
	if err != nil {
		return badInput("--kind: %v", err)
	}
	if err := oneOf("format", *format, "csv", "jsonl"); err != nil {
		return err
	}
	st, loc, done, err := sf.open(ctx, std)
	if err != nil {
		return err
	}
	defer done()
	lo, hi := time.Unix(0, 0), time.Date(2200, 1, 1, 0, 0, 0, 0, time.UTC)
	if *from != "" {
		if lo, err = parseWhen("from", *from, loc); err != nil {
			return err
		}
	}
	if *to != "" {
		if hi, err = parseWhen("to", *to, loc); err != nil {
			return err
		}
	}
	if !lo.Before(hi) {
		return badInput("--from %s is not before --to %s: the range is half-open [from, to)", lo.Format(time.RFC3339), hi.Format(time.RFC3339))
	}

	w := bufio.NewWriterSize(std.out, 1<<16)
	ex := &exporter{w: w, format: *format, kind: kind, store: st.ID(), lowBand: 1, highBand: 0} // no band columns unless a spectrum is found
	if *format == "csv" && hasSpectrum(kind) {
		// The CSV header needs the span of bands over the whole range: a first pass finds it.
		ex.lowBand, ex.highBand = math.MaxInt, math.MinInt
		err := st.Range(kind, lo, hi, func(r record.Record) error {
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
	err = st.Range(kind, lo, hi, func(r record.Record) error {
		ex.record(r)
		if ex.err != nil {
			return ex.err
		}
		return ctx.Err()
	})
	if err == nil {
		err = w.Flush()
	}
	if errors.Is(err, context.Canceled) {
		return errors.New("interrupted")
	}
	return err
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

// exporter writes records as CSV or JSON lines. Keys are the quantity names of `leqnode
// analyze` and, for everything else, those of the MQTT payloads (configs/schema): every record
// has "start" (its time), ranges have "end"; times are RFC 3339 in UTC; flags are an array of
// names in JSON and "a|b" in CSV; a level that does not exist is null (JSON) or empty (CSV).
type exporter struct {
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
func (e *exporter) fields(r record.Record) []field {
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
func (e *exporter) header() {
	if e.format != "csv" {
		return
	}
	r, _ := record.NewRecord(e.kind)
	var cols []string
	for _, f := range e.fields(r) {
		cols = append(cols, f.key)
	}
	for x := e.lowBand; x <= e.highBand; x++ {
		cols = append(cols, spectrumKey+"_"+bandName(x))
	}
	e.write(strings.Join(cols, ",") + "\n")
}

func (e *exporter) write(s string) {
	if e.err == nil {
		_, e.err = io.WriteString(e.w, s)
	}
}

func (e *exporter) record(r record.Record) {
	fs := e.fields(r)
	first, spec := spectrumOf(r)
	var b strings.Builder
	if e.format == "csv" {
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
