package node

import (
	"math"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

func TestHealthFlags(t *testing.T) {
	// Sources that go silent, stick, clip and carry DC: each raises its health flag within the
	// set limit and clears it after (health checks: common practice, no standard names them).
	tone := func(i int64) float32 { return float32(ampFor(60) * math.Sin(2*math.Pi*1000*float64(i)/48000)) }
	const fs = 48000
	tests := []struct {
		name string
		flag record.Flags
		bad  func(i int64) float32 // the signal during seconds 4 to 9
	}{
		{"digital silence", record.DigitalSilence, func(int64) float32 { return 0 }},
		{"stuck input", record.StuckInput, func(int64) float32 { return 0.125 }},
		{"DC offset", record.DCOffset, func(i int64) float32 { return tone(i) + 0.05 }},
		{"clipping", record.Clipped, func(i int64) float32 {
			if i%4800 == 0 {
				return 1
			}
			return tone(i)
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			sig := func(i int64) float32 {
				if s := i / fs; s >= 4 && s < 10 {
					return tc.bad(i)
				}
				return tone(i)
			}
			src := &fakeSource{fs: fs, signal: sig, total: 16 * fs, t0: t0}
			r := newRig(t, src, func(o *Options) {
				o.Settling = time.Nanosecond
				o.Health = HealthOptions{SilenceLimit: 3 * time.Second, Interval: time.Hour}
			})
			r.run(t)
			var raised, cleared time.Time
			for _, h := range records[*record.Health](t, r.store, record.KindHealth) {
				if h.Flags.Has(tc.flag) && raised.IsZero() {
					raised = h.At
				}
				if !raised.IsZero() && !h.Flags.Has(tc.flag) && cleared.IsZero() {
					cleared = h.At
				}
			}
			if raised.IsZero() {
				t.Fatalf("%v never raised", tc.flag)
			}
			start := t0.Add(4 * time.Second)
			limit := time.Second // clipping and DC show in the first second
			if tc.flag == record.DigitalSilence || tc.flag == record.StuckInput {
				limit = 3 * time.Second
			}
			if d := raised.Sub(start); d < limit || d > limit+time.Second {
				t.Errorf("raised %v after the fault began, want within %v of the %v limit", d, time.Second, limit)
			}
			if cleared.IsZero() || cleared.Before(t0.Add(10*time.Second)) || cleared.After(t0.Add(11*time.Second)) {
				t.Errorf("cleared at %v, want in the second after the fault ends (%v)", cleared, t0.Add(10*time.Second))
			}
		})
	}
}

func TestHealthSelfTest(t *testing.T) {
	// A failed self-verification is stored (and so published) at once with a health snapshot
	// carrying its counts and the chain-fault flag.
	tone := func(i int64) float32 { return float32(ampFor(60) * math.Sin(2*math.Pi*1000*float64(i)/48000)) }
	src := &fakeSource{fs: 48000, signal: tone, total: 60 * 48000, t0: t0}
	r := newRig(t, src, func(o *Options) { o.Health = HealthOptions{Interval: time.Hour} })
	go func() {
		time.Sleep(20 * time.Millisecond)
		r.node.ReportSelfTest(65, 2)
	}()
	r.run(t)
	var found *record.Health
	for _, h := range records[*record.Health](t, r.store, record.KindHealth) {
		if h.SelfTestChecks > 0 {
			found = h
		}
	}
	if found == nil || found.SelfTestChecks != 65 || found.SelfTestFailed != 2 || !found.Flags.Has(record.ChainFault) {
		t.Fatalf("self-test snapshot: %+v", found)
	}
}
