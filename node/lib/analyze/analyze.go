// Package analyze measures a recording offline with exactly the measurement chain the node runs
// live: one dsp.Meter fed with one channel of a WAV stream, closed at fixed intervals.
//
// Intervals are cut by sample count, not by clock: interval k starts at sample
// round(k · D · fs) for an interval length D, so intervals that are not a whole number of
// samples keep their exact average length, and each interval's Duration is its true sample count
// divided by fs. A partial last interval is reported with its true duration.
//
// No level reports the filters' start-up from rest (the rule of dsp.Meter: minima and band levels
// count only once their detector or filter has settled, and are null for an interval that ends
// before that). Besides, an interval's band level is null when the span it covers (the interval,
// or its part after the band filter has settled) is shorter than the band's response time 1/B,
// B its bandwidth (0.34 s for the 12.5 Hz one-third octave, 2.3 ms for
// 1 kHz): a band-pass filter cannot follow level changes faster than that (the time-bandwidth
// product, common practice), so such a level is a snapshot of the band's waveform, not a level.
// The band's energy still counts toward the summary, which covers the whole recording.
package analyze

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/wav"
)

// Options sets up an analysis.
type Options struct {
	// Channel to measure, counted from 1.
	Channel int
	// Interval is the length D of each measurement interval, at least one sample period.
	Interval time.Duration
	// SensitivityDBFS is the microphone sensitivity (dBFS for 94 dB SPL at 1 kHz).
	SensitivityDBFS float64
	// Bands selects the band filter bank (0 for none).
	Bands dsp.BandSet
	// Progress, when set, is called now and then with the frames read so far and the total
	// (-1 when the stream's length is unknown).
	Progress func(done, total int64)
}

// Interval is one closed measurement interval.
type Interval struct {
	Bands  []dsp.Band // the bands of Result.Bands
	Index  int64
	Offset float64 // seconds from the start of the recording: first sample / fs
	Result *dsp.Result
}

// Summary is the result over the whole recording.
type Summary struct {
	Result dsp.Result
	Bands  []dsp.Band
	Frames int64
}

// ErrNoSamples reports a recording without a single sample frame.
var ErrNoSamples = errors.New("no samples")

// Run measures r and calls each for every interval in order (the *dsp.Result is reused: copy
// what you keep). It returns the summary over the whole recording. Errors of the stream (a
// truncated file, a NaN sample) end the run with the error; ctx cancels it.
func Run(ctx context.Context, r *wav.Reader, opts Options, each func(Interval) error) (*Summary, error) {
	f := r.Format()
	if opts.Channel < 1 || opts.Channel > f.Channels {
		return nil, fmt.Errorf("channel %d does not exist: the recording has %d channel(s), count from 1", opts.Channel, f.Channels)
	}
	fs := float64(f.SampleRate)
	d := opts.Interval.Seconds()
	if !(d*fs >= 1) {
		return nil, fmt.Errorf("interval %v is shorter than one sample period at %d Hz", opts.Interval, f.SampleRate)
	}
	m, err := dsp.NewMeter(dsp.MeterConfig{SampleRate: fs, SensitivityDBFS: opts.SensitivityDBFS, Bands: opts.Bands})
	if err != nil {
		return nil, err
	}
	var (
		total  = r.Frames()
		frames = make([]float32, 4096*f.Channels)
		mono   = make([]float32, 4096)
		res    dsp.Result
		acc    dsp.Accumulator
		k      int64
		pos    int64 // frames fed to the meter
		next   = boundary(1, d, fs)
		lastCb time.Time
	)
	bands := m.Bands()
	emit := func() error {
		m.Take(&res)
		acc.Add(&res)
		for i, b := range bands {
			span := res.Duration
			if i < len(res.BandSeconds) {
				span = res.BandSeconds[i] // the settled part of the interval
			}
			if span*(b.Upper-b.Lower) < 1 { // shorter than the band's response time
				res.Bands[i] = math.NaN()
			}
		}
		err := each(Interval{Bands: bands, Index: k, Offset: float64(boundary(k, d, fs)) / fs, Result: &res})
		k++
		next = boundary(k+1, d, fs)
		return err
	}
	for {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		n, rerr := r.Read(frames)
		nf := n / f.Channels
		for i := range nf {
			mono[i] = frames[i*f.Channels+opts.Channel-1]
		}
		blk := mono[:nf]
		for len(blk) > 0 {
			take := int(min(int64(len(blk)), next-pos))
			m.Process(blk[:take])
			pos += int64(take)
			blk = blk[take:]
			if pos == next {
				if err := emit(); err != nil {
					return nil, err
				}
			}
		}
		if opts.Progress != nil && time.Since(lastCb) > 200*time.Millisecond {
			opts.Progress(pos, total)
			lastCb = time.Now()
		}
		if rerr == io.EOF {
			break
		}
		if rerr != nil {
			return nil, rerr
		}
	}
	if pos == 0 {
		return nil, ErrNoSamples
	}
	if pos > boundary(k, d, fs) {
		if err := emit(); err != nil {
			return nil, err
		}
	}
	if opts.Progress != nil {
		opts.Progress(pos, total)
	}
	s := &Summary{Bands: m.Bands(), Frames: pos}
	acc.Result(&s.Result)
	return s, nil
}

// boundary returns the first sample of interval k: round(k · D · fs).
func boundary(k int64, d, fs float64) int64 {
	return int64(math.Round(float64(k) * d * fs))
}
