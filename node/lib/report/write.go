package report

import (
	"bytes"
	"encoding/base64"
	"encoding/csv"
	"fmt"
	"html/template"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// Files written by Write, in the output directory.
const (
	HTMLFile   = "report.html"
	DailyFile  = "daily.csv"
	HourlyFile = "hourly.csv"
)

// Meta describes the node and store a report came from, for its header.
type Meta struct {
	Node    string // the store's file name
	NodeID  string // the node's configured id (Identity.NodeID)
	Site    string // the node's measurement site
	StoreID string
	Created time.Time
}

// Write renders r into dir (created if needed): report.html, daily.csv and hourly.csv (each
// CSV row starts with the node id and site of meta). Files
// are written to a temporary name and renamed, so a failed run leaves no half-written file.
func Write(dir string, r *indicator.Result, meta Meta) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("report: output directory %s: %w", dir, err)
	}
	page, err := HTML(r, meta)
	if err != nil {
		return err
	}
	for _, f := range []struct {
		name string
		data []byte
	}{{HTMLFile, page}, {DailyFile, nodeColumns(DailyCSV(r), meta.NodeID, meta.Site)}, {HourlyFile, nodeColumns(HourlyCSV(r), meta.NodeID, meta.Site)}} {
		if err := writeFile(filepath.Join(dir, f.name), f.data); err != nil {
			return err
		}
	}
	return nil
}

func writeFile(path string, data []byte) error {
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, data, 0o644); err != nil {
		return fmt.Errorf("report: writing %s: %w", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		_ = os.Remove(tmp) // best effort: the Rename error is the one to report
		return fmt.Errorf("report: writing %s: %w", path, err)
	}
	return nil
}

// memCSV writes CSV rows into memory. encoding/csv reports only its destination's errors
// (csv.Writer.Error), and a bytes.Buffer takes every byte or panics, so its writes cannot fail
// and return nothing.
type memCSV struct {
	buf bytes.Buffer
	w   *csv.Writer
}

func newMemCSV() *memCSV {
	m := &memCSV{}
	m.w = csv.NewWriter(&m.buf)
	return m
}

// Write adds a row.
func (m *memCSV) Write(row []string) { _ = m.w.Write(row) }

// Bytes returns the rows written.
func (m *memCSV) Bytes() []byte {
	m.w.Flush()
	return m.buf.Bytes()
}

// nodeColumns puts the columns node_id and site in front of every row of a CSV file, so that
// a file read away from its report still says whose it is.
func nodeColumns(data []byte, id, site string) []byte {
	rows, err := csv.NewReader(bytes.NewReader(data)).ReadAll()
	if err != nil {
		return data // our own CSV: cannot happen
	}
	w := newMemCSV()
	for i, row := range rows {
		head := []string{id, site}
		if i == 0 {
			head = []string{"node_id", "site"}
		}
		w.Write(append(head, row...))
	}
	return w.Bytes()
}

// num formats a level with one decimal, or "" for no value.
func num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'f', 1, 64)
}

func pct(v float64) string { return strconv.FormatFloat(100*v, 'f', 1, 64) }

// bounded formats a level with its bound mark: "≥" for a lower bound (overloaded seconds
// counted), "≤" for an upper bound (seconds under the measuring range counted).
func bounded(v float64, b record.Bound) string {
	if n := num(v); n != "" {
		return b.Sign() + n
	}
	return ""
}

// DailyCSV returns one row per reporting day: per period LAeq, LAF10, LAF90, limit, exceedance
// and coverage; the day's LAeq, the whole-day indicator and the day's coverage.
func DailyCSV(r *indicator.Result) []byte {
	w := newMemCSV()
	head := []string{"date", "complete"}
	for _, p := range r.Profile.Periods {
		n := p.Name
		head = append(head, n+"_from", n+"_hours", n+"_LAeq", n+"_LAeq_bound", n+"_LAF10", n+"_LAF90", n+"_limit", n+"_exceeds", n+"_partial", n+"_events", n+"_coverage_pct", n+"_low_coverage")
	}
	head = append(head, "LAeq", "LAeq_bound")
	if c := r.Profile.Composite; c != "" {
		head = append(head, c, c+"_limit", c+"_exceeds")
	}
	head = append(head, "coverage_pct", "low_coverage")
	w.Write(head)
	for _, d := range r.Days {
		row := []string{d.Day.Format(time.DateOnly), strconv.FormatBool(d.Complete)}
		for _, per := range r.Profile.Periods {
			var p *indicator.Period
			for _, k := range d.Periods {
				if r.Periods[k].Name == per.Name {
					p = &r.Periods[k]
				}
			}
			if p == nil {
				row = append(row, "", "", "", "", "", "", "", "", "", "", "", "")
				continue
			}
			row = append(row, p.From.In(r.Location).Format(time.RFC3339), strconv.FormatFloat(p.Hours, 'g', -1, 64),
				num(p.LAeq), p.Bound.String(), num(p.LAF10), num(p.LAF90), num(p.Limit), strconv.FormatBool(p.Exceeds),
				strconv.FormatBool(p.Partial), strconv.Itoa(p.Events), pct(p.Coverage.Share), strconv.FormatBool(p.Coverage.Low))
		}
		row = append(row, num(d.LAeq), d.Bound.String())
		if r.Profile.Composite != "" {
			row = append(row, num(d.Composite), num(d.Limit), strconv.FormatBool(d.Exceeds))
		}
		row = append(row, pct(d.Coverage.Share), strconv.FormatBool(d.Coverage.Low))
		w.Write(row)
	}
	return w.Bytes()
}

// HourlyCSV returns one row per local clock hour: LAeq and what is known of its seconds.
func HourlyCSV(r *indicator.Result) []byte {
	w := newMemCSV()
	head := []string{"from", "LAeq", "LAeq_bound", "valid_s", "overload_s", "under_range_s"}
	for why := record.ReasonCalibrating; why < record.NumReasons; why++ {
		head = append(head, why.String()+"_s")
	}
	w.Write(append(head, "gap_s", "missing_s", "coverage_pct", "low_coverage"))
	f := func(v float64) string { return strconv.FormatFloat(v, 'f', 0, 64) }
	for _, h := range r.Hours {
		c := h.Coverage
		row := []string{h.From.In(r.Location).Format(time.RFC3339), num(h.LAeq), c.Bound().String(), f(c.Valid), f(c.Overload), f(c.UnderRange)}
		for why := record.ReasonCalibrating; why < record.NumReasons; why++ {
			row = append(row, f(c.LeftOut[why]))
		}
		w.Write(append(row, f(c.Gap), f(c.Missing), pct(c.Share), strconv.FormatBool(c.Low)))
	}
	return w.Bytes()
}

// page is what the HTML template shows.
type page struct {
	R        *indicator.Result
	Meta     Meta
	Zone     string
	From, To string
	Plots    []plotImage
	Periods  []periodRow
	Days     []dayRow
	Overall  []overallRow
	Tones    string
	Cals     []calRow
	Gaps     []gapRow
	Events   []eventRow
	NEvents  int
	Cov      indicator.Coverage
	Comp     string
	CompAll  string
	Step     string
	Adjust   bool
	Exceeded int
	Low      int
	LeftOut  []string // "calibrating 2 min", ... for every reason
}

type plotImage struct {
	Title, Alt string
	Src        template.URL
}

type periodRow struct {
	Day, Name, From, Hours                      string
	LAeq, LAF10, LAF90, LAFmax, LF, Imp, Rating string
	Limit, Margin                               string
	Exceeds, Low, Partial                       bool
	Events                                      int
	MaxLAE, Cov, Tones                          string
}

type dayRow struct {
	Day     string
	Levels  []string
	LAeq    string
	Comp    string
	Exceeds bool
	Cov     string
	Low     bool
	Partial bool
}

type overallRow struct {
	Name, LAeq, LAF10, LAF90, Limit, Cov string
	Exceedances, Events                  int
	Low                                  bool
}

type calRow struct{ At, Ref, Measured, Dev, Freq, Applied, OK string }

type gapRow struct{ From, To, Length, Reason string }

type eventRow struct{ Start, Period, Duration, LAFmax, LAeq, LAE, LCpeak string }

// loudestEvents is the number of events listed in the report, loudest LAE first.
const loudestEvents = 20

func dataURI(png []byte) template.URL {
	return template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(png))
}

func tonesText(ts []indicator.TonalBand) string {
	var parts []string
	for _, t := range ts {
		parts = append(parts, fmt.Sprintf("%s Hz (+%.1f dB)", t.Nominal, t.Above))
	}
	return strings.Join(parts, ", ")
}

// HTML renders the report page: self-contained, plots embedded as data URIs, no scripts and no
// external resources.
func HTML(r *indicator.Result, meta Meta) ([]byte, error) {
	loc := r.Location
	lt := func(t time.Time) string { return t.In(loc).Format("2006-01-02 15:04") }
	pg := page{R: r, Meta: meta, From: lt(r.From), To: lt(r.To), Cov: r.Coverage, Comp: r.Profile.Composite,
		Step: fmt.Sprintf("%g ms", dsp.PercentileStep*1000), Adjust: r.Options.Adjust, CompAll: num(r.Composite)}
	for why := record.ReasonCalibrating; why < record.NumReasons; why++ {
		pg.LeftOut = append(pg.LeftOut, strings.ReplaceAll(why.String(), "_", " ")+" "+(time.Duration(r.Coverage.LeftOut[why])*time.Second).String())
	}
	if r.Zone != nil {
		pg.Zone = r.Zone.Title
	}
	type mk struct {
		title, alt string
		f          func(*indicator.Result) ([]byte, error)
	}
	for _, m := range []mk{
		{"LAeq,1min time history", "minute levels over the range, with the zone's limits as dashed red steps", historyPlot},
		{"Period levels per day", "grouped bars of each day's period levels, with the limits as dashed lines", dailyPlot},
		{"Hour-by-day map", "hourly LAeq as colour, days across, local hours up", hourMapPlot},
		{"Average spectrum", "one-third-octave LZeq averaged over the range", spectrumPlot},
		{"Coverage", "share of valid seconds per day, with the coverage floor", coveragePlot},
	} {
		img, err := m.f(r)
		if err != nil {
			return nil, fmt.Errorf("report: plot %q: %w", m.title, err)
		}
		pg.Plots = append(pg.Plots, plotImage{Title: m.title, Alt: m.alt, Src: dataURI(img)})
	}
	for _, p := range r.Periods {
		row := periodRow{Day: p.Day.Format(time.DateOnly), Name: p.Name, From: lt(p.From), Hours: strconv.FormatFloat(p.Hours, 'g', -1, 64),
			LAeq: bounded(p.LAeq, p.Bound), LAF10: num(p.LAF10), LAF90: num(p.LAF90), LAFmax: num(p.LAFmax), LF: num(p.LowFrequency),
			Imp: num(p.Impulsiveness), Rating: num(p.Rating), Limit: num(p.Limit), Exceeds: p.Exceeds,
			Low: p.Coverage.Low, Partial: p.Partial, Events: p.Events, MaxLAE: num(p.EventMaxLAE),
			Cov: pct(p.Coverage.Share), Tones: tonesText(p.Tones)}
		if !math.IsNaN(p.Limit) && !math.IsNaN(p.LAeq) {
			row.Margin = fmt.Sprintf("%+.1f", p.Margin)
		}
		if p.Exceeds && !p.Partial {
			pg.Exceeded++ // a period the range cuts is never judged
		}
		if p.Coverage.Low {
			pg.Low++
		}
		pg.Periods = append(pg.Periods, row)
	}
	for _, d := range r.Days {
		row := dayRow{Day: d.Day.Format(time.DateOnly), LAeq: bounded(d.LAeq, d.Bound), Comp: num(d.Composite), Exceeds: d.Exceeds,
			Cov: pct(d.Coverage.Share), Low: d.Coverage.Low, Partial: !d.Complete}
		for _, per := range r.Profile.Periods {
			v := ""
			for _, k := range d.Periods {
				if r.Periods[k].Name == per.Name {
					v = bounded(r.Periods[k].LAeq, r.Periods[k].Bound)
					if r.Periods[k].Exceeds {
						v += " ▲"
					}
				}
			}
			row.Levels = append(row.Levels, v)
		}
		pg.Days = append(pg.Days, row)
	}
	for _, o := range r.Overall {
		pg.Overall = append(pg.Overall, overallRow{Name: o.Name, LAeq: bounded(o.LAeq, o.Bound), LAF10: num(o.LAF10), LAF90: num(o.LAF90),
			Limit: num(o.Limit), Cov: pct(o.Coverage.Share), Exceedances: o.Exceedances, Events: o.Events, Low: o.Coverage.Low})
	}
	pg.Tones = tonesText(r.Tones)
	for _, c := range r.Calibrations {
		pg.Cals = append(pg.Cals, calRow{At: lt(c.At), Ref: num(c.Reference), Measured: fmt.Sprintf("%.2f", c.Measured),
			Dev: fmt.Sprintf("%+.2f", c.Deviation), Freq: fmt.Sprintf("%.0f", c.Frequency),
			Applied: map[bool]string{true: "yes", false: "no"}[c.Applied], OK: map[bool]string{true: "passed", false: "FAILED"}[c.OK]})
	}
	for _, g := range r.Gaps {
		pg.Gaps = append(pg.Gaps, gapRow{From: lt(g.From), To: lt(g.To), Length: g.To.Sub(g.From).Round(time.Second).String(), Reason: g.Reason})
	}
	evs := append([]*record.Event(nil), r.Events...)
	sort.SliceStable(evs, func(i, j int) bool { return evs[i].LAE > evs[j].LAE })
	pg.NEvents = len(evs)
	for _, e := range evs[:min(len(evs), loudestEvents)] {
		per := ""
		for _, p := range r.Periods {
			if !e.Start.Before(p.From) && e.Start.Before(p.To) {
				per = p.Name
			}
		}
		pg.Events = append(pg.Events, eventRow{Start: e.Start.In(loc).Format("2006-01-02 15:04:05"), Period: per,
			Duration: fmt.Sprintf("%.1f", e.End.Sub(e.Start).Seconds()), LAFmax: num(e.LAFmax), LAeq: num(e.LAeq), LAE: num(e.LAE), LCpeak: num(e.LCpeak)})
	}
	var buf bytes.Buffer
	if err := pageTemplate.Execute(&buf, pg); err != nil {
		return nil, fmt.Errorf("report: rendering HTML: %w", err)
	}
	return buf.Bytes(), nil
}

// pageTemplate is parsed once; templates are immutable after parsing.
var pageTemplate = template.Must(template.New("report").Funcs(template.FuncMap{
	"secs": func(s float64) string { return (time.Duration(s) * time.Second).String() },
	"mulf": func(v float64) float64 { return 100 * v },
}).Parse(sharedHTML + pageHTML))

// sharedHTML holds the parts every report page shows alike: the style and the cautions.
const sharedHTML = `{{define "style"}}<style>
body{font-family:sans-serif;margin:1.5em auto;padding:0 .8em;max-width:1100px;color:#1d2329;line-height:1.4}
.wide{overflow-x:auto}dd{overflow-wrap:anywhere}
h1{font-size:1.5em;border-bottom:3px solid #286eaa;padding-bottom:.2em}
h2{font-size:1.15em;margin-top:1.6em;color:#286eaa}
table{border-collapse:collapse;font-size:.85em;margin:.5em 0}
th,td{border:1px solid #c8ced4;padding:.2em .5em;text-align:right}
th{background:#eef2f5}td.l,th.l{text-align:left}
.over{background:#f7d4d4;font-weight:bold}.low{background:#fff1c9}.part{color:#6b7680;font-style:italic}
.box{border-left:4px solid #dc8c1e;background:#fdf6ea;padding:.5em 1em;margin:1em 0}
figure{margin:1em 0}figcaption{font-size:.85em;color:#4a545e}
img{width:100%;max-width:1000px;border:1px solid #dde2e6;box-sizing:border-box}
dl{display:grid;grid-template-columns:max-content auto;gap:.1em 1em}dt{font-weight:bold}dd{margin:0}
</style>{{end}}
{{define "cautions"}}<div class="box"><strong>Cautions.</strong> These numbers are indicative. Legally valid measurements need a
type-approved class 1 sound level meter with traceable calibration; leqnode's results are only as good as
its microphone, its calibration and its installation, and they count as class 1 only where the whole chain
has been verified. Local regulations and accredited practice prevail over anything in this report. Sound
above about 85 dB(A) over long periods damages hearing: protect yourself when working near loud sources.</div>{{end}}`

const pageHTML = `<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>leqnode report {{.Meta.NodeID}} {{.From}} to {{.To}}</title>
{{template "style"}}</head><body>
<h1>Noise indicators: {{.R.Profile.Title}}</h1>
<dl>
<dt>Range</dt><dd>{{.From}} to {{.To}} ({{.R.Location}}), half-open</dd>
<dt>Node</dt><dd>{{.Meta.NodeID}}{{if .Meta.Site}}, {{.Meta.Site}}{{end}} (store file {{.Meta.Node}}{{if .Meta.StoreID}}, id {{.Meta.StoreID}}{{end}})</dd>
<dt>Profile</dt><dd>{{.R.Profile.Name}}: {{.R.Profile.Source}}</dd>
<dt>Zone</dt><dd>{{if .Zone}}{{.Zone}}{{else}}none (no limits){{end}}</dd>
<dt>Data coverage</dt><dd>{{printf "%.1f" (mulf .Cov.Share)}} % valid; left out: {{range $i, $s := .LeftOut}}{{if $i}}, {{end}}{{$s}}{{end}}; in gaps {{secs .Cov.Gap}}; without records {{secs .Cov.Missing}}{{if .Cov.Overload}}; {{secs .Cov.Overload}} overloaded, kept (levels marked ≥ are lower bounds){{end}}{{if .Cov.UnderRange}}; {{secs .Cov.UnderRange}} under the measuring range, kept (levels marked ≤ are upper bounds){{end}}</dd>
{{if .Comp}}<dt>{{.Comp}} over the range</dt><dd>{{if .CompAll}}{{.CompAll}} dB (from the long-term period levels){{else}}not available: a period has no data{{end}}</dd>{{end}}
<dt>Periods above limit</dt><dd>{{.Exceeded}}</dd>
<dt>Periods under {{printf "%.0f" (mulf .R.Options.MinCoverage)}} % coverage</dt><dd>{{.Low}} (marked in yellow; their levels are shown, not hidden)</dd>
<dt>Generated</dt><dd>{{.Meta.Created.Format "2006-01-02 15:04 MST"}} by leqnode</dd>
</dl>
{{template "cautions"}}

<h2>Long-term levels per period</h2>
<table><tr><th class="l">Period</th><th>LAeq</th><th>LAF10</th><th>LAF90</th><th>Limit</th><th>Periods above limit</th><th>Events</th><th>Coverage %</th></tr>
{{range .Overall}}<tr{{if .Low}} class="low"{{end}}><td class="l">{{.Name}}</td><td>{{.LAeq}}</td><td>{{.LAF10}}</td><td>{{.LAF90}}</td><td>{{.Limit}}</td><td>{{.Exceedances}}</td><td>{{.Events}}</td><td>{{.Cov}}</td></tr>
{{end}}</table>

{{range .Plots}}<figure><img src="{{.Src}}" alt="{{.Alt}}"><figcaption>{{.Title}}: {{.Alt}}.</figcaption></figure>
{{end}}

<h2>Daily indicators</h2>
<table><tr><th class="l">Day</th>{{range .R.Profile.Periods}}<th>{{.Name}} LAeq</th>{{end}}<th>LAeq</th>{{if .Comp}}<th>{{.Comp}}</th>{{end}}<th>Coverage %</th></tr>
{{$comp := .Comp}}{{range .Days}}<tr class="{{if .Exceeds}}over{{else if .Low}}low{{end}}{{if .Partial}} part{{end}}"><td class="l">{{.Day}}</td>{{range .Levels}}<td>{{.}}</td>{{end}}<td>{{.LAeq}}</td>{{if $comp}}<td>{{.Comp}}</td>{{end}}<td>{{.Cov}}</td></tr>
{{end}}</table>
<p>▲ marks a period above the zone's limit: its level, rounded to 0.1 dB, is greater than the limit (a level equal to the limit complies; common practice). Italic rows are days the range cuts: their coverage counts against the whole period and they are not counted among the periods above limit. A whole-day indicator needs every period of the day. ≥ marks a lower bound (overloaded seconds counted), ≤ an upper bound (seconds under the measuring range counted).</p>

<h2>Periods</h2>
<table><tr><th class="l">Day</th><th class="l">Period</th><th class="l">Start</th><th>h</th><th>LAeq</th><th>Limit</th><th>Margin</th><th>LAF10</th><th>LAF90</th><th>LAFmax</th><th>LCeq−LAeq</th><th>LAImax−LAFmax</th>{{if .Adjust}}<th>Rating</th>{{end}}<th>Events</th><th>Max LAE</th><th>Coverage %</th><th class="l">Tonal screen</th></tr>
{{$adj := .Adjust}}{{range .Periods}}<tr class="{{if .Exceeds}}over{{else if .Low}}low{{end}}{{if .Partial}} part{{end}}"><td class="l">{{.Day}}</td><td class="l">{{.Name}}</td><td class="l">{{.From}}</td><td>{{.Hours}}</td><td>{{.LAeq}}</td><td>{{.Limit}}</td><td>{{.Margin}}</td><td>{{.LAF10}}</td><td>{{.LAF90}}</td><td>{{.LAFmax}}</td><td>{{.LF}}</td><td>{{.Imp}}</td>{{if $adj}}<td>{{.Rating}}</td>{{end}}<td>{{.Events}}</td><td>{{.MaxLAE}}</td><td>{{.Cov}}</td><td class="l">{{.Tones}}</td></tr>
{{end}}</table>
<p>Tonal screen over the whole range: {{if .Tones}}{{.Tones}}{{else}}no band stands out{{end}}.</p>

<h2>Loudest events</h2>
{{if .Events}}<p>{{.NEvents}} events in the range (flagged ones left out); the {{len .Events}} with the largest sound exposure level:</p>
<table><tr><th class="l">Start</th><th class="l">Period</th><th>Duration s</th><th>LAFmax</th><th>LAeq</th><th>LAE</th><th>LCpeak</th></tr>
{{range .Events}}<tr><td class="l">{{.Start}}</td><td class="l">{{.Period}}</td><td>{{.Duration}}</td><td>{{.LAFmax}}</td><td>{{.LAeq}}</td><td>{{.LAE}}</td><td>{{.LCpeak}}</td></tr>
{{end}}</table>{{else}}<p>No events in the range.</p>{{end}}

<h2>Calibration history</h2>
{{if .Cals}}<table><tr><th class="l">When</th><th>Calibrator dB</th><th>Measured dB</th><th>Deviation dB</th><th>Hz</th><th>New sensitivity applied</th><th>Result</th></tr>
{{range .Cals}}<tr><td class="l">{{.At}}</td><td>{{.Ref}}</td><td>{{.Measured}}</td><td>{{.Dev}}</td><td>{{.Freq}}</td><td>{{.Applied}}</td><td>{{.OK}}</td></tr>
{{end}}</table>{{else}}<p>No calibrator check in the range. Without one, the levels rest on the microphone's data-sheet sensitivity.</p>{{end}}

<h2>Gaps</h2>
{{if .Gaps}}<table><tr><th class="l">From</th><th class="l">To</th><th>Length</th><th class="l">Reason</th></tr>
{{range .Gaps}}<tr><td class="l">{{.From}}</td><td class="l">{{.To}}</td><td>{{.Length}}</td><td class="l">{{.Reason}}</td></tr>
{{end}}</table>{{else}}<p>No gap records in the range.</p>{{end}}

<h2>Method</h2>
<ul>
<li>LAeq per hour and per period: energy mean of the valid one-second LAeq values (ISO 1996-1:2016, 3.1.7); a minute without second records uses its minute record.</li>
<li>{{if .Comp}}{{.Comp}}: energy mean of the period levels plus their penalties, weighted by the periods' true lengths (Directive 2002/49/EC, Annex I; a night across a daylight-saving change counts 7 or 9 hours).{{else}}This profile has no whole-day indicator.{{end}}</li>
<li>LAF10 and LAF90: levels exceeded for 10 % and 90 % of the time, from the merged histograms of the A-weighted Fast level sampled every {{.Step}} in 0.1 dB bins.</li>
<li>Seconds flagged calibrating, settling, excluded, suspect or dropped, and digital silence, are left out and counted; overloaded seconds are kept and make a level a lower bound (≥), seconds under the measuring range an upper bound (≤); gaps are missing data. A period under {{printf "%.0f" (mulf .R.Options.MinCoverage)}} % valid seconds is marked.</li>
<li>LCeq−LAeq indicates low-frequency content (common practice). LAImax−LAFmax, averaged over the minutes, indicates impulsiveness (common practice).{{if .Adjust}} Rating levels add {{.R.Options.TonalAdjust}} dB for a tone and {{.R.Options.ImpulsiveAdjust}} dB for impulsiveness, in the manner of ISO 1996-1 Annex A.{{end}}</li>
<li>Tonal screen: a one-third-octave band exceeding both neighbours by 15 dB (25–125 Hz), 8 dB (160–400 Hz) or 5 dB (500 Hz–10 kHz), in the manner of ISO 1996-2:2007 Annex K; a candidate calls for a narrow-band analysis.</li>
</ul>

<h2>Uncertainty</h2>
<p>The levels carry the uncertainty of the whole chain: the microphone and its calibration (a sound
calibrator of IEC 60942:2017 class 1 generates its stated level within ±0.25 dB, Table 2), the digital weighting and band filters
(tested against the class 1 limits of IEC 61672-1 and IEC 61260-1), wind, rain and reflections at the site,
and the sampling of the source's own variation over the range. For an indicative long-term Leq from a
well-kept MEMS node, an expanded uncertainty of some ±2 dB is a realistic assumption (common practice);
periods with low coverage, tonal or impulsive sound, or levels near the microphone's noise floor are less
certain. State the uncertainty of your own chain when the numbers are used against a limit.</p>
<p class="part">leqnode — open-source noise monitoring node.</p>
</body></html>
`
