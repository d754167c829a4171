package report

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"strings"
	"time"

	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// earthRadius is the mean radius of the Earth, m (IUGG mean radius R1 = 6371008.8 m, from
// memory); the map's projection needs it to a fraction of a percent only.
const earthRadius = 6371008.8

// Projected is a node position in metres east and north of the fleet's centre.
type Projected struct{ X, Y float64 }

// Project maps latitudes and longitudes (degrees) onto a plane by the equirectangular
// projection around the mean latitude φ0: x = R·(λ − λ0)·cos φ0, y = R·(φ − φ0), angles in
// radians, λ0 and φ0 the mean longitude and latitude (Snyder, Map Projections: A Working
// Manual, USGS 1987, equidistant cylindrical; from memory). Over the few kilometres of an
// array its distances are off by well under 1 %.
func Project(lat, lon []float64) []Projected {
	var lat0, lon0 float64
	for i := range lat {
		lat0 += lat[i]
		lon0 += lon[i]
	}
	lat0 /= float64(len(lat))
	lon0 /= float64(len(lon))
	k := math.Pi / 180
	out := make([]Projected, len(lat))
	for i := range lat {
		out[i] = Projected{X: earthRadius * (lon[i] - lon0) * k * math.Cos(lat0*k), Y: earthRadius * (lat[i] - lat0) * k}
	}
	return out
}

// scaleLength returns a round length (1, 2 or 5 times a power of ten, m) near a quarter of span.
func scaleLength(span float64) float64 {
	if span <= 0 {
		return 10
	}
	t := span / 4
	p := math.Pow(10, math.Floor(math.Log10(t)))
	for _, m := range []float64{5, 2, 1} {
		if m*p <= t {
			return m * p
		}
	}
	return p
}

// levelColors returns a colour map from lo (blue) to hi (red).
func levelColors(lo, hi float64) palette.ColorMap {
	if hi-lo < 1 {
		hi = lo + 1
	}
	cm := moreland.SmoothBlueRed()
	cm.SetMin(lo)
	cm.SetMax(hi)
	return cm
}

func finiteRange(vs []float64) (lo, hi float64, ok bool) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, v := range vs {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			lo, hi = min(lo, v), max(hi, v)
		}
	}
	return lo, hi, !math.IsInf(lo, 1)
}

// mapPlot draws the nodes that have a position, in metres around their centre, coloured by
// values (blue low, red high, a ring without a value), each labelled with its name and value,
// with a distance scale bar. No tiles or other services: only the positions are drawn.
func mapPlot(names []string, lat, lon, values []float64, indicatorName string) ([]byte, error) {
	if len(names) == 0 {
		return emptyPlot("Map: no node has a position (set node.latitude and node.longitude)")
	}
	pts := Project(lat, lon)
	lo, hi, ok := finiteRange(values)
	if !ok {
		lo, hi = 0, 1
	}
	cm := levelColors(lo, hi)
	p := newPlot()
	if ok {
		p.Title.Text = fmt.Sprintf("Node positions, coloured by %s (%.1f dB blue to %.1f dB red; ring: no value)", indicatorName, lo, hi)
	} else {
		p.Title.Text = fmt.Sprintf("Node positions (no %s value)", indicatorName)
	}
	p.X.Label.Text = "m east of the centre"
	p.Y.Label.Text = "m north"
	xys := make(plotter.XYs, len(pts))
	labels := make([]string, len(pts))
	for i, q := range pts {
		xys[i].X, xys[i].Y = q.X, q.Y
		labels[i] = mapLabel(names[i], values[i], len(names))
	}
	sc, err := plotter.NewScatter(xys)
	if err != nil {
		return nil, err
	}
	sc.GlyphStyleFunc = func(i int) draw.GlyphStyle {
		v := values[i]
		if math.IsNaN(v) { // the colour map's middle is a light grey: mark no value by shape
			return draw.GlyphStyle{Color: color.Gray{Y: 60}, Radius: vg.Points(6), Shape: draw.RingGlyph{}}
		}
		// Inside the map's range by a hair: the ends themselves may count as outside.
		eps := 1e-9 * (cm.Max() - cm.Min())
		c, err := cm.At(min(max(v, cm.Min()+eps), cm.Max()-eps))
		if err != nil {
			c = color.Black
		}
		return draw.GlyphStyle{Color: c, Radius: vg.Points(6), Shape: draw.CircleGlyph{}}
	}
	lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xys, Labels: labels})
	if err != nil {
		return nil, err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].Font.Typeface, lb.TextStyle[i].Font.Variant = "Liberation", "Sans"
		lb.TextStyle[i].Font.Size = vg.Points(8)
		lb.Offset = vg.Point{X: vg.Points(7), Y: vg.Points(-3)}
	}
	// About equal metres per unit on both axes (within some 5 %: the plot area is estimated from
	// the canvas): widen the narrower range to the canvas' shape.
	x0, x1, y0, y1 := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	for _, q := range pts {
		x0, x1, y0, y1 = min(x0, q.X), max(x1, q.X), min(y0, q.Y), max(y1, q.Y)
	}
	w, h := float64(plotW), float64(11*vg.Centimeter)
	aspect := (w - 60) / (h - 70) // plot area, less the axes and title, in points
	span := max(x1-x0, (y1-y0)*aspect, 50)
	span *= 1.3        // room for the labels
	full := span * 1.2 // and a strip along the bottom for the scale bar
	cx, top := (x0+x1)/2+span*0.08, (y0+y1)/2+span/aspect/2
	p.X.Min, p.X.Max = cx-full/2, cx+full/2
	p.Y.Min, p.Y.Max = top-full/aspect, top
	// The scale bar, in the bottom strip.
	sl := scaleLength(full)
	bx, by := p.X.Min+full*0.04, p.Y.Min+full/aspect*0.06
	bar, err := plotter.NewLine(plotter.XYs{{X: bx, Y: by}, {X: bx + sl, Y: by}})
	if err != nil {
		return nil, err
	}
	bar.Width = vg.Points(3)
	bar.Color = color.Black
	scaleText := fmt.Sprintf("%g m", sl)
	if sl >= 1000 {
		scaleText = fmt.Sprintf("%g km", sl/1000)
	}
	bl, err := plotter.NewLabels(plotter.XYLabels{XYs: plotter.XYs{{X: bx, Y: by + full/aspect*0.02}}, Labels: []string{scaleText}})
	if err != nil {
		return nil, err
	}
	for i := range bl.TextStyle {
		bl.TextStyle[i].Font.Typeface, bl.TextStyle[i].Font.Variant = "Liberation", "Sans"
	}
	p.Add(plotter.NewGrid(), sc, lb, bar, bl)
	return renderPNG(p, plotW, vg.Length(h))
}

// mapLabels is the number of nodes up to which the map labels each node with its full name and
// value; above it, with the last part of its name only (wendle-cross-07: "07"), so that labels
// of close nodes do not cover each other. The table names every node in full.
const mapLabels = 12

func mapLabel(name string, v float64, n int) string {
	if n > mapLabels {
		if i := strings.LastIndexAny(name, "-_"); i >= 0 && i < len(name)-1 {
			return name[i+1:]
		}
		return name
	}
	if math.IsNaN(v) {
		return name
	}
	return fmt.Sprintf("%s %.1f", name, v)
}

// nodeGrid is a nodes-by-columns map for a heat map: rows are nodes, bottom up.
type nodeGrid struct {
	v [][]float64 // [node][column]
}

func (g nodeGrid) Dims() (c, r int) {
	if len(g.v) == 0 {
		return 0, 0
	}
	return len(g.v[0]), len(g.v)
}
func (g nodeGrid) Z(c, r int) float64 { return g.v[r][c] }
func (g nodeGrid) X(c int) float64    { return float64(c) }
func (g nodeGrid) Y(r int) float64    { return float64(r) }

// nodeMap draws g as a heat map with node names up the side and column names along the bottom.
func nodeMap(g nodeGrid, pal palette.Palette, lo, hi float64, title string, nodes, cols []string) ([]byte, error) {
	hm := plotter.NewHeatMap(g, pal)
	hm.Min, hm.Max = lo, hi
	hm.NaN = color.RGBA{235, 235, 235, 255}
	p := newPlot()
	p.Title.Text = title
	p.Add(hm)
	p.NominalX(thinLabels(cols, 16)...)
	p.NominalY(thinLabels(append([]string(nil), nodes...), 80)...)
	h := max(6*vg.Centimeter, vg.Length(len(nodes))*0.5*vg.Centimeter+3*vg.Centimeter)
	return renderPNG(p, plotW, h)
}

// colours is a fixed palette.
type colours []color.Color

func (c colours) Colors() []color.Color { return c }

// dates returns the local calendar dates that [from, to) touches in loc.
func dates(from, to time.Time, loc *time.Location) []time.Time {
	var out []time.Time
	f := from.In(loc)
	d := time.Date(f.Year(), f.Month(), f.Day(), 0, 0, 0, 0, loc)
	for d.Before(to) {
		out = append(out, d)
		d = d.AddDate(0, 0, 1)
	}
	return out
}

// coverageGrid returns each node's share of valid seconds per local date, percent.
func (f *Fleet) coverageGrid() (nodeGrid, []time.Time) {
	loc := f.Config.Location
	days := dates(f.Config.From, f.Config.To, loc)
	idx := map[string]int{}
	for i, d := range days {
		idx[d.Format(time.DateOnly)] = i
	}
	g := nodeGrid{v: make([][]float64, len(f.Nodes))}
	for i, n := range f.Nodes {
		valid, length := make([]float64, len(days)), make([]float64, len(days))
		for _, h := range n.Result.Hours {
			if k, ok := idx[h.From.In(loc).Format(time.DateOnly)]; ok {
				valid[k] += h.Coverage.Valid
				length[k] += h.Coverage.Length
			}
		}
		g.v[i] = make([]float64, len(days))
		for k := range days {
			g.v[i][k] = math.NaN()
			if length[k] > 0 {
				g.v[i][k] = 100 * valid[k] / length[k]
			}
		}
	}
	return g, days
}

func (f *Fleet) nodeNames() []string {
	out := make([]string, len(f.Nodes))
	for i, n := range f.Nodes {
		out[i] = n.NodeID
	}
	return out
}

// coverageMapPlot draws each node's valid share per day.
func (f *Fleet) coverageMapPlot() ([]byte, error) {
	g, days := f.coverageGrid()
	if len(days) == 0 || len(f.Nodes) == 0 {
		return emptyPlot("Coverage: no days")
	}
	var cols []string
	for _, d := range days {
		cols = append(cols, d.Format("01-02"))
	}
	cm := moreland.SmoothBlueRed()
	cm.SetMin(0)
	cm.SetMax(100)
	cs := cm.Palette(20).Colors()
	slices.Reverse(cs) // red for little data, blue for full coverage
	return nodeMap(g, colours(cs), 0, 100, fmt.Sprintf("Valid data per node and day (red 0 %%, blue 100 %%; floor %.0f %%)", 100*f.Config.Options.MinCoverage), f.nodeNames(), cols)
}

// hourlyGrid returns each node's LAeq per hour of the range (NaN without data) and the hours.
func (f *Fleet) hourlyGrid() (nodeGrid, []time.Time) {
	var hours []time.Time
	for t := f.Config.From.Truncate(time.Hour); t.Before(f.Config.To); t = t.Add(time.Hour) {
		hours = append(hours, t)
	}
	g := nodeGrid{v: make([][]float64, len(f.Nodes))}
	for i, n := range f.Nodes {
		row := make([]float64, len(hours))
		for k := range row {
			row[k] = math.NaN()
		}
		for _, h := range n.Result.Hours {
			k := int(h.From.Truncate(time.Hour).Sub(f.Config.From.Truncate(time.Hour)) / time.Hour)
			if k >= 0 && k < len(row) {
				row[k] = h.LAeq
			}
		}
		g.v[i] = row
	}
	return g, hours
}

// hourlyMapPlot draws each node's LAeq per hour of the range.
func (f *Fleet) hourlyMapPlot() ([]byte, error) {
	g, hours := f.hourlyGrid()
	var all []float64
	for _, r := range g.v {
		all = append(all, r...)
	}
	lo, hi, ok := finiteRange(all)
	if !ok || len(hours) == 0 {
		return emptyPlot("Hourly LAeq: no data")
	}
	cm := levelColors(lo, hi)
	var cols []string
	for _, h := range hours {
		cols = append(cols, h.In(f.Config.Location).Format("01-02 15h"))
	}
	return nodeMap(g, cm.Palette(64), cm.Min(), cm.Max(), fmt.Sprintf("Hourly LAeq per node (%.0f to %.0f dB(A), blue to red; grey: no data)", lo, hi), f.nodeNames(), cols)
}
