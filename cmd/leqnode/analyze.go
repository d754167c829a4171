package main

import (
	"context"
	"math"
	"os"
	"runtime"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/analyze"
	"github.com/leqnode/leqnode/node/lib/strict"
	"github.com/leqnode/leqnode/node/lib/termprogress"
)

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
			progress = termprogress.Bar(std.err)
		}
		out, err := cfg.one(ctx, std, pos[0], "", progress)
		if progress != nil {
			termprogress.Clear(std.err)
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
