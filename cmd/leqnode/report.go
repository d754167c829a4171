package main

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"time"

	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/report"
	"github.com/leqnode/leqnode/node/report/indicator"
)

func runReport(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("report", "(--db FILE | --config FILE) --from DATE --to DATE --profile NAME [--zone Z] --out DIR", std.err)
	sf := addStoreFlags(fl)
	from := fl.String("from", "", "start of the half-open range: RFC 3339 or YYYY-MM-DD in the node's zone (required)")
	to := fl.String("to", "", "end of the half-open range, excluded (required)")
	prof := fl.String("profile", "", "period profile: "+strings.Join(profiles.Names(), ", ")+", or a profile file ending in .toml (required)")
	zone := fl.String("zone", "", "zone of the profile whose limits apply (e.g. residential); none: no limits")
	out := fl.String("out", "", "output directory for report.html, daily.csv and hourly.csv (required)")
	minCov := fl.Float64("min-coverage", 75, "percent of valid seconds under which a period is marked")
	adjust := fl.Bool("adjust", false, "add rating adjustments for tonal and impulsive periods (ISO 1996-1 style; off by default)")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("unexpected argument %q: the store is given with --db FILE", pos[0])
	}
	switch {
	case *from == "" || *to == "":
		return badInput("give the range with --from DATE --to DATE (YYYY-MM-DD or RFC 3339; --to is excluded)")
	case *prof == "":
		return badInput("give the period profile with --profile (%s, or a .toml file)", strings.Join(profiles.Names(), ", "))
	case *out == "":
		return badInput("give the output directory with --out DIR")
	case !(*minCov > 0 && *minCov <= 100):
		return badInput("--min-coverage %g: give a percentage above 0 and at most 100", *minCov)
	}
	p, err := profiles.Load(*prof)
	if err != nil {
		return badInput("--profile: %v", err)
	}
	var z *profiles.Zone
	if *zone != "" {
		if z, err = p.Zone(*zone); err != nil {
			return badInput("--zone: %v", err)
		}
	}
	st, loc, done, err := sf.open(ctx, std)
	if err != nil {
		return err
	}
	defer done()
	lo, err := parseWhen("from", *from, loc)
	if err != nil {
		return err
	}
	hi, err := parseWhen("to", *to, loc)
	if err != nil {
		return err
	}
	if !lo.Before(hi) {
		return badInput("--from %s is not before --to %s: the range is half-open [from, to)", lo.Format(time.RFC3339), hi.Format(time.RFC3339))
	}
	if hi.Sub(lo) > 400*24*time.Hour {
		return badInput("the range of %.0f days is too long for one report: give at most 400 days", hi.Sub(lo).Hours()/24)
	}
	r, err := report.Compute(ctx, st, report.Config{
		Profile: p, Zone: z, Location: loc, From: lo, To: hi,
		Options: indicator.Options{MinCoverage: *minCov / 100, Adjust: *adjust},
	})
	if err != nil {
		return err
	}
	name := filepath.Base(st.Path())
	if err := report.Write(*out, r, report.Meta{Node: name, StoreID: st.ID(), Created: time.Now().In(loc)}); err != nil {
		return err
	}
	fmt.Fprintf(std.out, "wrote %s, %s and %s in %s: %d days, %d periods, %.1f %% valid data\n",
		report.HTMLFile, report.DailyFile, report.HourlyFile, *out, len(r.Days), len(r.Periods), 100*r.Coverage.Share)
	return nil
}
