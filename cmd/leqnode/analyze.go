package main

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/analyze"
	"github.com/leqnode/leqnode/node/wav"
)

// percentiles are the LAFN levels reported: N in percent.
var percentiles = [...]int{1, 5, 10, 50, 90, 95, 99}

func runAnalyze(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("analyze", "[--sensitivity DBFS] [--channel N] [--interval D] [--bands none|octave|third] [--start RFC3339] [--format table|csv|jsonl] FILE", std.err)
	sens := fl.Float64("sensitivity", -26, "microphone sensitivity: the dBFS (AES17) that 94 dB SPL at 1 kHz produces")
	channel := fl.Int("channel", 1, "channel to measure, counted from 1")
	interval := fl.Duration("interval", time.Second, "length of each measurement interval (125ms, 1s, 10s, 1m ...)")
	bands := fl.String("bands", "third", "band levels: none, octave or third")
	start := fl.String("start", "", "wall-clock time of the first sample (RFC 3339); adds a start time to each interval")
	format := fl.String("format", "", "output: table (default on a terminal), csv or jsonl (default otherwise)")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return badInput("give exactly one recording FILE (a WAV file, or - for standard input)")
	}
	if *format == "" {
		*format = "jsonl"
		if std.outIsTTY {
			*format = "table"
		}
	}
	if err := oneOf("format", *format, "table", "csv", "jsonl"); err != nil {
		return err
	}
	if err := oneOf("bands", *bands, "none", "octave", "third"); err != nil {
		return err
	}
	set := map[string]dsp.BandSet{"none": 0, "octave": dsp.Octave, "third": dsp.Third}[*bands]
	if math.IsNaN(*sens) || *sens > 0 || *sens < -100 {
		return badInput("--sensitivity %g is out of range: give the dBFS for 94 dB SPL, between -100 and 0 (typical -26)", *sens)
	}
	if *interval <= 0 {
		return badInput("--interval %v must be positive, e.g. 1s or 125ms", *interval)
	}
	var t0 time.Time
	if *start != "" {
		if t0, err = time.Parse(time.RFC3339Nano, *start); err != nil {
			return badInput("--start %q is not an RFC 3339 time: write e.g. 2026-05-04T07:00:00Z", *start)
		}
	}
	in, name, done, err := openRecording(std, pos[0])
	if err != nil {
		return err
	}
	defer done()
	r, err := wav.NewReader(bufio.NewReaderSize(in, 1<<16))
	if err != nil {
		return badInput("%s: %v", name, err)
	}
	opts := analyze.Options{Channel: *channel, Interval: *interval, SensitivityDBFS: *sens, Bands: set}
	if std.errIsTTY {
		opts.Progress = progressBar(std.err)
	}
	// Results are written only once the whole recording has been read, so that a recording
	// that turns out bad half-way (a NaN sample, a truncated file) leaves nothing on standard
	// output that looks like a result.
	var out bytes.Buffer
	w := &analyzeWriter{buf: &out, format: *format, t0: t0, stamped: *start != ""}
	sum, err := analyze.Run(ctx, r, opts, func(iv analyze.Interval) error {
		if w.bands == nil && iv.Index == 0 {
			w.begin(r.Format(), *channel, iv.Bands)
		}
		w.interval(iv.Offset, iv.Result)
		return nil
	})
	if opts.Progress != nil {
		fmt.Fprint(std.err, "\r\033[K")
	}
	if err != nil {
		if errors.Is(err, analyze.ErrNoSamples) {
			return badInput("%s: the recording holds no samples: give a WAV file with audio data", name)
		}
		if errors.Is(err, context.Canceled) {
			return err
		}
		return badInput("%s: %v", name, err)
	}
	w.summary(&sum.Result)
	_, err = std.out.Write(out.Bytes())
	return err
}

// unwrapPath drops the *PathError prefix (the file name is already in the message).
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// progressBar returns a progress callback that draws a bar on a terminal.
func progressBar(w io.Writer) func(done, total int64) {
	return func(done, total int64) {
		if total <= 0 {
			fmt.Fprintf(w, "\r%d frames read", done)
			return
		}
		const width = 40
		frac := float64(done) / float64(total)
		n := int(frac * width)
		fmt.Fprintf(w, "\r[%s%s] %3.0f%%", strings.Repeat("#", n), strings.Repeat(".", width-n), 100*frac)
	}
}

// analyzeWriter formats intervals and the summary as table, csv or jsonl.
type analyzeWriter struct {
	buf     *bytes.Buffer
	format  string
	t0      time.Time
	stamped bool
	bands   []dsp.Band
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

func seconds(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

// spectrumKey names the band levels: octave_LZeq or third_octave_LZeq.
func (w *analyzeWriter) spectrumKey() string {
	if len(w.bands) > 0 && w.bands[0].Upper > 1.5*w.bands[0].Lower {
		return "octave_LZeq"
	}
	return "third_octave_LZeq"
}

func (w *analyzeWriter) jsonSpectrum(levels []float64) string {
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

func (w *analyzeWriter) stamp(offset float64) string {
	return w.t0.Add(time.Duration(math.Round(offset * 1e9))).UTC().Format(time.RFC3339Nano)
}

func cell(v float64) string { return num(v, "-") }

// begin writes what comes before the first interval.
func (w *analyzeWriter) begin(f wav.Format, channel int, bands []dsp.Band) {
	w.bands = bands
	switch w.format {
	case "csv":
		cols := []string{"kind", "offset_s", "duration_s"}
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
		fmt.Fprintf(w.buf, "recording: %s, channel %d\n", f, channel)
		fmt.Fprintf(w.buf, "%10s %8s %8s %8s %8s %8s %8s %8s\n", "offset s", "LAeq", "LCeq", "LAFmax", "LAFmin", "LASmax", "LAImax", "LCpeak")
	}
}

// csvRow writes one CSV line; percentiles only for the summary.
func (w *analyzeWriter) csvRow(kind string, offset float64, r *dsp.Result, pct bool) {
	f := []string{kind, seconds(offset), seconds(r.Duration)}
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

func (w *analyzeWriter) interval(offset float64, r *dsp.Result) {
	switch w.format {
	case "jsonl":
		fmt.Fprintf(w.buf, `{"offset_s":%s,"duration_s":%s`, seconds(offset), seconds(r.Duration))
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

func (w *analyzeWriter) summary(r *dsp.Result) {
	switch w.format {
	case "jsonl":
		fmt.Fprintf(w.buf, `{"summary":true,"duration_s":%s`, seconds(r.Duration))
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
		fmt.Fprintf(w.buf, "\nsummary over %.3f s\n", r.Duration)
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
	}
}
