// Package report turns a store's records into regulatory indicators and a report: a
// self-contained HTML page with plots (gonum.org/v1/plot, embedded as data URIs), and CSV files
// of the daily and hourly indicators.
//
// # Model
//
// Compute reads the records of a range from a buffer.Store (second, minute, event, gap and
// calibration records, in short read transactions through Store.Range) into an
// indicator.Builder and returns its Result. The computation itself lives in the pure
// sub-package indicator; this package does the reading and the writing.
//
// ClosedPeriod computes the indicators of the period that closed last, for publishing when a
// period ends. Write renders a Result into a directory.
//
// A fleet report (ComputeFleet over store files, ComputeFleetFrom over other Records sources
// such as the collector's database) runs Compute for each node in turn, so every node's
// numbers come from the same machinery and validity rule as its own report, and adds what only
// many nodes give: a map of their positions (Project), a node-by-day coverage and a
// node-by-hour level chart, and the happenings several nodes heard (Simultaneous). WriteFleet
// renders it. CheckColocation compares nodes standing side by side with their median before
// an array goes out. Every report names each node's id and site in its header and CSV rows.
//
// Every report carries its cautions: leqnode's numbers are indicative unless the whole chain (a
// type-approved class 1 instrument with traceable calibration) is verified, and local rules and
// accredited practice prevail.
package report

import (
	"context"
	"fmt"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// Config selects what a report covers.
type Config struct {
	Profile  *profiles.Profile
	Zone     *profiles.Zone // nil: no limits
	Location *time.Location // the node's time zone; nil means UTC
	From, To time.Time      // [From, To)
	Options  indicator.Options
	// skipSeconds reads minute records only (see FleetConfig.Seconds).
	skipSeconds bool
}

// Records is where a report reads records from: a buffer.Store, or another source of the same
// records (the collector's database, package fleetdb). Range calls fn for each record of kind k
// whose time lies in [from, to), in time order.
type Records interface {
	Range(k record.Kind, from, to time.Time, fn func(record.Record) error) error
}

// Compute reads the records of [cfg.From, cfg.To) from st and computes the indicators.
func Compute(ctx context.Context, st Records, cfg Config) (*indicator.Result, error) {
	if cfg.Profile == nil {
		return nil, fmt.Errorf("report: no profile given")
	}
	if !cfg.From.Before(cfg.To) {
		return nil, fmt.Errorf("report: range start %s is not before its end %s", cfg.From.Format(time.RFC3339), cfg.To.Format(time.RFC3339))
	}
	loc := cfg.Location
	if loc == nil {
		loc = time.UTC
	}
	b := indicator.NewBuilder(cfg.Profile, cfg.Zone, loc, cfg.From, cfg.To, cfg.Options)
	var n int
	check := func() error {
		n++
		if n&4095 == 0 {
			return ctx.Err()
		}
		return nil
	}
	steps := []struct {
		kind     record.Kind
		from, to time.Time
		add      func(record.Record)
	}{
		{record.KindSecond, cfg.From, cfg.To, func(r record.Record) { b.AddSecond(r.(*record.Second)) }},
		{record.KindMinute, cfg.From, cfg.To, func(r record.Record) { b.AddMinute(r.(*record.Minute)) }},
		{record.KindEvent, cfg.From, cfg.To, func(r record.Record) { b.AddEvent(r.(*record.Event)) }},
		// A gap that began before the range may reach into it: read gaps from the start.
		{record.KindGap, time.Unix(0, 0), cfg.To, func(r record.Record) { b.AddGap(r.(*record.Gap)) }},
		{record.KindCalibration, cfg.From, cfg.To, func(r record.Record) { b.AddCalibration(r.(*record.Calibration)) }},
	}
	for _, s := range steps {
		if s.kind == record.KindSecond && cfg.skipSeconds {
			continue
		}
		err := st.Range(s.kind, s.from, s.to, func(r record.Record) error {
			s.add(r)
			return check()
		})
		if err != nil {
			return nil, fmt.Errorf("report: reading %s records: %w", s.kind, err)
		}
	}
	return b.Result(), nil
}

// ClosedPeriod computes the indicators of the latest period of prof that ended at or before
// now, for publishing when a period closes: the caller calls it once the period's last
// records are stored (say a minute after the boundary). It returns the period's indicators and
// its interval.
func ClosedPeriod(ctx context.Context, st Records, prof *profiles.Profile, zone *profiles.Zone, loc *time.Location, now time.Time, opt indicator.Options) (*indicator.Period, profiles.Interval, error) {
	if loc == nil {
		loc = time.UTC
	}
	iv := prof.LastClosed(now, loc)
	r, err := Compute(ctx, st, Config{Profile: prof, Zone: zone, Location: loc, From: iv.From, To: iv.To, Options: opt})
	if err != nil {
		return nil, iv, err
	}
	for i := range r.Periods {
		if r.Periods[i].From.Equal(iv.From) {
			return &r.Periods[i], iv, nil
		}
	}
	return nil, iv, fmt.Errorf("report: period %s to %s not found", iv.From.Format(time.RFC3339), iv.To.Format(time.RFC3339))
}
