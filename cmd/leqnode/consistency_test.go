package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"log/slog"
	"math"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/report"
	"github.com/leqnode/leqnode/node/report/indicator"
	"github.com/leqnode/leqnode/node/testrig"
	"github.com/leqnode/leqnode/node/wav"
	"github.com/leqnode/leqnode/node/web"
)

// consistencySignal is 150 s at 48 kHz (sensitivity -26 dBFS) holding every case the validity
// rule knows: steady noise at about 60 dB, a 94 dB calibrator tone (20 to 32 s), a 1 kHz
// machine at 80 dB that is sound (50 to 62 s), 5 s overloaded at 112 dB (80 to 85 s, above the
// configured 110 dB overload level) and 10 s under the measuring range (100 to 110 s).
func consistencySignal() []float32 {
	const fs = 48000
	amp := func(l float64) float64 { return math.Pow(10, (l-94-26)/20) } // peak; SPL = dBFS - S + 94 (AES17)
	x := make([]float32, 150*fs)
	var state uint64 = 7
	for i := range x {
		t := float64(i) / fs
		state = state*6364136223846793005 + 1442695040888963407
		u := float64(state>>11)/float64(1<<53)*2 - 1  // uniform [-1, 1): RMS 1/√3
		bg := amp(60) * u * math.Sqrt(3) / math.Sqrt2 // noise with the RMS of a 60 dB sine
		var v float64
		switch {
		case t >= 20 && t < 32:
			v = amp(94)*math.Sin(2*math.Pi*1000*t) + bg
		case t >= 50 && t < 62:
			v = amp(80)*math.Sin(2*math.Pi*1000*t) + bg
		case t >= 80 && t < 85:
			v = amp(112)*math.Sin(2*math.Pi*500*t) + bg
		case t >= 100 && t < 110:
			v = bg * math.Pow(10, -40.0/20) // about 20 dB: under 29 dB(A) self-noise + 5 dB
		default:
			v = bg
		}
		x[i] = float32(v)
	}
	return x
}

// TestOneTruth feeds one signal through `leqnode run` and reads the same quantities from the
// second records, the minute records, `leqnode export`, the status page's JSON, the metrics and
// the report: the numbers agree to the rounding and carry the same names. Expected minute levels
// are the energy mean of the counted seconds written out here (ISO 1996-1:2016, 3.1.7), with the
// rule of the README's "Which seconds count" applied by hand.
func TestOneTruth(t *testing.T) {
	dir := t.TempDir()
	sig := writeWAV(t, dir, "street.wav", wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32}, consistencySignal())
	db := filepath.Join(dir, "node.db")
	cfg := filepath.Join(dir, "node.toml")
	os.WriteFile(cfg, []byte(fmt.Sprintf(`version = 1
[node]
id = "wc-harrowby-04"
site = "Harrowby Lane, Wendle Cross (invented)"
latitude = 47.00123
longitude = -30.00456
location_decimals = 3
time_zone = "UTC"
[microphone]
sensitivity_dbfs = -26
self_noise_dba = 29
under_range_margin_db = 5
overload_db = 110
[capture]
kind = "file"
file = %q
realtime = false
[measure]
bands = "third"
settling_s = 2
[events]
threshold_db = 70
[store]
path = %q
commit_interval = "1s"
[calibration]
references = [94.0, 114.0]
`, sig, db)), 0o644)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	var out, errb strings.Builder
	if code := run(ctx, stdio{in: strings.NewReader(""), out: &out, err: &errb}, []string{"run", "--config", cfg}); code != 0 {
		t.Fatalf("leqnode run: exit %d: %s", code, errb.String())
	}

	st, err := buffer.OpenReadOnly(db, time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var secs []*record.Second
	var mins []*record.Minute
	all := func(k record.Kind, fn func(record.Record)) {
		if err := st.Range(k, time.Unix(0, 0), time.Now().Add(time.Hour), func(r record.Record) error { fn(r); return nil }); err != nil {
			t.Fatal(err)
		}
	}
	all(record.KindSecond, func(r record.Record) { secs = append(secs, r.(*record.Second)) })
	all(record.KindMinute, func(r record.Record) { mins = append(mins, r.(*record.Minute)) })
	// The session record names the node, its site and its position rounded as configured.
	var sessions []*record.Session
	all(record.KindSession, func(r record.Record) { sessions = append(sessions, r.(*record.Session)) })
	if len(sessions) == 0 || sessions[0].NodeID != "wc-harrowby-04" || sessions[0].Site != "Harrowby Lane, Wendle Cross (invented)" ||
		sessions[0].Latitude != 47.001 || sessions[0].Longitude != -30.005 {
		t.Errorf("session records %+v do not name the configured node", sessions)
	}
	if len(secs) < 148 || len(mins) < 2 {
		t.Fatalf("%d seconds, %d minutes", len(secs), len(mins))
	}
	t0 := secs[0].Start

	// The rule applied by hand to the second records, per minute.
	type tally struct {
		e, d                  float64
		valid, over, under    int
		calib, settle, silent int
	}
	byMinute := map[time.Time]*tally{}
	for _, s := range secs {
		m := s.Start.Truncate(time.Minute)
		if byMinute[m] == nil {
			byMinute[m] = &tally{}
		}
		tl := byMinute[m]
		switch {
		case s.Flags.Has(record.Calibrating):
			tl.calib++
		case s.Flags.Has(record.Settling):
			tl.settle++
		case math.IsNaN(s.LAeq):
			tl.silent++
		default:
			tl.valid++
			tl.e += math.Pow(10, s.LAeq/10) * s.Duration.Seconds()
			tl.d += s.Duration.Seconds()
			if s.Flags.Has(record.Overload) {
				tl.over++
			}
			if s.Flags.Has(record.UnderRange) {
				tl.under++
			}
		}
	}
	var calibrating, machineCal, overload, under int
	for _, s := range secs {
		at := s.Start.Sub(t0)
		if s.Flags.Has(record.Calibrating) {
			calibrating++
			if at >= 51*time.Second && at < 61*time.Second {
				machineCal++
			}
		}
		if s.Flags.Has(record.Overload) {
			overload++
		}
		if s.Flags.Has(record.UnderRange) {
			under++
		}
	}
	if calibrating < 12 || machineCal != 0 || overload < 5 || under < 8 {
		t.Errorf("flags: %d calibrating (%d in the machine tone), %d overload, %d under range", calibrating, machineCal, overload, under)
	}
	for _, m := range mins {
		tl := byMinute[m.Start]
		if tl == nil {
			t.Errorf("minute %v without seconds", m.Start)
			continue
		}
		want := 10 * math.Log10(tl.e/tl.d)
		if math.Abs(m.LAeq-want) > 0.01 {
			t.Errorf("minute %v: LAeq %.2f, energy mean of its counted seconds %.2f", m.Start, m.LAeq, want)
		}
		if m.ValidSeconds != tl.valid || m.OverloadSeconds != tl.over || m.UnderRangeSeconds != tl.under ||
			m.LeftOut[1] != tl.calib || m.LeftOut[2] != tl.settle {
			t.Errorf("minute %v counts valid %d overload %d under %d left out %v; seconds say %+v", m.Start,
				m.ValidSeconds, m.OverloadSeconds, m.UnderRangeSeconds, m.LeftOut, *tl)
		}
	}

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

// TestOneTruthMQTT: the minute records of TestOneTruth's signal, published by the node's
// publisher through a real mosquitto, carry the record model's names and the stored numbers.
func TestOneTruthMQTT(t *testing.T) {
	m := testrig.StartMosquitto(t, testrig.BrokerOptions{})
	dir := t.TempDir()
	sig := writeWAV(t, dir, "street.wav", wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32}, consistencySignal()[:75*48000])
	db := filepath.Join(dir, "node.db")
	cfg := filepath.Join(dir, "node.toml")
	os.WriteFile(cfg, []byte(fmt.Sprintf("version = 1\n[node]\nid = \"wc-harrowby-04\"\n[microphone]\noverload_db = 110\n[capture]\nkind = \"file\"\nfile = %q\nrealtime = false\n[store]\npath = %q\n", sig, db)), 0o644)
	var out, errb strings.Builder
	if code := run(context.Background(), stdio{in: strings.NewReader(""), out: &out, err: &errb}, []string{"run", "--config", cfg}); code != 0 {
		t.Fatalf("leqnode run: exit %d: %s", code, errb.String())
	}
	st, err := buffer.Open(db, &buffer.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var mins []*record.Minute
	st.Range(record.KindMinute, time.Unix(0, 0), time.Now().Add(time.Hour), func(r record.Record) error { mins = append(mins, r.(*record.Minute)); return nil })

	got := make(chan map[string]any, 16)
	opts := mqtt.NewClientOptions().AddBroker(m.URL("tcp")).SetClientID("one-truth-reader")
	opts.SetOnConnectHandler(func(c mqtt.Client) {
		c.Subscribe("leqnode/+/+/minute", 1, func(_ mqtt.Client, msg mqtt.Message) {
			var v map[string]any
			if json.Unmarshal(msg.Payload(), &v) == nil {
				got <- v
			}
		}).Wait()
	})
	reader := mqtt.NewClient(opts)
	if tok := reader.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("reader: %v", tok.Error())
	}
	defer reader.Disconnect(100)
	pc := publish.Config{Brokers: []string{m.URL("tcp")}}.WithDefaults("wc-harrowby-04")
	pub, err := publish.New(pc, st, publish.Identity{NodeID: "wc-harrowby-04"}, slog.New(slog.DiscardHandler))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	go pub.Run(ctx)
	bySeq := map[uint64]map[string]any{}
	for len(bySeq) < len(mins) {
		select {
		case v := <-got:
			seq, _ := v["seq"].(float64)
			bySeq[uint64(seq)] = v
		case <-ctx.Done():
			t.Fatalf("%d of %d minute messages arrived", len(bySeq), len(mins))
		}
	}
	for _, mr := range mins {
		v := bySeq[mr.Seq()]
		for _, f := range record.Fields(record.KindMinute) {
			x, ok := v[f.Name]
			if !ok {
				t.Errorf("minute %d over MQTT lacks %q", mr.Seq(), f.Name)
				continue
			}
			switch want := f.Value(mr).(type) {
			case float64:
				if g, _ := x.(float64); !(math.IsNaN(want) && x == nil) && g != want {
					t.Errorf("minute %d %s: MQTT %v, stored %v", mr.Seq(), f.Name, x, want)
				}
			case uint64:
				if g, _ := x.(float64); uint64(g) != want {
					t.Errorf("minute %d %s: MQTT %v, stored %v", mr.Seq(), f.Name, x, want)
				}
			case string:
				if x != want {
					t.Errorf("minute %d %s: MQTT %v, stored %v", mr.Seq(), f.Name, x, want)
				}
			}
		}
	}
}

func readAll(res *http.Response) (string, error) {
	defer res.Body.Close()
	var b strings.Builder
	_, err := bufio.NewReader(res.Body).WriteTo(&b)
	return b.String(), err
}
