package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"runtime/debug"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/config"
)

// softwareVersion returns the module version and VCS revision the binary was built from.
func softwareVersion() string {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "leqnode (unknown build)"
	}
	v := bi.Main.Version
	for _, s := range bi.Settings {
		if s.Key == "vcs.revision" && len(s.Value) >= 12 {
			v += " " + s.Value[:12]
		}
	}
	return "leqnode " + v
}

// newLogger returns text logs on a terminal and JSON logs otherwise (under systemd the journal
// keeps them structured).
func newLogger(w io.Writer, tty bool, level slog.Level) *slog.Logger {
	opts := &slog.HandlerOptions{Level: level}
	if tty || os.Getenv("JOURNAL_STREAM") == "" && os.Getenv("INVOCATION_ID") == "" {
		return slog.New(slog.NewTextHandler(w, opts))
	}
	return slog.New(slog.NewJSONHandler(w, opts))
}

// nodeOptions maps a configuration onto the node's options.
func nodeOptions(cfg *config.Config, src capture.Source, st *buffer.Store, log *slog.Logger) node.Options {
	bands := map[string]dsp.BandSet{"third": dsp.Third, "octave": dsp.Octave, "none": 0}[cfg.Measure.Bands]
	o := node.Options{
		Source: src, Store: st,
		SensitivityDBFS: cfg.Microphone.SensitivityDBFS,
		Bands:           bands,
		SecondSpectra:   cfg.Measure.SecondSpectra && bands == dsp.Third,
		Settling:        time.Duration(cfg.Measure.SettlingSeconds * float64(time.Second)),
		OverloadLevel:   cfg.Microphone.OverloadDB,
		Lossless:        cfg.Capture.Kind == capture.KindStdin || cfg.SampleTimed(),
		SampleTimed:     cfg.SampleTimed(),
		Session: buffer.Session{
			SoftwareVersion: softwareVersion(),
			ConfigHash:      cfg.Hash(),
			TimeZone:        cfg.Node.TimeZone,
		},
		Logger: log,
	}
	if o.Settling == 0 {
		o.Settling = time.Nanosecond // zero means the default; a tiny value means none
	}
	if cfg.Microphone.SelfNoiseDBA > 0 {
		o.UnderRangeLevel = cfg.Microphone.SelfNoiseDBA + cfg.Microphone.UnderRangeMarginDB
	}
	return o
}

// openStore opens the configured store for writing.
func openStore(cfg *config.Config, log *slog.Logger) (*buffer.Store, error) {
	st, err := buffer.Open(cfg.Store.Path, &buffer.Options{
		CommitInterval: cfg.CommitInterval(),
		MaxBytes:       cfg.Store.MaxMB << 20,
		Logger:         log,
	})
	if err != nil {
		return nil, err
	}
	if moved := st.Recovered(); moved != "" {
		log.Error("the store file was damaged: it was moved aside and a fresh store started", "moved_to", moved)
	}
	return st, nil
}

func runRun(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("run", "--config FILE", std.err)
	cfgPath := fl.String("config", "", "the node's configuration file (TOML)")
	verbose := fl.Bool("verbose", false, "log debug messages")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 || *cfgPath == "" {
		return badInput("give the configuration with --config FILE (see configs/leqnode.toml)")
	}
	cfg, err := config.Load(*cfgPath)
	if err != nil {
		return usageError{err}
	}
	level := slog.LevelInfo
	if *verbose {
		level = slog.LevelDebug
	}
	log := newLogger(std.err, std.errIsTTY, level).With("node", cfg.Node.ID)
	return runNode(ctx, cfg, std.in, log, nil)
}

// runNode runs a node on cfg until ctx ends (or a finite source ends). hooks, when set,
// adjusts the options (the demo's live display).
func runNode(ctx context.Context, cfg *config.Config, stdin io.Reader, log *slog.Logger, hooks func(*node.Options)) error {
	st, err := openStore(cfg, log)
	if err != nil {
		return err
	}
	defer st.Close()
	src, err := capture.NewReader(cfg.Capture, stdin, log)
	if err != nil {
		return usageError{fmt.Errorf("capture: %w", err)}
	}
	o := nodeOptions(cfg, src, st, log)
	if hooks != nil {
		hooks(&o)
	}
	n, err := node.New(o)
	if err != nil {
		return err
	}
	log.Info("node starting", "version", o.Session.SoftwareVersion, "source", src.Describe(), "store", cfg.Store.Path, "store_id", st.ID())
	err = n.Run(ctx)
	if errors.Is(err, context.Canceled) {
		err = nil
	}
	if cerr := st.Close(); cerr != nil && err == nil {
		err = cerr
	}
	log.Info("node stopped", "seconds", n.Counters.Seconds.Load(), "minutes", n.Counters.Minutes.Load(), "gaps", n.Counters.Gaps.Load(), "dropped_samples", n.Counters.DroppedSamples.Load())
	return err
}
