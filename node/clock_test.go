package node

import (
	"math/rand/v2"
	"testing"
	"time"
)

// The system clock cannot be stepped in a test (decisions: never step the machine's clock), so
// these tests drive SampleClock with simulated arrival times.

func TestSampleClockTracksRateError(t *testing.T) {
	// A converter 0.1 % fast (48 048 Hz against a nominal 48 000 Hz), blocks of 100 ms arriving
	// with 0–5 ms of scheduling jitter: after an hour the clock must place samples within 10 ms
	// of their true time (issue: seconds aligned to UTC within 10 ms after an hour).
	for _, ppm := range []float64{1000, -1000, 0, 250} {
		trueRate := 48000 * (1 + ppm*1e-6)
		c := NewSampleClock(48000)
		rng := rand.New(rand.NewPCG(3, 4))
		t0 := time.Date(2026, 5, 4, 6, 59, 58, 0, time.UTC)
		const block = 4800
		var n int64
		var worst time.Duration
		for n < int64(3600*trueRate) {
			n += block
			truth := t0.Add(time.Duration(float64(n) / trueRate * 1e9))
			jitter := time.Duration(rng.Float64() * 5e6)
			if step := c.Observe(n, truth.Add(jitter)); step != 0 {
				t.Fatalf("%g ppm: spurious clock step %v", ppm, step)
			}
			if float64(n) > 3000*trueRate { // the last ten minutes of the hour
				err := c.Time(n).Sub(truth)
				worst = max(worst, err, -err)
			}
		}
		if worst > 10*time.Millisecond {
			t.Errorf("%g ppm: timestamps off by up to %v after an hour, want ≤ 10 ms", ppm, worst)
		}
		if d := c.Rate() - trueRate; d > 1 || d < -1 {
			t.Errorf("%g ppm: estimated rate %.2f Hz, true %.2f Hz", ppm, c.Rate(), trueRate)
		}
	}
}

func TestSampleClockStep(t *testing.T) {
	c := NewSampleClock(48000)
	t0 := time.Date(2026, 5, 4, 7, 0, 0, 0, time.UTC)
	c.Observe(4800, t0)
	if s := c.Observe(9600, t0.Add(100*time.Millisecond)); s != 0 {
		t.Fatalf("step %v on a steady stream", s)
	}
	// The system clock jumps back 30 s (an NTP correction after boot).
	s := c.Observe(14400, t0.Add(200*time.Millisecond-30*time.Second))
	if s > -29*time.Second || s < -31*time.Second {
		t.Fatalf("step = %v, want about -30 s", s)
	}
	if got := c.Time(14400); !got.Equal(t0.Add(200*time.Millisecond - 30*time.Second)) {
		t.Errorf("after the step sample 14400 is at %v", got)
	}
}

func TestSampleClockSample(t *testing.T) {
	c := NewSampleClock(48000)
	t0 := time.Date(2026, 5, 4, 7, 0, 0, 250e6, time.UTC)
	c.Observe(0, t0)
	// The next whole second is 0.75 s after sample 0: sample 36 000.
	if n := c.Sample(t0.Truncate(time.Second).Add(time.Second)); n != 36000 {
		t.Errorf("Sample = %d, want 36000", n)
	}
	if got := c.Time(36000); !got.Equal(t0.Add(750 * time.Millisecond)) {
		t.Errorf("Time(36000) = %v", got)
	}
}
