package main

import (
	"context"

	"github.com/leqnode/leqnode/node/lib/query"
)

// runExport writes stored records of one kind (package export, through package query).
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
	req := query.Export{Kind: *kindName, From: *from, To: *to, Format: *format}
	if *format == "" { // the library's default is jsonl; an empty flag is a mistake here
		return badInput("--format \"\" is not allowed: use one of csv, jsonl")
	}
	if _, _, err := req.Check(); err != nil {
		return err
	}
	path, zone, err := sf.target()
	if err != nil {
		return err
	}
	req.TimeZone = zone
	return sf.read(ctx, std, path, query.Request{Export: &req})
}
