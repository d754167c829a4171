package node

import (
	"math"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

func sine60(i int64) float32 { return float32(ampFor(60) * math.Sin(2*math.Pi*1000*float64(i)/48000)) }

// TestSourceMissingAtStart: the device is missing for the node's first 15 s. The hole before
// the first second is one gap record that ends exactly where the first second starts and says
// why; one gap for the outage, not one per retry.
func TestSourceMissingAtStart(t *testing.T) {
	src := &fakeSource{fs: 48000, signal: sine60, total: 5 * 48000, t0: t0, openFails: 15}
	r := newRig(t, src, func(o *Options) { o.RetryMax = time.Millisecond })
	r.run(t)
	gaps := records[*record.Gap](t, r.store, record.KindGap)
	secs := records[*record.Second](t, r.store, record.KindSecond)
	if len(gaps) != 1 || len(secs) == 0 {
		t.Fatalf("%d gaps, %d seconds: want one gap for the outage", len(gaps), len(secs))
	}
	g := gaps[0]
	if !g.From.Equal(t0) || !g.To.Equal(secs[0].Start) || !strings.Contains(g.Reason, "no such device") {
		t.Errorf("gap %v to %v (%q); want from the start %v to the first second %v, naming the fault", g.From, g.To, g.Reason, t0, secs[0].Start)
	}
}

// TestQuickRestartGap: a node restarted 0.8 s after its last second (a crash and a quick
// restart by systemd) records that hole too, ending exactly at the new run's first second.
func TestQuickRestartGap(t *testing.T) {
	src := &fakeSource{fs: 48000, signal: sine60, total: 5 * 48000, t0: t0}
	r := newRig(t, src, nil)
	r.run(t)
	secs := records[*record.Second](t, r.store, record.KindSecond)
	end := secs[len(secs)-1].Start.Add(secs[len(secs)-1].Duration)
	src2 := &fakeSource{fs: 48000, signal: sine60, total: 5 * 48000, t0: end.Add(800 * time.Millisecond)}
	ck := &simClock{now: src2.t0}
	src2.clock = ck
	o := r.node.o
	o.Source, o.Now = src2, ck.Now
	n2, err := New(o)
	if err != nil {
		t.Fatal(err)
	}
	(&rig{store: r.store, src: src2, clock: ck, node: n2}).run(t)
	gaps := records[*record.Gap](t, r.store, record.KindGap)
	var second2 *record.Second
	for _, s := range records[*record.Second](t, r.store, record.KindSecond) {
		if !s.Start.Before(src2.t0) {
			second2 = s
			break
		}
	}
	if len(gaps) != 1 || second2 == nil {
		t.Fatalf("%d gaps after a quick restart (want 1)", len(gaps))
	}
	if g := gaps[0]; !g.From.Equal(end) || !g.To.Equal(second2.Start) || !strings.Contains(g.Reason, "not running") {
		t.Errorf("gap %v to %v (%q); want %v to %v", g.From, g.To, g.Reason, end, second2.Start)
	}
}

// TestFlappingDeviceOneGap: a device that opens and fails again at once, over and over, makes
// one gap for the whole outage, not one per attempt.
func TestFlappingDeviceOneGap(t *testing.T) {
	src := &fakeSource{fs: 48000, signal: sine60, total: 10 * 48000, t0: t0, failAt: 3 * 48000, failFor: 2 * time.Second}
	src.flaps = 5
	r := newRig(t, src, nil)
	r.run(t)
	gaps := records[*record.Gap](t, r.store, record.KindGap)
	if len(gaps) != 1 {
		t.Fatalf("%d gaps, want 1: %+v", len(gaps), gaps)
	}
	secs := records[*record.Second](t, r.store, record.KindSecond)
	for _, s := range secs {
		if s.Start.Equal(gaps[0].To) {
			return
		}
	}
	t.Errorf("the gap ends at %v, where no second starts", gaps[0].To)
}

// TestDeviceTooFast: a device that delivers 20 s of audio per second of wall time for its
// first 600 s of audio (an ALSA file PCM over a regular file), then at its rate. The node
// reports a device fault, not a stream of clock steps: at most one clock-step gap and one gap
// for the fault, a bounded number of records, the device-fault flag raised and cleared, and
// measurement resumes once the rate is right.
func TestDeviceTooFast(t *testing.T) {
	const fs = 48000
	src := &fakeSource{fs: fs, signal: sine60, total: 660 * fs, t0: t0, fastUntil: 600 * fs, speed: 20}
	r := newRig(t, src, func(o *Options) { o.Lossless = true })
	r.run(t)
	gaps := records[*record.Gap](t, r.store, record.KindGap)
	secs := records[*record.Second](t, r.store, record.KindSecond)
	health := records[*record.Health](t, r.store, record.KindHealth)
	var steps, faults int
	for _, g := range gaps {
		switch {
		case strings.Contains(g.Reason, "clock stepped"):
			steps++
		case strings.Contains(g.Reason, "wrong rate"):
			faults++
		}
	}
	if steps > 1 || faults != 1 || len(gaps) > 2 {
		t.Errorf("%d gaps (%d clock steps, %d device faults): %+v", len(gaps), steps, faults, gaps)
	}
	// 600 s of audio in 30 s of wall time, then 60 s at the right rate: at most the seconds
	// before the fault and the minute after it, never the 600 s delivered too fast.
	t.Logf("600 s of audio delivered 20 times too fast, then 60 s at its rate: %d second records, %d gaps, %d health snapshots", len(secs), len(gaps), len(health))
	if len(secs) > 80 {
		t.Errorf("%d second records: the store grows with what a faulty device delivers", len(secs))
	}
	var raised, cleared bool
	for _, h := range health {
		if h.Flags.Has(record.DeviceFault) {
			raised = true
		} else if raised {
			cleared = true
		}
	}
	if !raised || !cleared {
		t.Errorf("device-fault raised %v, cleared %v", raised, cleared)
	}
	if last := secs[len(secs)-1]; last.Start.Sub(t0) < 80*time.Second {
		t.Errorf("measurement did not resume: the last second starts %v after the start", last.Start.Sub(t0))
	}
}
