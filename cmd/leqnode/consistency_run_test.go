package main

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/wav"
)

// The parts of TestOneTruth: one run of the node over the consistency signal, then each reader
// of its store checked against the records.

// oneTruth is the outcome of TestOneTruth's run: the store (read-only) and its records.
type oneTruth struct {
	dir, db string
	st      *buffer.Store
	secs    []*record.Second
	mins    []*record.Minute
	t0      time.Time // the first second's start
}

// all calls fn for every stored record of kind k.
func (o *oneTruth) all(t *testing.T, k record.Kind, fn func(record.Record)) {
	t.Helper()
	if err := o.st.Range(k, time.Unix(0, 0), time.Now().Add(time.Hour), func(r record.Record) error { fn(r); return nil }); err != nil {
		t.Fatal(err)
	}
}

// oneTruthRun runs `leqnode run` over the consistency signal and reads its records.
func oneTruthRun(t *testing.T) *oneTruth {
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
	t.Cleanup(func() { _ = st.Close() }) // read-only
	o := &oneTruth{dir: dir, db: db, st: st}
	all := func(k record.Kind, fn func(record.Record)) { o.all(t, k, fn) }
	secs, mins := &o.secs, &o.mins
	all(record.KindSecond, func(r record.Record) { *secs = append(*secs, r.(*record.Second)) })
	all(record.KindMinute, func(r record.Record) { *mins = append(*mins, r.(*record.Minute)) })
	// The session record names the node, its site and its position rounded as configured.
	var sessions []*record.Session
	all(record.KindSession, func(r record.Record) { sessions = append(sessions, r.(*record.Session)) })
	if len(sessions) == 0 || sessions[0].NodeID != "wc-harrowby-04" || sessions[0].Site != "Harrowby Lane, Wendle Cross (invented)" ||
		sessions[0].Latitude != 47.001 || sessions[0].Longitude != -30.005 {
		t.Errorf("session records %+v do not name the configured node", sessions)
	}
	if len(o.secs) < 148 || len(o.mins) < 2 {
		t.Fatalf("%d seconds, %d minutes", len(o.secs), len(o.mins))
	}
	o.t0 = o.secs[0].Start
	return o

}

// handTally is one minute's seconds counted by hand with the rule of the README's "Which
// seconds count": energy and duration of the counted ones, and how many of each kind.
type handTally struct {
	e, d                  float64
	valid, over, under    int
	calib, settle, silent int
}

// checkMinutesByHand applies the rule by hand to the second records and checks the flags and
// every minute record against it. It returns the tallies by minute.
func checkMinutesByHand(t *testing.T, o *oneTruth) map[time.Time]*handTally {
	secs, mins, t0 := o.secs, o.mins, o.t0
	// The rule applied by hand to the second records, per minute.
	byMinute := map[time.Time]*handTally{}
	for _, s := range secs {
		m := s.Start.Truncate(time.Minute)
		if byMinute[m] == nil {
			byMinute[m] = &handTally{}
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

	return byMinute
}
