package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/lib/report"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
	"github.com/leqnode/leqnode/node/web"
)

// checkExportedMinutes: export gives the same numbers under the same names.
func checkExportedMinutes(t *testing.T, o *oneTruth) {
	db, mins := o.db, o.mins
	// export: the same numbers under the same names.
	code, jsonl, errs := runCmd(t, nil, "export", "--db", db, "--kind", "minute")
	if code != 0 {
		t.Fatalf("export: %d %s", code, errs)
	}
	sc := bufio.NewScanner(strings.NewReader(jsonl))
	sc.Buffer(nil, 1<<20)
	i := 0
	for sc.Scan() {
		var row map[string]any
		if err := json.Unmarshal(sc.Bytes(), &row); err != nil {
			t.Fatal(err)
		}
		m := mins[i]
		i++
		for _, f := range record.Fields(record.KindMinute) {
			got, ok := row[f.Name]
			if !ok {
				t.Errorf("export minute lacks %q", f.Name)
				continue
			}
			switch v := f.Value(m).(type) {
			case float64:
				if g, _ := got.(float64); !(math.IsNaN(v) && got == nil) && g != v {
					t.Errorf("export minute %v %s = %v, record %v", m.Start, f.Name, got, v)
				}
			case uint64:
				if g, _ := got.(float64); uint64(g) != v {
					t.Errorf("export minute %v %s = %v, record %v", m.Start, f.Name, got, v)
				}
			}
		}
	}
	if i != len(mins) {
		t.Errorf("export wrote %d minutes of %d", i, len(mins))
	}

}

// checkStatusPage: the status page's JSON and metrics read the same store.
func checkStatusPage(t *testing.T, o *oneTruth) {
	st, secs, mins := o.st, o.secs, o.mins
	// The status page's JSON and metrics read the same store.
	end := secs[len(secs)-1].Start.Add(time.Second)
	srv, err := web.New(web.Options{Store: st, Now: func() time.Time { return end }, Status: func() web.Status { return web.Status{NodeID: "wc-harrowby-04"} }})
	if err != nil {
		t.Fatal(err)
	}
	h := httptest.NewServer(srv.Handler())
	defer h.Close()
	res, err := http.Get(h.URL + "/api/seconds?minutes=5")
	if err != nil {
		t.Fatal(err)
	}
	var page struct {
		Seconds []struct {
			Start  string   `json:"start"`
			LAeq   *float64 `json:"LAeq"`
			LAFmax *float64 `json:"LAFmax"`
			Flags  []string `json:"flags"`
		} `json:"seconds"`
	}
	json.NewDecoder(res.Body).Decode(&page)
	res.Body.Close()
	if len(page.Seconds) != len(secs) {
		t.Fatalf("page: %d seconds, store %d", len(page.Seconds), len(secs))
	}
	for k, p := range page.Seconds {
		s := secs[k]
		if p.LAeq == nil || *p.LAeq != math.Round(s.LAeq*100)/100 || strings.Join(p.Flags, "|") != s.Flags.String() {
			t.Errorf("page second %s: LAeq %v flags %v; store %.2f %v", p.Start, p.LAeq, p.Flags, s.LAeq, s.Flags)
			break
		}
	}
	res, err = http.Get(h.URL + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	metrics, _ := readAll(res)
	last := mins[len(mins)-1]
	want := fmt.Sprintf(`leqnode_level_db{bound=%q,interval="1min",quantity="LAeq",validity="counted"} %g`, last.Tally().Bound().String(), math.Round(last.LAeq*100)/100)
	if !strings.Contains(metrics, want) {
		t.Errorf("metrics lack %s", want)
	}

}

// checkReportFromMinutes: the report's hour LAeq is the energy mean of every counted second,
// and the same from a store whose second records have expired (minute records only).
func checkReportFromMinutes(t *testing.T, o *oneTruth, byMinute map[time.Time]*handTally) {
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	dir, st, t0 := o.dir, o.st, o.t0
	all := func(k record.Kind, fn func(record.Record)) { o.all(t, k, fn) }
	// The report: the hour's LAeq is the energy mean of every counted second, and the same from
	// a store whose second records have expired (minute records only).
	var e, d float64
	for _, tl := range byMinute {
		e, d = e+tl.e, d+tl.d
	}
	prof, _ := profiles.Load("ldn")
	from := t0.Truncate(time.Hour)
	full, err := report.Compute(ctx, st, report.Config{Profile: prof, From: from, To: from.Add(2 * time.Hour)})
	if err != nil {
		t.Fatal(err)
	}
	hourLAeq := func(r *indicator.Result) (float64, indicator.Coverage) {
		var e, v float64
		var c indicator.Coverage
		for _, h := range r.Hours {
			if !math.IsNaN(h.LAeq) {
				e += math.Pow(10, h.LAeq/10) * h.Coverage.Valid
				v += h.Coverage.Valid
			}
			c.Valid += h.Coverage.Valid
			c.Overload += h.Coverage.Overload
			for k := range c.LeftOut {
				c.LeftOut[k] += h.Coverage.LeftOut[k]
			}
		}
		return 10 * math.Log10(e/v), c
	}
	got, cov := hourLAeq(full)
	if math.Abs(got-10*math.Log10(e/d)) > 0.005 {
		t.Errorf("report LAeq %.3f, energy mean of the counted seconds %.3f", got, 10*math.Log10(e/d))
	}
	expired := filepath.Join(dir, "expired.db")
	ex, err := buffer.Open(expired, &buffer.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	for _, k := range record.Kinds() {
		if k == record.KindSecond {
			continue
		}
		all(k, func(r record.Record) {
			if _, err := ex.Append(r); err != nil {
				t.Fatal(err)
			}
		})
	}
	exRep, err := report.Compute(ctx, ex, report.Config{Profile: prof, From: from, To: from.Add(2 * time.Hour)})
	ex.Close()
	if err != nil {
		t.Fatal(err)
	}
	got2, cov2 := hourLAeq(exRep)
	// Minute records carry the length of their valid seconds (a run's first and last second
	// are shorter than a second), so the energy agrees to the 0.01 dB of stored levels; left-out
	// seconds are counted whole in minute records (within a second per start or stop).
	if math.Abs(got2-got) > 0.01 || math.Abs(cov2.Valid-cov.Valid) > 0.001 || cov2.Overload != cov.Overload ||
		math.Abs(cov2.Tally().LeftOutTotal()-cov.Tally().LeftOutTotal()) > 1 {
		t.Errorf("report from minutes only: LAeq %.3f coverage %+v; from seconds %.3f %+v", got2, cov2, got, cov)
	}
	for k, p := range full.Periods {
		if p.Bound != exRep.Periods[k].Bound || math.Abs(p.LAeq-exRep.Periods[k].LAeq) > 0.01 {
			t.Errorf("period %s: from seconds %.2f %v, from minutes %.2f %v", p.Name, p.LAeq, p.Bound, exRep.Periods[k].LAeq, exRep.Periods[k].Bound)
		}
	}
}
