package query

import (
	"context"
	"fmt"
	"io"
	"path/filepath"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/lib/report"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// Report computes the regulatory indicators of a range (package report) and writes report.html,
// daily.csv and hourly.csv into a directory; its output is one line naming what it wrote.
type Report struct {
	From string `json:"from"` // start of the half-open range: RFC 3339 or YYYY-MM-DD
	To   string `json:"to"`   // end of the range, excluded
	// Profile is a built-in period profile's name, or a profile file ending in .toml.
	Profile string `json:"profile"`
	// ProfileText, when set, is the content of the profile file Profile names, read by the
	// caller: the daemon then reads no file of the user's.
	ProfileText string `json:"profile_text,omitempty"`
	// LimitZone is the profile's zone whose limits apply (e.g. residential); empty: no limits.
	LimitZone string `json:"limit_zone,omitempty"`
	// MinCoverage is the percent of valid seconds under which a period is marked (0 < p <= 100).
	MinCoverage float64 `json:"min_coverage"`
	// Adjust adds rating adjustments for tonal and impulsive periods (ISO 1996-1 style).
	Adjust bool `json:"adjust,omitempty"`
	// Out is the directory the files are written to. Through the control socket it is
	// written by the daemon's process: give an absolute path.
	Out string `json:"out"`
	// OutName is the directory as the user named it, for the message; empty: Out.
	OutName string `json:"out_name,omitempty"`
	// TimeZone is the IANA zone dates are read in (the node's configured one); empty: the
	// zone of the store's latest session record, else UTC.
	TimeZone string `json:"time_zone,omitempty"`
}

// Check checks the fields that need no store and loads the profile and its limit zone (nil
// when LimitZone is empty).
func (r Report) Check() (*profiles.Profile, *profiles.Zone, error) {
	switch {
	case r.From == "" || r.To == "":
		return nil, nil, BadRequest("give the range with --from DATE --to DATE (YYYY-MM-DD or RFC 3339; --to is excluded)")
	case r.Profile == "":
		return nil, nil, BadRequest("give the period profile with --profile (%s, or a .toml file)", strings.Join(profiles.Names(), ", "))
	case r.Out == "":
		return nil, nil, BadRequest("give the output directory with --out DIR")
	case !(r.MinCoverage > 0 && r.MinCoverage <= 100):
		return nil, nil, BadRequest("--min-coverage %g: give a percentage above 0 and at most 100", r.MinCoverage)
	}
	var p *profiles.Profile
	var err error
	if r.ProfileText != "" {
		p, err = profiles.Parse([]byte(r.ProfileText), strings.TrimSuffix(filepath.Base(r.Profile), ".toml"), r.Profile)
	} else {
		p, err = profiles.Load(r.Profile)
	}
	if err != nil {
		return nil, nil, BadRequest("--profile: %v", err)
	}
	var z *profiles.Zone
	if r.LimitZone != "" {
		if z, err = p.Zone(r.LimitZone); err != nil {
			return nil, nil, BadRequest("--zone: %v", err)
		}
	}
	return p, z, nil
}

// Options returns the indicator options the request asks for.
func (r Report) Options() indicator.Options {
	return indicator.Options{MinCoverage: r.MinCoverage / 100, Adjust: r.Adjust}
}

// MaxReportDays is the longest range one report covers.
const MaxReportDays = 400

// ReportRange parses a report's range: from and to as ParseWhen reads them, from before to,
// at most MaxReportDays apart. An error wraps ErrBadRequest.
func ReportRange(from, to string, loc *time.Location) (lo, hi time.Time, err error) {
	if lo, err = ParseWhen("from", from, loc); err != nil {
		return lo, hi, err
	}
	if hi, err = ParseWhen("to", to, loc); err != nil {
		return lo, hi, err
	}
	if !lo.Before(hi) {
		return lo, hi, notBefore(lo, hi)
	}
	if hi.Sub(lo) > MaxReportDays*24*time.Hour {
		return lo, hi, BadRequest("the range of %.0f days is too long for one report: give at most %d days", hi.Sub(lo).Hours()/24, MaxReportDays)
	}
	return lo, hi, nil
}

func doReport(ctx context.Context, st *buffer.Store, req Report, w io.Writer) error {
	p, z, err := req.Check()
	if err != nil {
		return err
	}
	loc := Zone(st, req.TimeZone)
	lo, hi, err := ReportRange(req.From, req.To, loc)
	if err != nil {
		return err
	}
	r, err := report.Compute(ctx, st, report.Config{Profile: p, Zone: z, Location: loc, From: lo, To: hi, Options: req.Options()})
	if err != nil {
		return err
	}
	id, err := report.ReadIdentity(st, hi)
	if err != nil {
		return err
	}
	meta := report.Meta{Node: filepath.Base(st.Path()), NodeID: id.NodeID, Site: id.Site, StoreID: st.ID(), Created: time.Now().In(loc)}
	if err := report.Write(req.Out, r, meta); err != nil {
		return err
	}
	name := req.OutName
	if name == "" {
		name = req.Out
	}
	_, err = fmt.Fprintf(w, "wrote %s, %s and %s in %s for node %s: %d days, %d periods, %.1f %% valid data\n",
		report.HTMLFile, report.DailyFile, report.HourlyFile, name, id.NodeID, len(r.Days), len(r.Periods), 100*r.Coverage.Share)
	return err
}
