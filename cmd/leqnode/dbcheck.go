package main

import (
	"context"

	"github.com/leqnode/leqnode/node/lib/query"
)

// runDB dispatches the store maintenance subcommands.
func runDB(ctx context.Context, std stdio, args []string) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		if len(args) == 0 {
			say(std.err, "usage: leqnode db check (--db FILE | --config FILE) [--format table|json]\n")
			return badInput("give a db subcommand: check")
		}
		say(std.err, "leqnode db check: verify a store file (bbolt's page check, every record decodes, the time index and the counters agree) and summarise it in one line\n")
		return runDBCheck(ctx, std, []string{"-h"}) // its usage line and flags
	}
	switch args[0] {
	case "check":
		return runDBCheck(ctx, std, args[1:])
	}
	return badInput("unknown db subcommand %q: use check", args[0])
}

// runDBCheck verifies a store (bbolt's page check, every record decodes, the time index and the
// counters agree) and prints a one-line summary.
func runDBCheck(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("db check", "(--db FILE | --config FILE) [--format table|json]", std.err)
	sf := addStoreFlags(fl)
	format := fl.String("format", "table", "output: table (one line) or json")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("unexpected argument %q: the store is given with --db FILE", pos[0])
	}
	if err := oneOf("format", *format, "table", "json"); err != nil {
		return err
	}
	path, _, err := sf.target()
	if err != nil {
		return err
	}
	return sf.read(ctx, std, path, query.Request{Check: &query.Check{Format: *format}})
}
