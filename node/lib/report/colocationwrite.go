package report

import (
	"bytes"
	"fmt"
	"html/template"
	"image/color"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// Files written by WriteColocation.
const (
	ColocationHTMLFile = "colocation.html"
	ColocationCSVFile  = "colocation.csv"
)

func passText(ok bool) string {
	if ok {
		return "pass"
	}
	return "FAIL"
}

func signed(v float64) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(v, 'f', 2, 64)
}

// ColocationCSV returns one row per node: its LAeq and offset, its worst band, pass or fail,
// and its offset in every compared band; a last row "median" holds the group's median levels.
func ColocationCSV(c *Colocation) []byte {
	w := newMemCSV()
	head := []string{"node_id", "site", "minutes", "LAeq", "LAeq_offset", "worst_band_hz", "worst_band_offset", "result"}
	for _, n := range c.Nominal {
		head = append(head, "offset_"+n+"_Hz")
	}
	w.Write(head)
	for _, n := range c.Nodes {
		row := []string{n.NodeID, n.Site, strconv.Itoa(c.Minutes), signed(n.LAeq), signed(n.Offset), n.WorstBand, signed(n.Worst), passText(n.Pass)}
		for _, b := range n.Bands {
			row = append(row, signed(b))
		}
		w.Write(row)
	}
	row := []string{"median", "", strconv.Itoa(c.Minutes), signed(c.MedianLAeq), "", "", "", ""}
	for _, b := range c.MedianBands {
		row = append(row, signed(b))
	}
	w.Write(row)
	return w.Bytes()
}

// ColocationText returns the check as a terminal table.
func ColocationText(c *Colocation) string {
	var b strings.Builder
	fmt.Fprintf(&b, "co-location check over %d common minutes, tolerance ±%.1f dB, median LAeq %.1f dB, spread %.2f dB: %s\n",
		c.Minutes, c.Tolerance, c.MedianLAeq, c.Spread, passText(c.Pass))
	// A tabwriter reports only its destination's errors, and a strings.Builder takes every
	// byte: the writes below cannot fail.
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	_, _ = fmt.Fprintln(tw, "node\tsite\tLAeq\toffset\tworst band\tresult")
	for _, n := range c.Nodes {
		_, _ = fmt.Fprintf(tw, "%s\t%s\t%.1f\t%+.2f\t%s Hz %+.2f\t%s\n", n.NodeID, n.Site, n.LAeq, n.Offset, n.WorstBand, n.Worst, passText(n.Pass))
	}
	_ = tw.Flush()
	return b.String()
}

// WriteColocation writes colocation.html and colocation.csv into dir.
func WriteColocation(dir string, c *Colocation, created time.Time) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("report: output directory %s: %w", dir, err)
	}
	img, err := colocationPlot(c)
	if err != nil {
		return fmt.Errorf("report: co-location plot: %w", err)
	}
	var buf bytes.Buffer
	err = colocationTemplate.Execute(&buf, struct {
		C        *Colocation
		Created  string
		From, To string
		Plot     template.URL
	}{c, created.Format("2006-01-02 15:04 MST"), c.From.In(created.Location()).Format("2006-01-02 15:04"),
		c.To.In(created.Location()).Format("2006-01-02 15:04"), dataURI(img)})
	if err != nil {
		return fmt.Errorf("report: rendering HTML: %w", err)
	}
	if err := writeFile(filepath.Join(dir, ColocationHTMLFile), buf.Bytes()); err != nil {
		return err
	}
	return writeFile(filepath.Join(dir, ColocationCSVFile), ColocationCSV(c))
}

// colocationPlot draws every node's offset per band, with the tolerance as dashed lines.
func colocationPlot(c *Colocation) ([]byte, error) {
	if len(c.Nominal) == 0 {
		return emptyPlot("Band offsets: no band common to every node")
	}
	p := newPlot()
	p.Title.Text = "Offset from the group's median per one-third-octave band"
	p.Y.Label.Text = "dB"
	p.X.Label.Text = "Hz"
	for i, n := range c.Nodes {
		xys := make(plotter.XYs, len(n.Bands))
		for k, v := range n.Bands {
			xys[k] = plotter.XY{X: float64(k), Y: v}
		}
		l, err := plotter.NewLine(xys)
		if err != nil {
			return nil, err
		}
		l.Color = periodColor(i)
		if !n.Pass {
			l.Width = vg.Points(2.5)
		}
		p.Add(l)
		p.Legend.Add(n.NodeID, l)
	}
	for _, y := range []float64{-c.Tolerance, c.Tolerance} {
		l, err := plotter.NewLine(plotter.XYs{{X: 0, Y: y}, {X: float64(len(c.Nominal) - 1), Y: y}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Dashes = color.RGBA{limitRed, 30, 30, 255}, []vg.Length{vg.Points(4), vg.Points(2)}
		p.Add(l)
	}
	names := make([]string, len(c.Nominal))
	for k, n := range c.Nominal {
		if (c.FirstBand+k)%3 == 0 {
			names[k] = n
		}
	}
	p.NominalX(names...)
	p.Add(plotter.NewGrid())
	p.Legend.Top = true
	return renderPNG(p, plotW, plotH)
}

var colocationTemplate = template.Must(template.New("colocation").Parse(sharedHTML + colocationHTML))

const colocationHTML = `<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>leqnode co-location check {{.From}} to {{.To}}</title>
{{template "style"}}</head><body>
<h1>Co-location check of {{len .C.Nodes}} nodes: {{if .C.Pass}}passed{{else}}FAILED{{end}}</h1>
<dl>
<dt>Range</dt><dd>{{.From}} to {{.To}}, half-open; {{.C.Minutes}} minutes that every node counted whole</dd>
<dt>Tolerance</dt><dd>±{{printf "%.1f" .C.Tolerance}} dB from the group's median, overall and in every band</dd>
<dt>Median LAeq</dt><dd>{{printf "%.1f" .C.MedianLAeq}} dB; spread (largest minus smallest) {{printf "%.2f" .C.Spread}} dB</dd>
<dt>Generated</dt><dd>{{.Created}} by leqnode</dd>
</dl>
{{template "cautions"}}
<h2>Nodes</h2>
<div class="wide"><table><tr><th class="l">Node</th><th class="l">Site</th><th>LAeq</th><th>Offset dB</th><th>Worst band Hz</th><th>Its offset dB</th><th class="l">Result</th></tr>
{{range .C.Nodes}}<tr{{if not .Pass}} class="over"{{end}}><td class="l">{{.NodeID}}</td><td class="l">{{.Site}}</td><td>{{printf "%.1f" .LAeq}}</td><td>{{printf "%+.2f" .Offset}}</td><td>{{.WorstBand}}</td><td>{{printf "%+.2f" .Worst}}</td><td class="l">{{if .Pass}}pass{{else}}FAIL{{end}}</td></tr>
{{end}}</table></div>
<figure><img src="{{.Plot}}" alt="each node's offset from the median per band, tolerance dashed"><figcaption>Offset per one-third-octave band; dashed: the tolerance. colocation.csv holds every value.</figcaption></figure>
<h2>Method</h2>
<ul>
<li>Only minutes that every node counted whole (sixty valid seconds under the validity rule) are compared, so a gap or a calibration on one node does not bias the result.</li>
<li>Each node's LAeq and its LZeq per one-third-octave band are energy means over those minutes (ISO 1996-1:2016, 3.1.7); its offset is the difference from the group's median.</li>
<li>The median is the yardstick, not a reference instrument: a fault most nodes share passes unseen. Calibrate against a sound calibrator as well.</li>
</ul>
<p class="part">leqnode — open-source noise monitoring node.</p>
</body></html>
`
