// Package resultwriter writes what `leqnode analyze` measured in a recording: its intervals
// and its summary, as a table for people, CSV (RFC 4180) or JSON lines.
//
// # Model
//
// Keys are the quantity names of the trade (IEC 61672-1): LAeq, LCeq, LZeq, LAFmax, LAFmin,
// LASmax, LASmin, LAImax, LCpeak, LZpeak, LAE, and the percentile levels LAF1 ... LAF99 (the
// A-weighted Fast level exceeded for N % of the time, ISO 1996-1) in the summary. Band levels
// are keyed by nominal midband frequency (IEC 61260-1:2014 Annex E) under octave_LZeq or
// third_octave_LZeq. A level that does not exist (digital silence) is null in JSON, empty in
// CSV and "-" in the table. Levels are written with 0.01 dB resolution.
package resultwriter

import (
	"bytes"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/wav"
)

// percentiles are the LAFN levels reported: N in percent.
var percentiles = [...]int{1, 5, 10, 50, 90, 95, 99}

// Writer formats intervals and the summary of one recording as a table, CSV or JSON lines
// into a buffer. Call Begin before the first interval, Interval for each, and Summary last.
type Writer struct {
	buf     *bytes.Buffer
	format  string
	t0      time.Time
	stamped bool
	bands   []dsp.Band
	file    string // in a batch: the recording's path, written with every line
	only    bool   // summary only
}

// Options set up a Writer.
type Options struct {
	// Format is "table", "csv" or "jsonl"; anything else writes the table.
	Format string
	// Start, when Stamped, is the wall-clock time of the first sample: every interval gets a
	// start time (RFC 3339, UTC).
	Start   time.Time
	Stamped bool
	// File, in a batch, is the recording's path: written into every line (CSV, JSON lines)
	// or as a heading (table).
	File string
	// SummaryOnly leaves out the intervals.
	SummaryOnly bool
}

// New returns a Writer that appends to buf.
func New(buf *bytes.Buffer, o Options) *Writer {
	return &Writer{buf: buf, format: o.Format, t0: o.Start, stamped: o.Stamped, file: o.File, only: o.SummaryOnly}
}

// open starts a jsonl object, with the recording's path first in a batch.
func (w *Writer) open() {
	w.buf.WriteByte('{')
	if w.file != "" {
		fmt.Fprintf(w.buf, `"file":%q,`, w.file)
	}
}

// intervalLevels lists the level keys of an interval line, in order.
var intervalLevels = []string{"LAeq", "LCeq", "LZeq", "LAFmax", "LAFmin", "LASmax", "LASmin", "LAImax", "LCpeak", "LZpeak", "LAE"}

// summaryLevels lists the level keys of the summary before the percentiles: the same in every
// format, and the same as an interval's.
var summaryLevels = intervalLevels

func levelOf(r *dsp.Result, key string) float64 {
	switch key {
	case "LAeq":
		return r.LAeq
	case "LCeq":
		return r.LCeq
	case "LZeq":
		return r.LZeq
	case "LAFmax":
		return r.LAFmax
	case "LAFmin":
		return r.LAFmin
	case "LASmax":
		return r.LASmax
	case "LASmin":
		return r.LASmin
	case "LAImax":
		return r.LAImax
	case "LCpeak":
		return r.LCpeak
	case "LZpeak":
		return r.LZpeak
	case "LAE":
		return r.LAE
	}
	if n, ok := strings.CutPrefix(key, "LAF"); ok {
		p, _ := strconv.Atoi(n)
		return r.Histogram.Exceeded(float64(p))
	}
	return math.NaN()
}

// num formats a level with two decimals; a level that does not exist is written as null.
func num(v float64, null string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return null
	}
	return strconv.FormatFloat(v, 'f', 2, 64)
}

// csvField quotes a field that holds a comma, a quote or a line break (RFC 4180).
func csvField(v string) string {
	if !strings.ContainsAny(v, ",\"\r\n") {
		return v
	}
	return `"` + strings.ReplaceAll(v, `"`, `""`) + `"`
}

func seconds(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

// spectrumKey names the band levels: octave_LZeq or third_octave_LZeq.
func (w *Writer) spectrumKey() string {
	if len(w.bands) > 0 && w.bands[0].Upper > 1.5*w.bands[0].Lower {
		return "octave_LZeq"
	}
	return "third_octave_LZeq"
}

func (w *Writer) jsonSpectrum(levels []float64) string {
	var b strings.Builder
	b.WriteByte('{')
	for i, band := range w.bands {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, "%q:%s", band.Nominal, num(levels[i], "null"))
	}
	b.WriteByte('}')
	return b.String()
}

func (w *Writer) stamp(offset float64) string {
	return w.t0.Add(time.Duration(math.Round(offset * 1e9))).UTC().Format(time.RFC3339Nano)
}

func cell(v float64) string { return num(v, "-") }

// Begin writes what comes before the first interval: the CSV header, or the table's heading
// naming the recording's format f and channel.
func (w *Writer) Begin(f wav.Format, channel int, bands []dsp.Band) {
	w.bands = bands
	switch w.format {
	case "csv":
		cols := []string{"kind", "offset_s", "duration_s"}
		if w.file != "" {
			cols = append([]string{"file"}, cols...)
		}
		if w.stamped {
			cols = append(cols, "start")
		}
		cols = append(cols, intervalLevels...)
		for _, p := range percentiles {
			cols = append(cols, fmt.Sprintf("LAF%d", p))
		}
		for _, b := range w.bands {
			cols = append(cols, w.spectrumKey()+"_"+b.Nominal)
		}
		w.buf.WriteString(strings.Join(cols, ",") + "\n")
	case "table":
		if w.file != "" {
			fmt.Fprintf(w.buf, "== %s ==\n", w.file)
		}
		fmt.Fprintf(w.buf, "recording: %s, channel %d\n", f, channel)
		if w.only {
			return
		}
		fmt.Fprintf(w.buf, "%10s %8s %8s %8s %8s %8s %8s %8s\n", "offset s", "LAeq", "LCeq", "LAFmax", "LAFmin", "LASmax", "LAImax", "LCpeak")
	}
}

// csvRow writes one CSV line; percentiles only for the summary.
func (w *Writer) csvRow(kind string, offset float64, r *dsp.Result, pct bool) {
	f := []string{kind, seconds(offset), seconds(r.Duration)}
	if w.file != "" {
		f = append([]string{csvField(w.file)}, f...)
	}
	if w.stamped {
		f = append(f, w.stamp(offset))
	}
	for _, k := range intervalLevels {
		f = append(f, num(levelOf(r, k), ""))
	}
	for _, p := range percentiles {
		v := math.NaN()
		if pct {
			v = r.Histogram.Exceeded(float64(p))
		}
		f = append(f, num(v, ""))
	}
	for i := range w.bands {
		f = append(f, num(r.Bands[i], ""))
	}
	w.buf.WriteString(strings.Join(f, ",") + "\n")
}

// Interval writes one interval's levels; offset is its start in seconds from the first sample.
func (w *Writer) Interval(offset float64, r *dsp.Result) {
	if w.only {
		return
	}
	switch w.format {
	case "jsonl":
		w.open()
		fmt.Fprintf(w.buf, `"offset_s":%s,"duration_s":%s`, seconds(offset), seconds(r.Duration))
		if w.stamped {
			fmt.Fprintf(w.buf, `,"start":%q`, w.stamp(offset))
		}
		for _, k := range intervalLevels {
			fmt.Fprintf(w.buf, `,%q:%s`, k, num(levelOf(r, k), "null"))
		}
		if len(w.bands) > 0 {
			fmt.Fprintf(w.buf, `,%q:%s`, w.spectrumKey(), w.jsonSpectrum(r.Bands))
		}
		w.buf.WriteString("}\n")
	case "csv":
		w.csvRow("interval", offset, r, false)
	default:
		fmt.Fprintf(w.buf, "%10.3f %8s %8s %8s %8s %8s %8s %8s\n", offset, cell(r.LAeq), cell(r.LCeq), cell(r.LAFmax), cell(r.LAFmin), cell(r.LASmax), cell(r.LAImax), cell(r.LCpeak))
	}
}

// Summary writes the levels over the whole recording, with the percentile levels LAFN.
func (w *Writer) Summary(r *dsp.Result) {
	switch w.format {
	case "jsonl":
		w.open()
		fmt.Fprintf(w.buf, `"summary":true,"duration_s":%s`, seconds(r.Duration))
		for _, k := range summaryLevels {
			fmt.Fprintf(w.buf, `,%q:%s`, k, num(levelOf(r, k), "null"))
		}
		for _, p := range percentiles {
			fmt.Fprintf(w.buf, `,"LAF%d":%s`, p, num(r.Histogram.Exceeded(float64(p)), "null"))
		}
		if len(w.bands) > 0 {
			fmt.Fprintf(w.buf, `,%q:%s`, w.spectrumKey(), w.jsonSpectrum(r.Bands))
		}
		w.buf.WriteString("}\n")
	case "csv":
		w.csvRow("summary", 0, r, true)
	default:
		if !w.only {
			w.buf.WriteByte('\n')
		}
		fmt.Fprintf(w.buf, "summary over %.3f s\n", r.Duration)
		for _, k := range summaryLevels {
			fmt.Fprintf(w.buf, "  %-7s %8s dB\n", k, cell(levelOf(r, k)))
		}
		for _, p := range percentiles {
			fmt.Fprintf(w.buf, "  LAF%-4d %8s dB\n", p, cell(r.Histogram.Exceeded(float64(p))))
		}
		if len(w.bands) > 0 {
			fmt.Fprintf(w.buf, "\n%s (dB)\n", w.spectrumKey())
			for i, b := range w.bands {
				fmt.Fprintf(w.buf, "  %7s Hz %8s\n", b.Nominal, cell(r.Bands[i]))
			}
		}
		if w.file != "" {
			w.buf.WriteByte('\n') // a blank line before the next recording's heading
		}
	}
}
