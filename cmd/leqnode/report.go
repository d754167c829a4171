package main

import (
	"context"
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/report"
	"github.com/leqnode/leqnode/node/report/indicator"
)

func runReport(ctx context.Context, std stdio, args []string) error {
	if slices.Contains(args, "--fleet") || slices.Contains(args, "-fleet") {
		return runFleetReport(ctx, std, slices.DeleteFunc(slices.Clone(args), func(a string) bool { return a == "--fleet" || a == "-fleet" }))
	}
	fl := newFlags("report", "(--db FILE | --config FILE) --from DATE --to DATE --profile NAME [--zone Z] --out DIR\n       leqnode report --fleet --db FILE --db FILE ... | --dir DIR  (see leqnode report --fleet --help)", std.err)
	sf := addStoreFlags(fl)
	rf := addReportFlags(fl, "output directory for report.html, daily.csv and hourly.csv (required)")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("unexpected argument %q: the store is given with --db FILE", pos[0])
	}
	p, z, err := rf.check()
	if err != nil {
		return err
	}
	st, loc, done, err := sf.open(ctx, std)
	if err != nil {
		return err
	}
	defer done()
	lo, hi, err := rf.timeRange(loc)
	if err != nil {
		return err
	}
	r, err := report.Compute(ctx, st, report.Config{Profile: p, Zone: z, Location: loc, From: lo, To: hi, Options: rf.options()})
	if err != nil {
		return err
	}
	id, err := report.ReadIdentity(st, hi)
	if err != nil {
		return err
	}
	meta := report.Meta{Node: filepath.Base(st.Path()), NodeID: id.NodeID, Site: id.Site, StoreID: st.ID(), Created: time.Now().In(loc)}
	if err := report.Write(*rf.out, r, meta); err != nil {
		return err
	}
	fmt.Fprintf(std.out, "wrote %s, %s and %s in %s for node %s: %d days, %d periods, %.1f %% valid data\n",
		report.HTMLFile, report.DailyFile, report.HourlyFile, *rf.out, id.NodeID, len(r.Days), len(r.Periods), 100*r.Coverage.Share)
	return nil
}

// reportFlags are the flags every report (single node or fleet) takes.
type reportFlags struct {
	from, to, prof, zone, out *string
	minCov                    *float64
	adjust                    *bool
}

func addReportFlags(fl interface {
	String(name, value, usage string) *string
	Float64(name string, value float64, usage string) *float64
	Bool(name string, value bool, usage string) *bool
}, outUsage string) reportFlags {
	return reportFlags{
		from:   fl.String("from", "", "start of the half-open range: RFC 3339 or YYYY-MM-DD in the node's zone (required)"),
		to:     fl.String("to", "", "end of the half-open range, excluded (required)"),
		prof:   fl.String("profile", "", "period profile: "+strings.Join(profiles.Names(), ", ")+", or a profile file ending in .toml (required)"),
		zone:   fl.String("zone", "", "zone of the profile whose limits apply (e.g. residential); none: no limits"),
		out:    fl.String("out", "", outUsage),
		minCov: fl.Float64("min-coverage", 75, "percent of valid seconds under which a period is marked"),
		adjust: fl.Bool("adjust", false, "add rating adjustments for tonal and impulsive periods (ISO 1996-1 style; off by default)"),
	}
}

// check checks the flags that need no store and loads the profile and zone.
func (f reportFlags) check() (*profiles.Profile, *profiles.Zone, error) {
	switch {
	case *f.from == "" || *f.to == "":
		return nil, nil, badInput("give the range with --from DATE --to DATE (YYYY-MM-DD or RFC 3339; --to is excluded)")
	case *f.prof == "":
		return nil, nil, badInput("give the period profile with --profile (%s, or a .toml file)", strings.Join(profiles.Names(), ", "))
	case *f.out == "":
		return nil, nil, badInput("give the output directory with --out DIR")
	case !(*f.minCov > 0 && *f.minCov <= 100):
		return nil, nil, badInput("--min-coverage %g: give a percentage above 0 and at most 100", *f.minCov)
	}
	p, err := profiles.Load(*f.prof)
	if err != nil {
		return nil, nil, badInput("--profile: %v", err)
	}
	var z *profiles.Zone
	if *f.zone != "" {
		if z, err = p.Zone(*f.zone); err != nil {
			return nil, nil, badInput("--zone: %v", err)
		}
	}
	return p, z, nil
}

// timeRange parses --from and --to, dates in loc.
func (f reportFlags) timeRange(loc *time.Location) (lo, hi time.Time, err error) {
	if lo, err = parseWhen("from", *f.from, loc); err != nil {
		return lo, hi, err
	}
	if hi, err = parseWhen("to", *f.to, loc); err != nil {
		return lo, hi, err
	}
	if !lo.Before(hi) {
		return lo, hi, badInput("--from %s is not before --to %s: the range is half-open [from, to)", lo.Format(time.RFC3339), hi.Format(time.RFC3339))
	}
	if hi.Sub(lo) > 400*24*time.Hour {
		return lo, hi, badInput("the range of %.0f days is too long for one report: give at most 400 days", hi.Sub(lo).Hours()/24)
	}
	return lo, hi, nil
}

func (f reportFlags) options() indicator.Options {
	return indicator.Options{MinCoverage: *f.minCov / 100, Adjust: *f.adjust}
}
