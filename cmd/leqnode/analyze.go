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
	"runtime"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/analyze"
	"github.com/leqnode/leqnode/node/strict"
	"github.com/leqnode/leqnode/node/wav"
)

// percentiles are the LAFN levels reported: N in percent.
var percentiles = [...]int{1, 5, 10, 50, 90, 95, 99}

func runAnalyze(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("analyze", "[--sensitivity DBFS] [--channel N] [--interval D] [--bands none|octave|third] [--start RFC3339] [--format table|csv|jsonl] [-j N] [--summary] FILE|DIR ...", std.err)
	sens := fl.Float64("sensitivity", -26, "microphone sensitivity: the dBFS (AES17) that 94 dB SPL at 1 kHz produces")
	channel := fl.Int("channel", 1, "channel to measure, counted from 1")
	interval := fl.Duration("interval", time.Second, "length of each measurement interval (125ms, 1s, 10s, 1m ...)")
	bands := fl.String("bands", "third", "band levels: none, octave or third")
	start := fl.String("start", "", "wall-clock time of the first sample (RFC 3339); adds a start time to each interval (one recording only)")
	format := fl.String("format", "", "output: table (default on a terminal), csv or jsonl (default otherwise)")
	jobs := fl.Int("j", runtime.GOMAXPROCS(0), "recordings measured at once (default: one per core); the output keeps the order of the inputs")
	only := fl.Bool("summary", false, "write only each recording's summary, not its intervals")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) == 0 {
		return badInput("give a recording FILE (a WAV file, or - for standard input), or several files and directories")
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
	if *jobs < 1 {
		return badInput("-j %d: give how many recordings to measure at once, 1 or more", *jobs)
	}
	cfg := analyzeConfig{
		opts:   analyze.Options{Channel: *channel, Interval: *interval, SensitivityDBFS: *sens, Bands: set},
		format: *format,
		only:   *only,
	}
	if *start != "" {
		if cfg.t0, err = strict.ParseTime(*start); err != nil {
			return badInput("--start %q is not an RFC 3339 time: write e.g. 2026-05-04T07:00:00Z", *start)
		}
		cfg.stamped = true
	}
	if len(pos) == 1 && (pos[0] == "-" || !isDir(pos[0])) {
		var progress func(done, total int64)
		if std.errIsTTY {
			progress = progressBar(std.err)
		}
		out, err := cfg.one(ctx, std, pos[0], "", progress)
		if progress != nil {
			fmt.Fprint(std.err, "\r\033[K")
		}
		if err != nil {
			return err
		}
		_, err = std.out.Write(out)
		return err
	}
	for _, p := range pos {
		if p == "-" {
			return badInput("- (standard input) cannot be measured together with other recordings: give it alone")
		}
	}
	if cfg.stamped {
		return badInput("--start is the time of one recording's first sample: give one FILE with it")
	}
	files, err := analyze.Inputs(pos)
	if err != nil {
		return badInput("%v", err)
	}
	return cfg.batch(ctx, std, files, *jobs)
}

func isDir(name string) bool {
	st, err := os.Stat(name)
	return err == nil && st.IsDir()
}

// analyzeConfig is what every recording of one analyze command is measured and written with.
type analyzeConfig struct {
	opts    analyze.Options
	format  string
	only    bool // summaries only
	t0      time.Time
	stamped bool
}

// one measures one recording and returns its output. file, when not empty, is written into
// every line (jsonl, csv) or as a heading (table), for a batch. Results are returned only once
// the whole recording has been read, so that a recording that turns out bad half-way (a NaN
// sample, a truncated file) yields an error and no output that looks like a result.
func (c *analyzeConfig) one(ctx context.Context, std stdio, path, file string, progress func(done, total int64)) ([]byte, error) {
	in, name, done, err := openRecording(std, path)
	if err != nil {
		return nil, err
	}
	defer done()
	r, err := wav.NewReader(bufio.NewReaderSize(in, 1<<16))
	if err != nil {
		return nil, badInput("%s: %v", name, err)
	}
	opts := c.opts
	opts.Progress = progress
	var out bytes.Buffer
	w := &analyzeWriter{buf: &out, format: c.format, t0: c.t0, stamped: c.stamped, file: file, only: c.only}
	sum, err := analyze.Run(ctx, r, opts, func(iv analyze.Interval) error {
		if w.bands == nil && iv.Index == 0 {
			w.begin(r.Format(), opts.Channel, iv.Bands)
		}
		w.interval(iv.Offset, iv.Result)
		return nil
	})
	if err != nil {
		if errors.Is(err, analyze.ErrNoSamples) {
			return nil, badInput("%s: the recording holds no samples: give a WAV file with audio data", name)
		}
		if errors.Is(err, context.Canceled) {
			return nil, err
		}
		return nil, badInput("%s: %v", name, err)
	}
	w.summary(&sum.Result)
	return out.Bytes(), nil
}

// batch measures several recordings on up to jobs goroutines and writes their outputs in the
// order of files, each as soon as it and those before it are done. A recording that cannot be
// measured gets its one-line error on standard error and the others go on; the command then
// ends with a usage error (exit 2) that counts them.
func (c *analyzeConfig) batch(ctx context.Context, std stdio, files []string, jobs int) error {
	type result struct {
		out []byte
		err error
	}
	var bar *batchBar
	if std.errIsTTY {
		bar = newBatchBar(std.err, len(files))
	}
	var failed int
	var header string // the last CSV header written
	var werr error
	analyze.Ordered(ctx, len(files), jobs, func(ctx context.Context, i int) result {
		var progress func(done, total int64)
		if bar != nil {
			progress = bar.progress(i)
		}
		out, err := c.one(ctx, std, files[i], files[i], progress)
		if bar != nil {
			bar.finish(i)
		}
		return result{out, err}
	}, func(i int, r result) {
		if bar != nil {
			bar.clear()
		}
		if r.err != nil {
			failed++
			if !errors.Is(r.err, context.Canceled) {
				fmt.Fprintf(std.err, "leqnode analyze: %v\n", r.err)
			}
			return
		}
		out := r.out
		if c.format == "csv" {
			// One header for a run of recordings with the same columns; a new one where the
			// columns change (another sample rate holds other bands).
			h, rest, _ := bytes.Cut(out, []byte("\n"))
			if string(h) == header {
				out = rest
			}
			header = string(h)
		}
		if werr == nil {
			_, werr = std.out.Write(out)
		}
	})
	if bar != nil {
		bar.clear()
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	if werr != nil {
		return werr
	}
	if failed > 0 {
		return badInput("%d of %d recordings could not be measured (see above); the others are measured", failed, len(files))
	}
	return nil
}

// batchBar draws one progress bar on a terminal for a batch: the share of all frames read, and
// the number of recordings finished.
type batchBar struct {
	mu          sync.Mutex
	w           io.Writer
	done, total []int64
	finished    int
	last        time.Time
}

func newBatchBar(w io.Writer, n int) *batchBar {
	return &batchBar{w: w, done: make([]int64, n), total: make([]int64, n)}
}

// progress returns the progress callback of recording i.
func (b *batchBar) progress(i int) func(done, total int64) {
	return func(done, total int64) {
		b.mu.Lock()
		defer b.mu.Unlock()
		b.done[i], b.total[i] = done, total
		if time.Since(b.last) > 200*time.Millisecond {
			b.draw()
			b.last = time.Now()
		}
	}
}

func (b *batchBar) finish(i int) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.finished++
	if b.total[i] <= 0 {
		b.total[i] = b.done[i]
	}
	b.done[i] = b.total[i]
	b.draw()
}

func (b *batchBar) clear() {
	b.mu.Lock()
	defer b.mu.Unlock()
	fmt.Fprint(b.w, "\r\033[K")
}

// draw writes the bar; the caller holds b.mu. Recordings whose length is not known yet count
// as the mean of the known ones.
func (b *batchBar) draw() {
	var done, total float64
	known := 0
	for i, t := range b.total {
		if t > 0 {
			done += float64(min(b.done[i], t))
			total += float64(t)
			known++
		}
	}
	frac := 0.0
	if known > 0 && total > 0 {
		total += total / float64(known) * float64(len(b.total)-known)
		frac = done / total
	}
	const width = 40
	n := min(width, int(frac*width))
	fmt.Fprintf(b.w, "\r[%s%s] %3.0f%%  %d/%d recordings", strings.Repeat("#", n), strings.Repeat(".", width-n), 100*frac, b.finished, len(b.total))
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
	file    string // in a batch: the recording's path, written with every line
	only    bool   // summary only
}

// open starts a jsonl object, with the recording's path first in a batch.
func (w *analyzeWriter) open() {
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
func (w *analyzeWriter) csvRow(kind string, offset float64, r *dsp.Result, pct bool) {
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

func (w *analyzeWriter) interval(offset float64, r *dsp.Result) {
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

func (w *analyzeWriter) summary(r *dsp.Result) {
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
