package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/leqnode/leqnode/node/collect"
	"github.com/leqnode/leqnode/node/fleetdb"
	"github.com/leqnode/leqnode/node/lib/query"
)

// runFleet dispatches the fleet subcommands.
func runFleet(ctx context.Context, std stdio, args []string) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		say(std.err, "usage: leqnode fleet status --config FILE [--from T] [--to T] [--format table|csv|json]\n")
		if len(args) == 0 {
			return badInput("give a fleet subcommand: status")
		}
		return errHelpShown
	}
	if args[0] != "status" {
		return badInput("unknown fleet subcommand %q: use status", args[0])
	}
	return runFleetStatus(ctx, std, args[1:])
}

// runFleetStatus prints one line per node from the central database.
func runFleetStatus(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("fleet status", "--config FILE [--from T] [--to T] [--format table|csv|json]", std.err)
	cfgPath := fl.String("config", "", "the collector's configuration file (its [database] section is used)")
	from := fl.String("from", "", "start of the range for completeness: RFC 3339 or YYYY-MM-DD in UTC (default: 24 hours ago)")
	to := fl.String("to", "", "end of the range, excluded (default: now)")
	format := fl.String("format", "table", "output: table, csv or json")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("unexpected argument %q", pos[0])
	}
	if err := oneOf("format", *format, "table", "csv", "json"); err != nil {
		return err
	}
	hi, lo := time.Now(), time.Time{}
	if *to != "" {
		if hi, err = query.ParseWhen("to", *to, time.UTC); err != nil {
			return err
		}
	}
	lo = hi.Add(-24 * time.Hour)
	if *from != "" {
		if lo, err = query.ParseWhen("from", *from, time.UTC); err != nil {
			return err
		}
	}
	if !hi.After(lo) {
		return badInput("--to %s is not after --from %s: give a range that ends after it starts", hi.Format(time.RFC3339), lo.Format(time.RFC3339))
	}
	cfg, err := loadCollectorConfig(*cfgPath)
	if err != nil {
		return err
	}
	db, err := collect.OpenDB(ctx, cfg)
	if err != nil {
		return err
	}
	defer db.Close()
	nodes, err := db.Fleet(ctx, lo, hi)
	if err != nil {
		return fmt.Errorf("database %s: %w: is it migrated (leqnode collect --migrate)?", fleetdb.Describe(cfg.Database.URL), err)
	}
	return writeFleet(std.out, *format, nodes)
}

// fleetHeader names the columns of the table and CSV forms.
var fleetHeader = []string{"node", "site", "online", "last_seen", "health_flags", "days_since_calibration", "coverage", "missing", "LAeq", "LAeq_time"}

func writeFleet(w io.Writer, format string, nodes []fleetdb.NodeSummary) error {
	if format == "json" {
		if nodes == nil {
			nodes = []fleetdb.NodeSummary{}
		}
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(nodes)
	}
	rows := [][]string{fleetHeader}
	for _, n := range nodes {
		online := "no"
		if n.Online {
			online = "yes"
		}
		days, laeq, at := "", "", ""
		if n.DaysSinceCalibration != nil {
			days = strconv.FormatFloat(*n.DaysSinceCalibration, 'f', 1, 64)
		}
		if n.LAeq != nil {
			laeq = strconv.FormatFloat(*n.LAeq, 'f', 1, 64)
		}
		if n.LAeqTime != nil {
			at = n.LAeqTime.UTC().Format(time.RFC3339)
		}
		rows = append(rows, []string{n.Node, n.Site, online, n.LastSeen.UTC().Format(time.RFC3339), strings.Join(n.Health, " "),
			days, strconv.FormatFloat(100*n.Coverage, 'f', 1, 64) + "%", strconv.FormatInt(n.Missing, 10), laeq, at})
	}
	if format == "csv" {
		cw := csv.NewWriter(w)
		for i := range rows {
			rows[i][6] = strings.TrimSuffix(rows[i][6], "%")
		}
		rows[0][6] = "coverage_percent"
		if err := cw.WriteAll(rows); err != nil {
			return err
		}
		cw.Flush()
		return cw.Error()
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	p := &printer{w: tw}
	for _, r := range rows {
		for i := range r {
			if r[i] == "" {
				r[i] = "-"
			}
		}
		p.println(strings.Join(r, "\t"))
	}
	if p.err != nil {
		return p.err
	}
	return tw.Flush()
}
