package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/leqnode/leqnode/node/internal/when"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// Plot sizes and colours: a design of the project's own.
const (
	plotW = 20 * vg.Centimeter
	plotH = 8 * vg.Centimeter
)

func periodColor(i int) color.Color {
	cs := []color.RGBA{{40, 110, 170, 255}, {220, 140, 30, 255}, {60, 50, 120, 255}, {90, 160, 90, 255}, {170, 60, 90, 255}}
	return cs[i%len(cs)]
}

const limitRed = 200

// newPlot returns an empty plot whose text (title, axis labels, tick labels, legend) is set
// in Liberation Sans, a sans-serif like the report page's, instead of gonum/plot's serif
// default; the font is set on the plot, not through gonum/plot's package-level default.
func newPlot() *plot.Plot {
	p := plot.New()
	for _, f := range []*font.Font{&p.Title.TextStyle.Font, &p.X.Label.TextStyle.Font, &p.Y.Label.TextStyle.Font,
		&p.X.Tick.Label.Font, &p.Y.Tick.Label.Font, &p.Legend.TextStyle.Font} {
		f.Typeface, f.Variant = "Liberation", "Sans"
	}
	return p
}

// renderPNG renders p as a PNG image at 144 dots per inch, sharp on high-density screens.
func renderPNG(p *plot.Plot, w, h vg.Length) ([]byte, error) {
	c := vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(144))
	p.Draw(draw.New(c))
	var buf bytes.Buffer
	if _, err := (vgimg.PngCanvas{Canvas: c}).WriteTo(&buf); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

func timeAxis(p *plot.Plot, loc *time.Location, span time.Duration) {
	format := "01-02\n15:04"
	if span > 4*24*time.Hour {
		format = "01-02"
	}
	p.X.Tick.Marker = plot.TimeTicks{Format: format, Time: func(t float64) time.Time { return time.Unix(int64(t), 0).In(loc) }}
}

// historyPlot draws the LAeq of every minute, with the zone's limits as steps per period.
func historyPlot(r *indicator.Result) ([]byte, error) {
	p := newPlot()
	p.Title.Text = "LAeq,1min"
	p.Y.Label.Text = "dB(A)"
	timeAxis(p, r.Location, r.To.Sub(r.From))
	// One line per run of minutes with data, so gaps show as gaps.
	var run plotter.XYs
	flush := func() error {
		if len(run) == 0 {
			return nil
		}
		l, err := plotter.NewLine(run)
		if err != nil {
			return err
		}
		l.Color = periodColor(0)
		l.Width = vg.Points(0.6)
		p.Add(l)
		run = nil
		return nil
	}
	t0 := float64(r.Minute0.Unix())
	// Long ranges: thin the line to at most 4000 points per run by energy means of groups.
	step := max(1, len(r.Minutes)/4000)
	for i := 0; i < len(r.Minutes); i += step {
		var e float64
		var n int
		for k := i; k < min(i+step, len(r.Minutes)); k++ {
			if v := r.Minutes[k]; !math.IsNaN(v) {
				e += math.Pow(10, v/10)
				n++
			}
		}
		if n == 0 {
			if err := flush(); err != nil {
				return nil, err
			}
			continue
		}
		run = append(run, plotter.XY{X: t0 + float64(i*60), Y: 10 * math.Log10(e/float64(n))})
	}
	if err := flush(); err != nil {
		return nil, err
	}
	hasLimit := false
	for _, per := range r.Periods {
		if math.IsNaN(per.Limit) {
			continue
		}
		from, to := when.Later(per.From, r.From), when.Earlier(per.To, r.To)
		l, err := plotter.NewLine(plotter.XYs{{X: float64(from.Unix()), Y: per.Limit}, {X: float64(to.Unix()), Y: per.Limit}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Width, l.Dashes = color.RGBA{limitRed, 30, 30, 255}, vg.Points(1.2), []vg.Length{vg.Points(4), vg.Points(2)}
		p.Add(l)
		if !hasLimit {
			p.Legend.Add("limit", l)
			hasLimit = true
		}
	}
	p.X.Min, p.X.Max = float64(r.From.Unix()), float64(r.To.Unix())
	p.Legend.Top = true
	p.Add(plotter.NewGrid())
	return renderPNG(p, plotW, plotH)
}

// dailyPlot draws each day's period levels as grouped bars, with the limits as dashed lines.
func dailyPlot(r *indicator.Result) ([]byte, error) {
	p, err := dailyChart(r)
	if err != nil {
		return nil, err
	}
	return renderPNG(p, plotW, plotH)
}

// dailyChart builds dailyPlot's chart. The bars stand on a base 10 dB below the lowest level
// or limit, rounded down to 10 dB, so that every limit line lies inside the axis.
func dailyChart(r *indicator.Result) (*plot.Plot, error) {
	p := newPlot()
	p.Title.Text = "Period levels per day"
	p.Y.Label.Text = "LAeq, dB(A)"
	nper := len(r.Profile.Periods)
	w := vg.Points(min(40, 300/float64(max(1, len(r.Days)*nper))))
	var names []string
	ymin := math.Inf(1)
	for _, d := range r.Days {
		names = append(names, d.Day.Format("01-02"))
		for _, k := range d.Periods {
			if v := r.Periods[k].LAeq; !math.IsNaN(v) {
				ymin = min(ymin, v)
			}
		}
	}
	if r.Zone != nil {
		for _, per := range r.Profile.Periods {
			if lim, ok := r.Zone.Limits[per.Name]; ok {
				ymin = min(ymin, lim)
			}
		}
	}
	if math.IsInf(ymin, 1) {
		ymin = 30
	}
	base := math.Floor(ymin/10)*10 - 10
	for pi, per := range r.Profile.Periods {
		vals := make(plotter.Values, len(r.Days))
		for di, d := range r.Days {
			vals[di] = base
			for _, k := range d.Periods {
				if r.Periods[k].Name == per.Name && !math.IsNaN(r.Periods[k].LAeq) {
					vals[di] = r.Periods[k].LAeq
				}
			}
		}
		for i := range vals {
			vals[i] -= base
		}
		bc, err := plotter.NewBarChart(vals, w)
		if err != nil {
			return nil, err
		}
		bc.Color = periodColor(pi)
		bc.LineStyle.Width = 0
		bc.Offset = vg.Length(float64(pi)-float64(nper-1)/2) * w
		p.Add(bc)
		p.Legend.Add(per.Name, bc)
		if r.Zone != nil {
			if lim, ok := r.Zone.Limits[per.Name]; ok {
				l, err := plotter.NewLine(plotter.XYs{{X: -0.5, Y: lim - base}, {X: float64(len(r.Days)) - 0.5, Y: lim - base}})
				if err != nil {
					return nil, err
				}
				l.Color, l.Width, l.Dashes = periodColor(pi), vg.Points(1.2), []vg.Length{vg.Points(4), vg.Points(2)}
				p.Add(l)
				p.Legend.Add(per.Name+" limit", l)
			}
		}
	}
	p.NominalX(thinLabels(names, 16)...)
	p.Y.Tick.Marker = offsetTicks(base)
	p.Y.Min = 0
	if top := p.Y.Max; top > 0 {
		p.Y.Max = top + 0.25*top // room for the legend above the bars
	}
	p.Legend.Top = true
	p.Add(plotter.NewGrid())
	return p, nil
}

// thinLabels blanks all but every k-th label so that at most n show.
func thinLabels(names []string, n int) []string {
	if len(names) <= n {
		return names
	}
	k := (len(names) + n - 1) / n
	for i := range names {
		if i%k != 0 {
			names[i] = ""
		}
	}
	return names
}

// offsetTicks labels a y axis whose values were shifted down by base.
type offsetTicks float64

func (o offsetTicks) Ticks(min, max float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(min, max)
	for i := range ts {
		if ts[i].Label != "" {
			ts[i].Label = fmt.Sprintf("%g", ts[i].Value+float64(o))
		}
	}
	return ts
}

// hourGrid is the hour-by-day map: columns are dates, rows local clock hours.
type hourGrid struct {
	days []time.Time
	v    [][24]float64
}

func (g hourGrid) Dims() (c, r int)   { return len(g.days), 24 }
func (g hourGrid) Z(c, r int) float64 { return g.v[c][r] }
func (g hourGrid) X(c int) float64    { return float64(c) }
func (g hourGrid) Y(r int) float64    { return float64(r) + 0.5 }

func newHourGrid(r *indicator.Result) hourGrid {
	var g hourGrid
	idx := map[string]int{}
	type acc struct{ e, t float64 }
	var sums [][24]acc
	for _, h := range r.Hours {
		lt := h.From.In(r.Location)
		key := lt.Format(time.DateOnly)
		c, ok := idx[key]
		if !ok {
			c = len(g.days)
			idx[key] = c
			g.days = append(g.days, time.Date(lt.Year(), lt.Month(), lt.Day(), 0, 0, 0, 0, r.Location))
			sums = append(sums, [24]acc{})
		}
		if !math.IsNaN(h.LAeq) {
			sums[c][lt.Hour()].e += math.Pow(10, h.LAeq/10) * h.Coverage.Valid
			sums[c][lt.Hour()].t += h.Coverage.Valid
		}
	}
	g.v = make([][24]float64, len(g.days))
	for c := range g.v {
		for h := range 24 {
			g.v[c][h] = math.NaN()
			if sums[c][h].t > 0 {
				g.v[c][h] = 10 * math.Log10(sums[c][h].e/sums[c][h].t)
			}
		}
	}
	return g
}

// hourMapPlot draws the hourly LAeq as an hour-by-day map.
func hourMapPlot(r *indicator.Result) ([]byte, error) {
	g := newHourGrid(r)
	if len(g.days) == 0 {
		return emptyPlot("Hourly LAeq: no data")
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, col := range g.v {
		for _, v := range col {
			if !math.IsNaN(v) {
				lo, hi = min(lo, v), max(hi, v)
			}
		}
	}
	if math.IsInf(lo, 1) {
		return emptyPlot("Hourly LAeq: no data")
	}
	if hi-lo < 1 {
		hi = lo + 1
	}
	cm := moreland.SmoothBlueRed()
	cm.SetMin(lo)
	cm.SetMax(hi)
	hm := plotter.NewHeatMap(g, cm.Palette(64))
	hm.Min, hm.Max = lo, hi
	hm.NaN = color.RGBA{235, 235, 235, 255}
	p := newPlot()
	p.Title.Text = fmt.Sprintf("Hourly LAeq by day (%.0f to %.0f dB(A), blue to red; grey: no data)", lo, hi)
	p.Y.Label.Text = "local hour"
	p.Add(hm)
	var names []string
	for _, d := range g.days {
		names = append(names, d.Format("01-02"))
	}
	p.NominalX(thinLabels(names, 16)...)
	p.Y.Min, p.Y.Max = 0, 24
	p.Y.Tick.Marker = plot.ConstantTicks([]plot.Tick{{Value: 0, Label: "0"}, {Value: 6, Label: "6"}, {Value: 12, Label: "12"}, {Value: 18, Label: "18"}, {Value: 24, Label: "24"}})
	return renderPNG(p, plotW, plotH)
}

// spectrumPlot draws the range's average one-third-octave spectrum.
func spectrumPlot(r *indicator.Result) ([]byte, error) {
	if len(r.Spectrum) == 0 {
		return emptyPlot("Average spectrum: no spectra stored")
	}
	vals := make(plotter.Values, len(r.Spectrum))
	var names []string
	lo := math.Inf(1)
	for _, v := range r.Spectrum {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			lo = min(lo, v)
		}
	}
	base := math.Floor(lo/10)*10 - 10
	for i, v := range r.Spectrum {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			v = base
		}
		vals[i] = v - base
		name := indicator.Nominal(r.FirstBand + i)
		if (r.FirstBand+i)%3 != 0 {
			name = ""
		}
		names = append(names, name)
	}
	p := newPlot()
	p.Title.Text = "Average one-third-octave spectrum, LZeq"
	p.Y.Label.Text = "dB"
	p.X.Label.Text = "Hz"
	bc, err := plotter.NewBarChart(vals, vg.Points(8))
	if err != nil {
		return nil, err
	}
	bc.Color = periodColor(0)
	bc.LineStyle.Width = 0
	p.Add(bc, plotter.NewGrid())
	p.NominalX(names...)
	p.Y.Tick.Marker = offsetTicks(base)
	return renderPNG(p, plotW, plotH)
}

// coveragePlot draws the share of valid seconds per day, with the coverage floor.
func coveragePlot(r *indicator.Result) ([]byte, error) {
	if len(r.Days) == 0 {
		return emptyPlot("Coverage: no days")
	}
	vals := make(plotter.Values, len(r.Days))
	var names []string
	for i, d := range r.Days {
		vals[i] = 100 * d.Coverage.Share
		names = append(names, d.Day.Format("01-02"))
	}
	p := newPlot()
	p.Title.Text = "Valid data per day"
	p.Y.Label.Text = "%"
	bc, err := plotter.NewBarChart(vals, vg.Points(min(30, 400/float64(len(r.Days)))))
	if err != nil {
		return nil, err
	}
	bc.Color = periodColor(3)
	bc.LineStyle.Width = 0
	p.Add(bc)
	floor := 100 * r.Options.MinCoverage
	l, err := plotter.NewLine(plotter.XYs{{X: -0.5, Y: floor}, {X: float64(len(r.Days)) - 0.5, Y: floor}})
	if err != nil {
		return nil, err
	}
	l.Color, l.Dashes = color.RGBA{limitRed, 30, 30, 255}, []vg.Length{vg.Points(4), vg.Points(2)}
	p.Add(l, plotter.NewGrid())
	p.Legend.Add(fmt.Sprintf("floor %.0f %%", floor), l)
	p.Legend.Top = true
	p.Y.Min, p.Y.Max = 0, 115
	p.NominalX(thinLabels(names, 16)...)
	return renderPNG(p, plotW, 6*vg.Centimeter)
}

func emptyPlot(title string) ([]byte, error) {
	p := newPlot()
	p.Title.Text = title
	p.HideAxes()
	p.Title.TextStyle.Color = color.Gray{Y: 90}
	p.Title.Padding = vg.Points(10)
	return renderPNG(p, plotW, 2*vg.Centimeter)
}
