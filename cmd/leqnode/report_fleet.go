package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/node/collect"
	"github.com/leqnode/leqnode/node/fleetdb"
	"github.com/leqnode/leqnode/node/lib/report"
)

// manyFlags collects a repeated flag.
type manyFlags []string

func (m *manyFlags) String() string     { return strings.Join(*m, ",") }
func (m *manyFlags) Set(v string) error { *m = append(*m, v); return nil }

// runFleetReport writes the fleet report, or with --colocation the co-location check, over a
// set of exported stores.
func runFleetReport(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("report --fleet", "(--db FILE --db FILE ... | --dir DIR | --config COLLECTOR.toml) --from DATE --to DATE --profile NAME [--zone Z] --out DIR\n       leqnode report --fleet --colocation (--db FILE ... | --dir DIR) --from T --to T --out DIR [--tolerance DB]", std.err)
	var dbs manyFlags
	fl.Var(&dbs, "db", "a node's store file; repeat for every node")
	dir := fl.String("dir", "", "a directory whose *.db files are the nodes' stores")
	collector := fl.String("config", "", "the collector's configuration: report over its database (every node with minute records in the range)")
	rf := addReportFlags(fl, "output directory for fleet.html and the CSV files (required)")
	tz := fl.String("time-zone", "", "IANA zone in which days and periods are counted (default: the first store's node zone; UTC over the database)")
	mapInd := fl.String("map-indicator", "", "indicator the map colours nodes by: LAeq, a period name or the whole-day indicator (default: the profile's whole-day indicator, else LAeq)")
	window := fl.Duration("window", report.DefaultWindow, "events on different nodes starting within this time are one happening")
	seconds := fl.Bool("seconds", false, "read second records too (exact to single-node reports, about 60 times slower)")
	coloc := fl.Bool("colocation", false, "check nodes standing side by side instead: offsets from the group's median")
	tol := fl.Float64("tolerance", report.DefaultTolerance, "with --colocation: the largest offset from the median that passes, dB")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("unexpected argument %q: give stores with --db FILE or --dir DIR", pos[0])
	}
	if *collector != "" && (len(dbs) > 0 || *dir != "") {
		return badInput("give either stores (--db, --dir) or the collector's database (--config), not both")
	}
	var stores []string
	if *collector == "" {
		if stores, err = fleetStores(dbs, *dir); err != nil {
			return err
		}
	}
	if *window <= 0 || *window > 10*time.Minute {
		return badInput("--window %s: give a duration above 0 and at most 10m", *window)
	}
	if !(*tol > 0 && *tol <= 20) {
		return badInput("--tolerance %g: give a level difference above 0 and at most 20 dB", *tol)
	}
	if *collector != "" && *coloc {
		return badInput("the co-location check reads stores: give them with --db or --dir")
	}
	first := ""
	if len(stores) > 0 {
		first = stores[0]
	}
	loc, err := fleetZone(*tz, first)
	if err != nil {
		return err
	}
	if *coloc {
		return runColocation(ctx, std, rf, stores, loc, *tol)
	}
	p, z, err := rf.check()
	if err != nil {
		return err
	}
	lo, hi, err := rf.timeRange(loc)
	if err != nil {
		return err
	}
	fc := report.FleetConfig{
		Config: report.Config{Profile: p, Zone: z, Location: loc, From: lo, To: hi, Options: rf.options()},
		Stores: stores, Window: *window, Seconds: *seconds,
	}
	var f *report.Fleet
	if *collector != "" {
		f, err = fleetFromDatabase(ctx, *collector, fc)
	} else {
		f, err = report.ComputeFleet(ctx, fc)
	}
	if err != nil {
		return err
	}
	if *mapInd != "" {
		if _, ok := f.Nodes[0].IndicatorValue(*mapInd); !ok {
			return badInput("--map-indicator %q: use one of %s", *mapInd, strings.Join(report.IndicatorNames(f.Nodes[0].Result), ", "))
		}
	}
	if err := report.WriteFleet(*rf.out, f, report.FleetMeta{Created: time.Now().In(loc), MapIndicator: *mapInd}); err != nil {
		return err
	}
	_, err = fmt.Fprintf(std.out, "wrote %s and %s, %s, %s, %s, %s in %s: %d nodes, %d simultaneous happenings\n", report.FleetHTMLFile,
		report.FleetNodesFile, report.FleetDailyFile, report.FleetHourlyFile, report.FleetCoverageFile, report.SimultaneousFile,
		*rf.out, len(f.Nodes), len(f.Happenings))
	return err
}

// runColocation writes the co-location check and fails (exit 1) when a node is outside the
// tolerance, so that a script preparing an array stops there.
func runColocation(ctx context.Context, std stdio, rf reportFlags, stores []string, loc *time.Location, tol float64) error {
	if *rf.from == "" || *rf.to == "" {
		return badInput("give the time the nodes stood together with --from T --to T (YYYY-MM-DD or RFC 3339; --to is excluded)")
	}
	if *rf.out == "" {
		return badInput("give the output directory with --out DIR")
	}
	lo, hi, err := rf.timeRange(loc)
	if err != nil {
		return err
	}
	if len(stores) < 3 {
		return badInput("a co-location check needs at least three nodes (with two the median cannot tell which is off): give more --db")
	}
	c, err := report.CheckColocation(ctx, report.ColocationConfig{Stores: stores, From: lo, To: hi, Tolerance: tol})
	if err != nil {
		return err
	}
	if err := report.WriteColocation(*rf.out, c, time.Now().In(loc)); err != nil {
		return err
	}
	if _, err := io.WriteString(std.out, report.ColocationText(c)); err != nil {
		return err
	}
	if !c.Pass {
		var off []string
		for _, n := range c.Nodes {
			if !n.Pass {
				off = append(off, fmt.Sprintf("%s (LAeq %+.1f dB, worst band %s Hz %+.1f dB)", n.NodeID, n.Offset, n.WorstBand, n.Worst))
			}
		}
		return fmt.Errorf("co-location check failed at ±%.1f dB: %s: check those microphones and calibrate them before deployment", tol, strings.Join(off, "; "))
	}
	return nil
}

// fleetStores returns the store files the flags name, each once.
func fleetStores(dbs []string, dir string) ([]string, error) {
	out := append([]string(nil), dbs...)
	if dir != "" {
		m, err := filepath.Glob(filepath.Join(dir, "*.db"))
		if err != nil || len(m) == 0 {
			return nil, badInput("--dir %s holds no *.db store files: give the directory of exported stores", dir)
		}
		out = append(out, m...)
	}
	if len(out) == 0 {
		return nil, badInput("give the nodes' stores with --db FILE (repeated) or --dir DIR")
	}
	sort.Strings(out)
	out = slices.Compact(out)
	for _, p := range out {
		if _, err := os.Stat(p); errors.Is(err, fs.ErrNotExist) {
			return nil, badInput("no store at %s: give an exported store file", p)
		}
	}
	return out, nil
}

// fleetFromDatabase computes the fleet report over the collector's database.
func fleetFromDatabase(ctx context.Context, path string, fc report.FleetConfig) (*report.Fleet, error) {
	cfg, err := loadCollectorConfig(path)
	if err != nil {
		return nil, err
	}
	db, err := collect.OpenDB(ctx, cfg)
	if err != nil {
		return nil, err
	}
	defer db.Close()
	f, err := db.FleetReport(ctx, fc)
	if err != nil {
		return nil, fmt.Errorf("database %s: %w: is it migrated (leqnode collect --migrate), and does it hold the range?", fleetdb.Describe(cfg.Database.URL), err)
	}
	return f, nil
}

// fleetZone returns the zone named by --time-zone, else the first store's node zone (UTC
// without a store: days are counted in UTC over the database).
func fleetZone(tz, first string) (*time.Location, error) {
	if tz != "" {
		loc, err := time.LoadLocation(tz)
		if err != nil {
			return nil, badInput("--time-zone %q: give an IANA zone name such as Europe/London", tz)
		}
		return loc, nil
	}
	if first == "" {
		return time.UTC, nil
	}
	st, err := buffer.OpenReadOnly(first, 2*time.Second)
	if err != nil {
		return nil, fmt.Errorf("store %s: %w: is it a leqnode store, and is no node writing it?", first, err)
	}
	defer func() { _ = st.Close() }() // read-only, and only its identity was read: closing loses nothing
	id, err := report.ReadIdentity(st, time.Now())
	if err != nil {
		return nil, err
	}
	if id.TimeZone != "" {
		if loc, err := time.LoadLocation(id.TimeZone); err == nil {
			return loc, nil
		}
	}
	return time.UTC, nil
}
