package node

import (
	"math"
	"time"
)

// SampleClock maps sample counts to wall-clock time. The audio converter's clock, not the
// system's, decides when samples are taken; a cheap microphone's crystal is off by up to 0.1 %,
// which adds 3.6 s an hour if the nominal rate were trusted. The clock therefore anchors the
// sample count to the system clock and tracks the converter's true rate against it with a
// second-order loop: each observation (a block of samples arriving) compares the arrival time
// with the time the model predicts; a small share of the error corrects the phase at once, a
// smaller share the period. Arrival jitter (scheduling, USB frames) is averaged out; the
// timestamps carry the capture latency of one block, a constant bias of a few milliseconds.
//
// An error larger than StepThreshold is not drift but a step of the system clock (NTP jump,
// leap second, manual change): the clock re-anchors at once and reports the step, which the node
// records as a gap.
//
// A SampleClock is not safe for concurrent use.
type SampleClock struct {
	nominal float64 // Hz

	started      bool
	anchorSample int64
	anchorTime   time.Time
	period       float64 // estimated seconds per sample

	// StepThreshold is the error beyond which an observation counts as a clock step.
	// Default 0.5 s.
	StepThreshold time.Duration
}

// Loop gains per observation: the phase takes 2 % of the error, the period a share that
// settles a 0.1 % rate error within a few minutes of 100 ms blocks without overshoot.
const (
	clockPhaseGain  = 0.02
	clockPeriodGain = 0.0002
)

// NewSampleClock returns a clock for a stream of nominal rate fs (Hz).
func NewSampleClock(fs float64) *SampleClock {
	return &SampleClock{nominal: fs, period: 1 / fs, StepThreshold: 500 * time.Millisecond}
}

// Rate returns the estimated true sample rate in Hz (samples per second of the system clock).
func (c *SampleClock) Rate() float64 { return 1 / c.period }

// Time returns the wall-clock time of sample n.
func (c *SampleClock) Time(n int64) time.Time {
	return c.anchorTime.Add(time.Duration(math.Round(float64(n-c.anchorSample) * c.period * 1e9)))
}

// Sample returns the index of the first sample taken at or after t.
func (c *SampleClock) Sample(t time.Time) int64 {
	return c.anchorSample + int64(math.Ceil(t.Sub(c.anchorTime).Seconds()/c.period-1e-9))
}

// Observe tells the clock that samples up to (not including) n had arrived at wall time t. It
// returns the size of a clock step when the error exceeded StepThreshold, else 0. The first
// observation anchors the clock.
func (c *SampleClock) Observe(n int64, t time.Time) (step time.Duration) {
	if !c.started {
		c.started = true
		c.anchorSample, c.anchorTime = n, t
		return 0
	}
	predicted := c.Time(n)
	e := t.Sub(predicted)
	if e > c.StepThreshold || e < -c.StepThreshold {
		c.anchorSample, c.anchorTime = n, t
		return e
	}
	es := e.Seconds()
	span := float64(n - c.anchorSample)
	if span > 0 {
		c.period += clockPeriodGain * es / span
		// Never trust an estimate more than 1 % from nominal: no real converter is that far off.
		c.period = min(max(c.period, 0.99/c.nominal), 1.01/c.nominal)
	}
	c.anchorSample = n
	c.anchorTime = predicted.Add(time.Duration(clockPhaseGain * float64(e)))
	return 0
}
