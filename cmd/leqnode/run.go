package main

import (
	"context"
	"errors"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"runtime/debug"
	"syscall"

	"github.com/leqnode/leqnode/node/daemon"
	"github.com/leqnode/leqnode/node/lib/config"
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
	// A node lives on a small board for months: collect garbage more eagerly than Go's default
	// and aim to keep the heap under 16 MB (a soft limit: the runtime exceeds it rather than
	// fail). Costs a little CPU at start-up, when the filters are designed.
	debug.SetGCPercent(50)
	debug.SetMemoryLimit(16 << 20)
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	defer signal.Stop(hup)
	for _, w := range cfg.Warnings() {
		log.Warn(w)
	}
	return runDaemon(ctx, std, daemon.Options{Config: cfg, Logger: log, Reload: hup, ConfigPath: *cfgPath})
}

// runDaemon runs node/daemon with what every caller shares: standard input and the software
// version.
func runDaemon(ctx context.Context, std stdio, o daemon.Options) error {
	o.Stdin, o.Version = std.in, softwareVersion()
	err := daemon.Run(ctx, o)
	if errors.Is(err, daemon.ErrConfig) {
		return usageError{err}
	}
	return err
}
