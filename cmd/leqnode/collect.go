package main

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"strings"

	"github.com/leqnode/leqnode/node/collect"
)

// runCollect runs the central collector, or with --migrate only brings the database's schema
// up to date.
func runCollect(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("collect", "--config FILE [--migrate]", std.err)
	cfgPath := fl.String("config", "", "the collector's configuration file (see configs/collector.toml)")
	migrate := fl.Bool("migrate", false, "apply the database migrations and create partitions ahead, then exit")
	verbose := fl.Bool("v", false, "log debug messages too")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("unexpected argument %q: the configuration is given with --config FILE", pos[0])
	}
	cfg, err := loadCollectorConfig(*cfgPath)
	if err != nil {
		return err
	}
	level := slog.LevelInfo
	if *verbose {
		level = slog.LevelDebug
	}
	log := newLogger(std.err, std.errIsTTY, level)
	if *migrate {
		applied, err := collect.Migrate(ctx, cfg, log)
		if err != nil {
			return err
		}
		msg := "database schema up to date\n"
		if len(applied) > 0 {
			msg = fmt.Sprintf("applied %s\n", strings.Join(applied, ", "))
		}
		_, err = io.WriteString(std.out, msg)
		return err
	}
	c, err := collect.New(cfg, collect.Options{Logger: log})
	if err != nil {
		return err
	}
	return c.Run(ctx)
}

// loadCollectorConfig reads the collector's configuration; any problem is bad input.
func loadCollectorConfig(path string) (*collect.Config, error) {
	if path == "" {
		return nil, badInput("give the collector's configuration with --config FILE (an example is configs/collector.toml)")
	}
	cfg, err := collect.LoadConfig(path)
	if err != nil {
		return nil, usageError{err}
	}
	return cfg, nil
}
