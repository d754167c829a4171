package main

import (
	"context"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/lib/query"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
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
	if _, _, err := rf.check(); err != nil {
		return err
	}
	path, zone, err := sf.target()
	if err != nil {
		return err
	}
	req := rf.request()
	req.TimeZone = zone
	// The request may be answered by the daemon's process: it gets the directory as an
	// absolute path, and the profile file's text rather than a path it may not read.
	req.OutName = req.Out
	if abs, err := filepath.Abs(req.Out); err == nil {
		req.Out = abs
	}
	if isProfileFile(req.Profile) {
		b, err := os.ReadFile(req.Profile)
		if err != nil {
			return badInput("--profile: profile %s: %v", req.Profile, err)
		}
		req.ProfileText = string(b)
	}
	return sf.read(ctx, std, path, query.Request{Report: &req})
}

// isProfileFile reports whether a --profile value names a file rather than a built-in profile
// (as profiles.Load tells them apart).
func isProfileFile(name string) bool {
	return strings.HasSuffix(name, ".toml") || strings.ContainsRune(name, filepath.Separator)
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

// request is the report the flags ask for.
func (f reportFlags) request() query.Report {
	return query.Report{From: *f.from, To: *f.to, Profile: *f.prof, LimitZone: *f.zone, Out: *f.out, MinCoverage: *f.minCov, Adjust: *f.adjust}
}

// check checks the flags that need no store and loads the profile and zone.
func (f reportFlags) check() (*profiles.Profile, *profiles.Zone, error) {
	return f.request().Check()
}

// timeRange parses --from and --to, dates in loc.
func (f reportFlags) timeRange(loc *time.Location) (lo, hi time.Time, err error) {
	return query.ReportRange(*f.from, *f.to, loc)
}

func (f reportFlags) options() indicator.Options { return f.request().Options() }
