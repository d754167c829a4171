package report

import (
	"bytes"
	"fmt"
	"html/template"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// Files written by WriteFleet, in the output directory.
const (
	FleetHTMLFile     = "fleet.html"
	FleetNodesFile    = "fleet-nodes.csv"
	FleetDailyFile    = "fleet-daily.csv"
	FleetHourlyFile   = "fleet-hourly.csv"
	FleetCoverageFile = "fleet-coverage.csv"
	SimultaneousFile  = "simultaneous.csv"
)

// FleetMeta describes a fleet report for its header.
type FleetMeta struct {
	Created time.Time
	// MapIndicator names the indicator the map colours the nodes by (see IndicatorNames);
	// empty means the default.
	MapIndicator string
}

// happeningsShown is the number of happenings listed in the HTML page, loudest first (the CSV
// holds them all).
const happeningsShown = 50

// WriteFleet renders f into dir (created if needed): fleet.html and the CSV files, each row of
// which names its node id and site. Files are written to a temporary name and renamed.
func WriteFleet(dir string, f *Fleet, meta FleetMeta) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("report: output directory %s: %w", dir, err)
	}
	page, err := FleetHTML(f, meta)
	if err != nil {
		return err
	}
	var daily, hourly []byte
	for i, n := range f.Nodes {
		d, h := nodeColumns(DailyCSV(n.Result), n.NodeID, n.Site), nodeColumns(HourlyCSV(n.Result), n.NodeID, n.Site)
		if i > 0 { // one header
			d, h = d[bytes.IndexByte(d, '\n')+1:], h[bytes.IndexByte(h, '\n')+1:]
		}
		daily, hourly = append(daily, d...), append(hourly, h...)
	}
	for _, w := range []struct {
		name string
		data []byte
	}{{FleetHTMLFile, page}, {FleetNodesFile, FleetNodesCSV(f)}, {FleetDailyFile, daily}, {FleetHourlyFile, hourly},
		{FleetCoverageFile, fleetCoverageCSV(f)}, {SimultaneousFile, SimultaneousCSV(f)}} {
		if err := writeFile(filepath.Join(dir, w.name), w.data); err != nil {
			return err
		}
	}
	return nil
}

func healthText(hs []HealthCount) string {
	var parts []string
	for _, h := range hs {
		parts = append(parts, fmt.Sprintf("%s:%d", h.Flag, h.Snapshots))
	}
	return strings.Join(parts, " ")
}

func coord(v float64, ok bool) string {
	if !ok {
		return ""
	}
	return strconv.FormatFloat(v, 'f', -1, 64)
}

// FleetNodesCSV returns one row per node: position, the range's LAeq, each period's long-term
// level, limit, periods above it and coverage, the whole-day indicator over the range,
// coverage, calibrator checks and health flags.
func FleetNodesCSV(f *Fleet) []byte {
	w := newMemCSV()
	head := []string{"node_id", "site", "latitude", "longitude", "store_id", "LAeq", "LAeq_bound"}
	prof := f.Config.Profile
	for _, p := range prof.Periods {
		n := p.Name
		head = append(head, n+"_LAeq", n+"_LAeq_bound", n+"_LAF10", n+"_LAF90", n+"_limit", n+"_periods_above_limit", n+"_events", n+"_coverage_pct", n+"_low_coverage")
	}
	if c := prof.Composite; c != "" {
		head = append(head, c)
	}
	w.Write(append(head, "coverage_pct", "low_coverage", "calibrations", "calibrations_failed", "health_snapshots", "health_flags"))
	for _, n := range f.Nodes {
		r := n.Result
		row := []string{n.NodeID, n.Site, coord(n.Latitude, n.HasLocation), coord(n.Longitude, n.HasLocation), n.StoreID, num(n.LAeq), n.Bound.String()}
		for _, p := range prof.Periods {
			o := overallOf(r, p.Name)
			if o == nil {
				row = append(row, "", "", "", "", "", "", "", "", "")
				continue
			}
			row = append(row, num(o.LAeq), o.Bound.String(), num(o.LAF10), num(o.LAF90), num(o.Limit), strconv.Itoa(o.Exceedances),
				strconv.Itoa(o.Events), pct(o.Coverage.Share), strconv.FormatBool(o.Coverage.Low))
		}
		if prof.Composite != "" {
			row = append(row, num(r.Composite))
		}
		w.Write(append(row, pct(r.Coverage.Share), strconv.FormatBool(r.Coverage.Low), strconv.Itoa(n.Calibrations), strconv.Itoa(n.Failed),
			strconv.Itoa(n.Snapshots), healthText(n.Health)))
	}
	return w.Bytes()
}

func overallOf(r *indicator.Result, name string) *indicator.Overall {
	for i := range r.Overall {
		if r.Overall[i].Name == name {
			return &r.Overall[i]
		}
	}
	return nil
}

// fleetCoverageCSV returns the node-by-day coverage chart's numbers: one row per node and date.
func fleetCoverageCSV(f *Fleet) []byte {
	w := newMemCSV()
	w.Write([]string{"node_id", "site", "date", "coverage_pct"})
	g, days := f.coverageGrid()
	for i, n := range f.Nodes {
		for k, d := range days {
			v := ""
			if !math.IsNaN(g.v[i][k]) {
				v = strconv.FormatFloat(g.v[i][k], 'f', 1, 64)
			}
			w.Write([]string{n.NodeID, n.Site, d.Format(time.DateOnly), v})
		}
	}
	return w.Bytes()
}

// SimultaneousCSV returns one row per node sighting of each happening: its number, its start,
// the node, the order in which the node saw it, its delay after the first, and the node's event
// levels.
func SimultaneousCSV(f *Fleet) []byte {
	w := newMemCSV()
	w.Write([]string{"happening", "start", "node_id", "site", "order", "delay_s", "event_start", "duration_s", "LAFmax", "LAeq", "LAE", "LCpeak"})
	loc := f.Config.Location
	for i, h := range f.Happenings {
		for k, s := range h.Sightings {
			n := f.Nodes[s.Node]
			e := s.Event
			w.Write([]string{strconv.Itoa(i + 1), h.Start.In(loc).Format(time.RFC3339Nano), n.NodeID, n.Site, strconv.Itoa(k + 1),
				strconv.FormatFloat(s.Delay.Seconds(), 'f', 3, 64), e.Start.In(loc).Format(time.RFC3339Nano),
				strconv.FormatFloat(e.End.Sub(e.Start).Seconds(), 'f', 1, 64), num(e.LAFmax), num(e.LAeq), num(e.LAE), num(e.LCpeak)})
		}
	}
	return w.Bytes()
}

type fleetPage struct {
	F          *Fleet
	Meta       FleetMeta
	From, To   string
	Zone       string
	Comp       string
	Periods    []string
	Rows       []fleetRow
	Plots      []plotImage
	Unplaced   []string
	Happenings []happeningRow
	NHappen    int
	Window     string
	Indicator  string
}

type fleetRow struct {
	ID, Site, LAeq, Comp, Cov, Health string
	Levels                            []fleetLevel
	Cals, Failed, Above               int
	Low, FromFile                     bool
}

type fleetLevel struct {
	LAeq  string
	Above int
	Low   bool
}

type happeningRow struct {
	Start  string
	Nodes  int
	MaxLAE string
	Seen   []string // "node +0.4 s: LAFmax 81.2, LAE 88.0"
}

// FleetHTML renders the fleet report page: self-contained, plots embedded as data URIs, no
// scripts and no external resources.
func FleetHTML(f *Fleet, meta FleetMeta) ([]byte, error) {
	loc := f.Config.Location
	lt := func(t time.Time) string { return t.In(loc).Format("2006-01-02 15:04") }
	prof := f.Config.Profile
	pg := fleetPage{F: f, Meta: meta, From: lt(f.Config.From), To: lt(f.Config.To), Comp: prof.Composite,
		Window: f.Config.Window.String(), NHappen: len(f.Happenings)}
	if f.Config.Zone != nil {
		pg.Zone = f.Config.Zone.Title
	}
	for _, p := range prof.Periods {
		pg.Periods = append(pg.Periods, p.Name)
	}
	for _, n := range f.Nodes {
		row := fleetRow{ID: n.NodeID, Site: n.Site, LAeq: bounded(n.LAeq, n.Bound), Comp: num(n.Result.Composite), Cov: pct(n.Result.Coverage.Share),
			Low: n.Result.Coverage.Low, Health: healthText(n.Health), Cals: n.Calibrations, Failed: n.Failed, FromFile: n.IDFromFile}
		for _, p := range prof.Periods {
			var l fleetLevel
			if o := overallOf(n.Result, p.Name); o != nil {
				l = fleetLevel{LAeq: bounded(o.LAeq, o.Bound), Above: o.Exceedances, Low: o.Coverage.Low}
				row.Above += o.Exceedances
			}
			row.Levels = append(row.Levels, l)
		}
		pg.Rows = append(pg.Rows, row)
	}
	// The map.
	ind := meta.MapIndicator
	if ind == "" && len(f.Nodes) > 0 {
		ind = IndicatorNames(f.Nodes[0].Result)[0]
	}
	pg.Indicator = ind
	var names []string
	var lat, lon, vals []float64
	for _, n := range f.Nodes {
		if !n.HasLocation {
			pg.Unplaced = append(pg.Unplaced, n.NodeID)
			continue
		}
		v, ok := n.IndicatorValue(ind)
		if !ok {
			return nil, fmt.Errorf("report: map indicator %q: use one of %s", ind, strings.Join(IndicatorNames(n.Result), ", "))
		}
		names, lat, lon, vals = append(names, n.NodeID), append(lat, n.Latitude), append(lon, n.Longitude), append(vals, v)
	}
	type mk struct {
		title, alt string
		draw       func() ([]byte, error)
	}
	for _, m := range []mk{
		{"Map", "node positions in metres around their centre, coloured by " + ind + ", with a distance scale; drawn from the positions alone", func() ([]byte, error) { return mapPlot(names, lat, lon, vals, ind) }},
		{"Coverage per node and day", "share of valid seconds of each node on each local date", f.coverageMapPlot},
		{"Hourly levels per node", "LAeq of each node in each hour of the range", f.hourlyMapPlot},
	} {
		img, err := m.draw()
		if err != nil {
			return nil, fmt.Errorf("report: plot %q: %w", m.title, err)
		}
		pg.Plots = append(pg.Plots, plotImage{Title: m.title, Alt: m.alt, Src: dataURI(img)})
	}
	// The loudest happenings.
	hs := make([]int, len(f.Happenings))
	maxLAE := func(h Happening) float64 {
		m := math.Inf(-1)
		for _, s := range h.Sightings {
			m = max(m, s.Event.LAE)
		}
		return m
	}
	for i := range hs {
		hs[i] = i
	}
	sort.SliceStable(hs, func(a, b int) bool { return maxLAE(f.Happenings[hs[a]]) > maxLAE(f.Happenings[hs[b]]) })
	for _, i := range hs[:min(len(hs), happeningsShown)] {
		h := f.Happenings[i]
		row := happeningRow{Start: h.Start.In(loc).Format("2006-01-02 15:04:05.0"), Nodes: len(h.Sightings), MaxLAE: num(maxLAE(h))}
		for _, s := range h.Sightings {
			row.Seen = append(row.Seen, fmt.Sprintf("%s +%.1f s: LAFmax %s, LAE %s", f.Nodes[s.Node].NodeID, s.Delay.Seconds(), num(s.Event.LAFmax), num(s.Event.LAE)))
		}
		pg.Happenings = append(pg.Happenings, row)
	}
	var buf bytes.Buffer
	if err := fleetTemplate.Execute(&buf, pg); err != nil {
		return nil, fmt.Errorf("report: rendering HTML: %w", err)
	}
	return buf.Bytes(), nil
}

var fleetTemplate = template.Must(template.New("fleet").Funcs(template.FuncMap{
	"mulf": func(v float64) float64 { return 100 * v },
}).Parse(sharedHTML + fleetHTML))

const fleetHTML = `<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>leqnode fleet report {{.From}} to {{.To}}</title>
{{template "style"}}</head><body>
<h1>Noise indicators of {{len .F.Nodes}} nodes: {{.F.Config.Profile.Title}}</h1>
<dl>
<dt>Range</dt><dd>{{.From}} to {{.To}} ({{.F.Config.Location}}), half-open</dd>
<dt>Nodes</dt><dd>{{range $i, $r := .Rows}}{{if $i}}, {{end}}{{$r.ID}}{{end}}</dd>
<dt>Profile</dt><dd>{{.F.Config.Profile.Name}}: {{.F.Config.Profile.Source}}</dd>
<dt>Zone</dt><dd>{{if .Zone}}{{.Zone}}{{else}}none (no limits){{end}}</dd>
<dt>Generated</dt><dd>{{.Meta.Created.Format "2006-01-02 15:04 MST"}} by leqnode</dd>
</dl>
{{template "cautions"}}

<h2>Nodes</h2>
<div class="wide"><table><tr><th class="l">Node</th><th class="l">Site</th><th>LAeq</th>{{range .Periods}}<th>{{.}} LAeq</th>{{end}}{{if .Comp}}<th>{{.Comp}}</th>{{end}}<th>Periods above limit</th><th>Coverage %</th><th>Calibrator checks</th><th class="l">Health flags (snapshots)</th></tr>
{{$comp := .Comp}}{{range .Rows}}<tr class="{{if .Above}}over{{else if .Low}}low{{end}}"><td class="l">{{.ID}}{{if .FromFile}} (file name){{end}}</td><td class="l">{{.Site}}</td><td>{{.LAeq}}</td>{{range .Levels}}<td{{if .Low}} class="low"{{end}}>{{.LAeq}}{{if .Above}} ▲{{.Above}}{{end}}</td>{{end}}{{if $comp}}<td>{{.Comp}}</td>{{end}}<td>{{.Above}}</td><td>{{.Cov}}</td><td>{{.Cals}}{{if .Failed}} ({{.Failed}} failed){{end}}</td><td class="l">{{.Health}}</td></tr>
{{end}}</table></div>
<p>Levels are the long-term levels of each period name over the range (energy means of the valid seconds, ISO 1996-1:2016, 3.1.7). ▲n: n periods above the zone's limit (a level rounded to 0.1 dB greater than the limit; periods the range cuts are not counted). Yellow: coverage under {{printf "%.0f" (mulf .F.Config.Options.MinCoverage)}} % (shown, not hidden). ≥ marks a lower bound (overloaded seconds counted), ≤ an upper bound. Each node's own report (leqnode report --db) gives its periods and days in full; the CSV files give every node's days and hours.</p>

{{range .Plots}}<figure><img src="{{.Src}}" alt="{{.Alt}}"><figcaption>{{.Title}}: {{.Alt}}.</figcaption></figure>
{{end}}{{if .Unplaced}}<p>Not on the map (no position in their session records): {{range $i, $n := .Unplaced}}{{if $i}}, {{end}}{{$n}}{{end}}.</p>{{end}}

<h2>Simultaneous events</h2>
{{if .Happenings}}<p>Happenings seen by two or more nodes within {{.Window}} of each other: {{.NHappen}}. Listed: the {{len .Happenings}} with the largest sound exposure level, each node in the order it heard the happening.</p>
<div class="wide"><table><tr><th class="l">First start</th><th>Nodes</th><th>Largest LAE</th><th class="l">Seen by (delay after the first start)</th></tr>
{{range .Happenings}}<tr><td class="l">{{.Start}}</td><td>{{.Nodes}}</td><td>{{.MaxLAE}}</td><td class="l">{{range $i, $s := .Seen}}{{if $i}}; {{end}}{{$s}}{{end}}</td></tr>
{{end}}</table></div>{{else}}<p>No event was seen by two or more nodes within {{.Window}} of each other.</p>{{end}}
<p>The order follows each node's event start, which rests on its clock: nodes whose clocks are not synchronised (health flag clock-unsynced) may show a false order. Sound takes about 3 s to cover a kilometre.</p>

<h2>Method</h2>
<ul>
<li>Every node's indicators are computed as in its single-node report, with the same validity rule (which seconds count), in one time zone ({{.F.Config.Location}}).{{if not .F.Config.Seconds}} They are read from the minute records, which the node builds from the seconds the rule counts: levels agree with a report from second records to the minute records' 0.01 dB.{{end}}</li>
<li>LAeq over the range: energy mean of every valid second (ISO 1996-1:2016, 3.1.7). {{if .Comp}}{{.Comp}}: from the long-term period levels (Directive 2002/49/EC, Annex I).{{end}}</li>
<li>Map: positions from the nodes' session records (as the nodes rounded them), equirectangular projection around the mean latitude, metres on the axes and a scale bar; colours by {{.Indicator}}.</li>
<li>Simultaneous events: events whose starts lie within {{.Window}} of the first one's, one per node.</li>
</ul>
<p class="part">leqnode — open-source noise monitoring node.</p>
</body></html>
`
