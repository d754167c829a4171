// Package profiles holds period profiles: how a regulation splits the day into periods (day,
// evening, night), the penalty each period's level carries in a whole-day indicator such as
// Lden, and the limits that apply per zone.
//
// # Model
//
// A profile lists its periods in the order of the reporting day, each with the local clock time
// at which it starts; a period runs until the next one starts, and the last runs until the first
// starts again on the next day. The reporting day of date D therefore runs from the first
// period's start on D to the same clock time on D+1: for Lden, day D 07:00-19:00, evening
// 19:00-23:00 and the night from 23:00 on D to 07:00 on D+1.
//
// Periods are cut in local time through an IANA time zone, so a period that spans a
// daylight-saving change has its true length: in Europe/Berlin the night before the last Sunday
// of March lasts 7 hours and the night before the last Sunday of October 9 hours.
//
// The whole-day indicator (Lden, Ldn) is the energy mean of the period levels plus their
// penalties, weighted by the periods' lengths (Directive 2002/49/EC, Annex I, section 1, with
// its 12, 4 and 8 hours). Moving a period's start moves the weights with it.
//
// The built-in profiles (eu-lden, ldn, india-2000) are embedded in the program; a user-defined
// profile is a TOML file of the same form (see FORMAT.md in this directory). Files are decoded
// strictly: an unknown key or a bad value is an error naming the file, the line and the fix.
package profiles

import (
	"embed"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/leqnode/leqnode/node/lib/strict"
)

//go:embed *.toml
var builtin embed.FS

// Profile is a parsed period profile.
type Profile struct {
	Name      string // the built-in name or the file name without .toml
	Title     string // a human title for reports
	Source    string // the regulation or standard the profile follows
	Composite string // name of the whole-day indicator ("Lden", "Ldn"), or "" for none
	Periods   []Period
	Zones     []Zone
}

// Period is one period of the day.
type Period struct {
	Name    string
	Start   Clock   // local clock time at which the period starts
	Penalty float64 // dB added to the period's level in the whole-day indicator
}

// Zone is a kind of area with its limits.
type Zone struct {
	Name  string
	Title string
	// Limits maps a period name, or the whole-day indicator's name in lower case ("lden"),
	// to a limit in dB(A): a level above it is an exceedance.
	Limits map[string]float64
}

// Clock is a local clock time in minutes after midnight, 0 to 1439.
type Clock int

// String formats the clock time as HH:MM.
func (c Clock) String() string { return fmt.Sprintf("%02d:%02d", int(c)/60, int(c)%60) }

// UnmarshalText parses HH:MM.
func (c *Clock) UnmarshalText(b []byte) error {
	var h, m int
	s := string(b)
	if len(s) != 5 || s[2] != ':' {
		return fmt.Errorf("start %q is not a clock time: write HH:MM, e.g. \"07:00\"", s)
	}
	if _, err := fmt.Sscanf(s, "%02d:%02d", &h, &m); err != nil || h < 0 || h > 23 || m < 0 || m > 59 {
		return fmt.Errorf("start %q is not a clock time: write HH:MM from 00:00 to 23:59", s)
	}
	*c = Clock(h*60 + m)
	return nil
}

// Zone returns the zone named name.
func (p *Profile) Zone(name string) (*Zone, error) {
	var names []string
	for i := range p.Zones {
		if p.Zones[i].Name == name {
			return &p.Zones[i], nil
		}
		names = append(names, p.Zones[i].Name)
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("profile %s has no zones: leave out --zone, or add [[zone]] tables to a copy of the profile", p.Name)
	}
	return nil, fmt.Errorf("profile %s has no zone %q: use one of %s", p.Name, name, strings.Join(names, ", "))
}

// Interval is one period of one reporting day, in absolute time.
type Interval struct {
	Period   int       // index into Profile.Periods
	Day      time.Time // local midnight of the reporting day's date
	From, To time.Time // [From, To)
}

// Hours returns the true length of the interval in hours.
func (iv Interval) Hours() float64 { return iv.To.Sub(iv.From).Hours() }

// at returns the absolute time of clock time c on the local date of day (midnight), n days on.
func at(day time.Time, n int, c Clock, loc *time.Location) time.Time {
	y, m, d := day.Date()
	return time.Date(y, m, d+n, int(c)/60, int(c)%60, 0, 0, loc)
}

// Day returns the periods of the reporting day of the local date of day, in order.
func (p *Profile) Day(day time.Time, loc *time.Location) []Interval {
	day = day.In(loc)
	y, m, d := day.Date()
	mid := time.Date(y, m, d, 0, 0, 0, 0, loc)
	first := p.Periods[0].Start
	abs := func(c Clock) time.Time {
		if c >= first {
			return at(mid, 0, c, loc)
		}
		return at(mid, 1, c, loc) // after midnight: on the next date
	}
	out := make([]Interval, len(p.Periods))
	for i, per := range p.Periods {
		to := at(mid, 1, first, loc)
		if i+1 < len(p.Periods) {
			to = abs(p.Periods[i+1].Start)
		}
		out[i] = Interval{Period: i, Day: mid, From: abs(per.Start), To: to}
	}
	return out
}

// ReportingDay returns the local midnight of the reporting day that holds t: the date on which
// the reporting day holding t began.
func (p *Profile) ReportingDay(t time.Time, loc *time.Location) time.Time {
	t = t.In(loc)
	y, m, d := t.Date()
	mid := time.Date(y, m, d, 0, 0, 0, 0, loc)
	if t.Before(at(mid, 0, p.Periods[0].Start, loc)) {
		mid = time.Date(y, m, d-1, 0, 0, 0, 0, loc)
	}
	return mid
}

// Intervals returns every period interval that overlaps [from, to), in time order.
func (p *Profile) Intervals(from, to time.Time, loc *time.Location) []Interval {
	var out []Interval
	for day := p.ReportingDay(from, loc); ; {
		ivs := p.Day(day, loc)
		if !ivs[0].From.Before(to) {
			return out
		}
		for _, iv := range ivs {
			if iv.From.Before(to) && from.Before(iv.To) {
				out = append(out, iv)
			}
		}
		y, m, d := day.Date()
		day = time.Date(y, m, d+1, 0, 0, 0, 0, loc)
	}
}

// PeriodAt returns the interval that holds t.
func (p *Profile) PeriodAt(t time.Time, loc *time.Location) Interval {
	for _, iv := range p.Day(p.ReportingDay(t, loc), loc) {
		if !t.Before(iv.From) && t.Before(iv.To) {
			return iv
		}
	}
	// Unreachable for a valid profile: the periods tile the reporting day.
	return Interval{}
}

// LastClosed returns the latest interval that ended at or before t: the period whose
// indicators can be published at t.
func (p *Profile) LastClosed(t time.Time, loc *time.Location) Interval {
	cur := p.PeriodAt(t, loc)
	return p.PeriodAt(cur.From.Add(-time.Nanosecond), loc)
}

// Names returns the names of the built-in profiles, sorted.
func Names() []string {
	ents, _ := builtin.ReadDir(".")
	var out []string
	for _, e := range ents {
		out = append(out, strings.TrimSuffix(e.Name(), ".toml"))
	}
	sort.Strings(out)
	return out
}

// Load returns the built-in profile of that name, or, when name ends in .toml or holds a path
// separator, the profile in that file.
func Load(name string) (*Profile, error) {
	if strings.HasSuffix(name, ".toml") || strings.ContainsRune(name, filepath.Separator) {
		data, err := os.ReadFile(name)
		if err != nil {
			return nil, fmt.Errorf("profile %s: %w", name, err)
		}
		return Parse(data, strings.TrimSuffix(filepath.Base(name), ".toml"), name)
	}
	data, err := builtin.ReadFile(name + ".toml")
	if err != nil {
		return nil, fmt.Errorf("no built-in profile %q: use one of %s, or give a profile file ending in .toml", name, strings.Join(Names(), ", "))
	}
	return Parse(data, name, "configs/profiles/"+name+".toml")
}

// file is the TOML form of a profile.
type file struct {
	Title     string       `toml:"title"`
	Source    string       `toml:"source"`
	Composite string       `toml:"composite"`
	Period    []filePeriod `toml:"period"`
	Zone      []fileZone   `toml:"zone"`
}

type filePeriod struct {
	Name    string   `toml:"name"`
	Start   *Clock   `toml:"start"`
	Penalty *float64 `toml:"penalty"`
}

type fileZone struct {
	Name   string             `toml:"name"`
	Title  string             `toml:"title"`
	Limits map[string]float64 `toml:"limits"`
}

// Parse decodes a profile strictly. name becomes Profile.Name; where names the file in errors.
func Parse(data []byte, name, where string) (*Profile, error) {
	var f file
	if err := strict.TOML(data, &f); err != nil {
		// Every problem, on one line: exact key names (keys in another case are unknown), no
		// unknown keys, values of the right type.
		var parts []string
		for _, p := range strict.Problems(err) {
			at := where
			if p.Line > 0 {
				at = fmt.Sprintf("%s:%d", where, p.Line)
			}
			msg := p.Msg
			if rest, unknown := strings.CutPrefix(p.Msg, "unknown key"); unknown {
				msg = fmt.Sprintf("unknown key %q%s: use title, source, composite, [[period]] (name, start, penalty) and [[zone]] (name, title, limits)", p.Key, rest)
			} else if p.Key != "" {
				msg = fmt.Sprintf("key %q: %s", p.Key, p.Msg)
			}
			parts = append(parts, at+": "+msg)
		}
		return nil, errors.New(strings.Join(parts, "; "))
	}
	line := func(header string, i int) int { return headerLine(data, header, i) }
	p := &Profile{Name: name, Title: f.Title, Source: f.Source, Composite: f.Composite}
	if p.Title == "" {
		p.Title = name
	}
	if len(f.Period) == 0 {
		return nil, fmt.Errorf("%s: no periods: add [[period]] tables with name, start and penalty", where)
	}
	seen := map[string]bool{}
	for i, fp := range f.Period {
		l := line("[[period]]", i)
		switch {
		case fp.Name == "":
			return nil, fmt.Errorf("%s:%d: period %d has no name: add name = \"day\" (or evening, night ...)", where, l, i+1)
		case seen[fp.Name]:
			return nil, fmt.Errorf("%s:%d: period name %q used twice: give each period its own name", where, l, fp.Name)
		case fp.Start == nil:
			return nil, fmt.Errorf("%s:%d: period %q has no start: add start = \"HH:MM\"", where, l, fp.Name)
		}
		seen[fp.Name] = true
		pen := 0.0
		if fp.Penalty != nil {
			pen = *fp.Penalty
		}
		if math.IsNaN(pen) || math.IsInf(pen, 0) || pen < -20 || pen > 30 {
			return nil, fmt.Errorf("%s:%d: period %q penalty %g dB: give a number of dB from -20 to 30", where, l, fp.Name, pen)
		}
		p.Periods = append(p.Periods, Period{Name: fp.Name, Start: *fp.Start, Penalty: pen})
	}
	// The periods must follow one another around the clock, once: starts increase from the
	// first, wrapping past midnight at most once.
	wraps := 0
	for i := range p.Periods {
		a, b := p.Periods[i].Start, p.Periods[(i+1)%len(p.Periods)].Start
		if b <= a {
			wraps++
		}
		if a == b && len(p.Periods) > 1 {
			return nil, fmt.Errorf("%s:%d: periods %q and %q start at the same time %s: give each its own start", where, line("[[period]]", (i+1)%len(p.Periods)), p.Periods[i].Name, p.Periods[(i+1)%len(p.Periods)].Name, a)
		}
	}
	if wraps != 1 {
		return nil, fmt.Errorf("%s:%d: period starts are out of order: list the periods in the order of the day, each starting after the one before", where, line("[[period]]", 0))
	}
	switch p.Composite {
	case "", "Lden", "Ldn":
	default:
		if strings.ContainsAny(p.Composite, " \t\"<>&") {
			return nil, fmt.Errorf("%s: composite %q: give a short name such as \"Lden\", or leave it out", where, p.Composite)
		}
	}
	zseen := map[string]bool{}
	for i, fz := range f.Zone {
		l := line("[[zone]]", i)
		if fz.Name == "" {
			return nil, fmt.Errorf("%s:%d: zone %d has no name: add name = \"residential\" (or another)", where, l, i+1)
		}
		if zseen[fz.Name] {
			return nil, fmt.Errorf("%s:%d: zone name %q used twice: give each zone its own name", where, l, fz.Name)
		}
		zseen[fz.Name] = true
		for k, v := range fz.Limits {
			if !seen[k] && !(p.Composite != "" && k == strings.ToLower(p.Composite)) {
				return nil, fmt.Errorf("%s:%d: zone %q has a limit for %q, which is no period of the profile: use %s", where, l, fz.Name, k, strings.Join(limitKeys(p), ", "))
			}
			if math.IsNaN(v) || v < 0 || v > 200 {
				return nil, fmt.Errorf("%s:%d: zone %q limit %s = %g dB: give a level from 0 to 200 dB", where, l, fz.Name, k, v)
			}
		}
		title := fz.Title
		if title == "" {
			title = fz.Name
		}
		p.Zones = append(p.Zones, Zone{Name: fz.Name, Title: title, Limits: fz.Limits})
	}
	return p, nil
}

func limitKeys(p *Profile) []string {
	var out []string
	for _, per := range p.Periods {
		out = append(out, per.Name)
	}
	if p.Composite != "" {
		out = append(out, strings.ToLower(p.Composite))
	}
	return out
}

// headerLine returns the line number (from 1) of the i-th occurrence of a table header, or 0.
func headerLine(data []byte, header string, i int) int {
	for n, l := range strings.Split(string(data), "\n") {
		if strings.TrimSpace(l) == header {
			if i == 0 {
				return n + 1
			}
			i--
		}
	}
	return 0
}
