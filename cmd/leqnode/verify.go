package main

import (
	"context"
	"encoding/json"
	"fmt"
	"html/template"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/leqnode/leqnode/dsp/selftest"
)

func runVerify(ctx context.Context, std stdio, args []string) error {
	return verifyCommand(ctx, std, args, selftest.Options{})
}

// verifyCommand is runVerify with the chain's options, so that a test can hand it a damaged
// chain.
func verifyCommand(_ context.Context, std stdio, args []string, o selftest.Options) error {
	fl := newFlags("verify", "[--full] [--rate HZ] [--format table|json|html]", std.err)
	full := fl.Bool("full", false, "run every test point of the tables (a few seconds) instead of the periodic set")
	rate := fl.Float64("rate", 48000, "sample rate of the chain to verify, Hz")
	format := fl.String("format", "table", "output: table, json or html")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("verify takes no arguments: it tests the measurement chain with its own signals")
	}
	if err := oneOf("format", *format, "table", "json", "html"); err != nil {
		return err
	}
	if !(*rate >= 8000 && *rate <= 192000) {
		return badInput("--rate %g Hz is out of range: use 8000 to 192000 Hz", *rate)
	}
	o.Full = *full
	rep := selftest.RunOptions(*rate, o)
	switch *format {
	case "json":
		b, err := json.MarshalIndent(rep, "", "  ")
		if err != nil {
			return err
		}
		if _, err := std.out.Write(append(b, '\n')); err != nil {
			return err
		}
	case "html":
		if err := writeVerifyHTML(std.out, rep); err != nil {
			return err
		}
	default:
		if err := writeVerifyTable(std.out, rep); err != nil {
			return err
		}
	}
	if rep.Error != "" {
		return fmt.Errorf("the measurement chain could not be built at %g Hz: %s", *rate, rep.Error)
	}
	if failed := rep.Failed(); len(failed) > 0 {
		return fmt.Errorf("%d of %d tests failed, first %q (%s): the digital measurement chain is damaged; reinstall leqnode and report the failure",
			len(failed), len(rep.Checks), failed[0].Test, failed[0].Group)
	}
	return nil
}

// fmtLimits writes the acceptance interval on the deviation, e.g. "+1.5/-2.5".
func fmtLimits(lo, up float64) string {
	f := func(v float64) string {
		if math.IsInf(v, 0) {
			return "none"
		}
		return fmt.Sprintf("%+.1f", v)
	}
	switch {
	case lo == -up:
		return fmt.Sprintf("±%.1f", up)
	case math.IsInf(up, 1) && !math.IsInf(lo, 0):
		return "≥ " + f(lo)
	}
	return f(up) + "/" + f(lo)
}

func fmtMeasured(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "no reading"
	}
	if math.Abs(v) < 0.005 {
		v = 0 // no "-0.00"
	}
	return fmt.Sprintf("%.2f", v)
}

func passText(p bool) string {
	if p {
		return "pass"
	}
	return "FAIL"
}

const verifyScope = "Tests the digital chain only: not the microphone, the analogue front end or the acoustic environment."

func verifySummary(rep selftest.Report) string {
	n, f := len(rep.Checks), len(rep.Failed())
	if f == 0 && rep.Error == "" {
		return fmt.Sprintf("%d tests passed at %g Hz: the digital chain meets the class 1 tolerance limits of IEC 61672-1:2013 and IEC 61260-1:2014 in these electrical tests.", n, rep.SampleRate)
	}
	return fmt.Sprintf("%d of %d tests FAILED at %g Hz.", f, n, rep.SampleRate)
}

func writeVerifyTable(w io.Writer, rep selftest.Report) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	p := &printer{w: tw}
	group := ""
	for _, c := range rep.Checks {
		if c.Group != group {
			if group != "" {
				p.println("\t\t\t\t\t")
			}
			group = c.Group
			p.printf("%s\t%11s\t%11s\t%12s\t\n", strings.ToUpper(group[:1])+group[1:], "expected dB", "measured dB", "tolerance dB")
		}
		p.printf("  %s\t%11.2f\t%11s\t%12s\t%s\n", c.Test, c.Expected, fmtMeasured(c.Measured), fmtLimits(c.Tolerance.Lower, c.Tolerance.Upper), passText(c.Pass))
	}
	if p.err != nil {
		return p.err
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	p = &printer{w: w}
	p.println()
	if len(rep.Skipped) > 0 {
		p.printf("Not tested at %g Hz (at or above 0.45 fs): %s.\n", rep.SampleRate, strings.Join(rep.Skipped, "; "))
	}
	p.println(verifySummary(rep))
	p.println(verifyScope)
	return p.err
}

var verifyPage = template.Must(template.New("verify").Funcs(template.FuncMap{
	"measured": fmtMeasured, "limits": fmtLimits, "pass": passText,
}).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>leqnode self-verification</title>
<style>
body { font-family: system-ui, sans-serif; margin: 2rem auto; max-width: 60rem; padding: 0 1rem; color: #1d2a30; }
h1 { font-size: 1.4rem; font-weight: 600; }
p.summary { font-size: 1.05rem; padding: .6rem .8rem; border-left: .35rem solid #2f7d5b; background: #eef6f1; }
p.summary.failed { border-color: #b3412e; background: #fbeeea; }
table { border-collapse: collapse; width: 100%; margin: 1rem 0 2rem; font-variant-numeric: tabular-nums; }
caption { text-align: left; font-weight: 600; padding: .3rem 0; }
th, td { padding: .25rem .6rem; border-bottom: 1px solid #d6dde0; text-align: right; }
th:first-child, td:first-child { text-align: left; }
td.fail { color: #b3412e; font-weight: 600; }
td.source { font-size: .8rem; color: #5a6a70; text-align: left; }
footer { font-size: .85rem; color: #5a6a70; }
</style>
</head>
<body>
<h1>leqnode self-verification at {{.Report.SampleRate}} Hz{{if .Report.Full}} (full set){{end}}</h1>
<p class="summary{{if not .Report.Pass}} failed{{end}}">{{.Summary}}</p>
{{if .Report.Error}}<p class="summary failed">{{.Report.Error}}</p>{{end}}
{{if .Report.Skipped}}<p>Not tested at this sample rate (at or above 0.45 fs): {{range $i, $s := .Report.Skipped}}{{if $i}}; {{end}}{{$s}}{{end}}.</p>{{end}}
{{range .Groups}}<table>
<caption>{{.Name}}</caption>
<thead><tr><th>test</th><th>expected dB</th><th>measured dB</th><th>tolerance dB</th><th>result</th><th>source</th></tr></thead>
<tbody>
{{range .Checks}}<tr><td>{{.Test}}</td><td>{{printf "%.2f" .Expected}}</td><td>{{measured .Measured}}</td><td>{{limits .Tolerance.Lower .Tolerance.Upper}}</td><td{{if not .Pass}} class="fail"{{end}}>{{pass .Pass}}</td><td class="source">{{.Source}}</td></tr>
{{end}}</tbody>
</table>
{{end}}<footer>
<p>{{.Scope}} Passing does not make the node a class 1 or type-approved instrument; legally valid
measurements need a type-approved class 1 instrument with traceable calibration, and local
regulations and accredited practice prevail.</p>
</footer>
</body>
</html>
`))

type verifyGroup struct {
	Name   string
	Checks []selftest.Check
}

func writeVerifyHTML(w io.Writer, rep selftest.Report) error {
	var groups []verifyGroup
	for _, c := range rep.Checks {
		if len(groups) == 0 || groups[len(groups)-1].Name != c.Group {
			groups = append(groups, verifyGroup{Name: c.Group})
		}
		g := &groups[len(groups)-1]
		g.Checks = append(g.Checks, c)
	}
	return verifyPage.Execute(w, struct {
		Report  selftest.Report
		Summary string
		Scope   string
		Groups  []verifyGroup
	}{rep, verifySummary(rep), verifyScope, groups})
}
