package node

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"sync/atomic"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/internal/when"
)

// Options set up a node. Source and Store are required; every other field has a default.
type Options struct {
	// Source is the audio source. The node opens it, re-opens it after device loss with
	// backoff, and closes it at the end.
	Source capture.Source
	// Store receives the records. The node appends and flushes; the caller opens and closes.
	Store *buffer.Store

	// SensitivityDBFS is the microphone sensitivity in dBFS for 94 dB SPL at 1 kHz.
	SensitivityDBFS float64
	// Bands selects the band filter bank (dsp.Third for one-third-octave spectra, 0 for none).
	Bands dsp.BandSet
	// SecondSpectra stores the one-third-octave spectrum in every second record. Minute records
	// always carry the minute's spectrum when Bands is set.
	//
	// Trade-off: per-second spectra roughly triple the store's size and write volume.
	SecondSpectra bool

	// Settling is how long after each start the seconds are flagged settling (filters and
	// the microphone's own start-up). Default 5 s.
	Settling time.Duration
	// OverloadLevel flags overload when LZpeak reaches it (the microphone's acoustic overload
	// point, dB SPL); 0 disables the check. Clipped samples always flag overload.
	OverloadLevel float64
	// UnderRangeLevel flags under-range when LAeq falls below it (the microphone's self-noise
	// plus a margin, dB(A)); 0 disables the check.
	UnderRangeLevel float64

	// Lossless makes the capture goroutine wait for a free buffer instead of dropping samples
	// when processing falls behind.
	//
	// Danger: with a live device, waiting makes the device overflow instead; use it only for
	// sources that can wait (files, standard input, the synthetic scene run fast).
	Lossless bool
	// SampleTimed takes time stamps from the sample count, starting at the time of the first
	// open, instead of from the system clock: for sources replayed faster than real time,
	// whose arrival times mean nothing. Clock steps and the watchdog then play no part.
	SampleTimed bool
	// Synthetic says the source is the synthetic scene: every record carries the synthetic
	// flag, so that none is taken for a measurement.
	Synthetic bool
	// SampleOrigin, with SampleTimed, is the time of the first sample. Zero means now, or the
	// end of the store's last second record when that is later, so that an accelerated run
	// continues after the records of an earlier one and never stamps two records for one
	// second. Danger: a time before the store's last record makes the runs overlap.
	SampleOrigin time.Time
	// BlockDuration is the length of each audio block read from the source. Default 100 ms.
	BlockDuration time.Duration
	// QueueBlocks is the number of blocks the queue between capture and processing holds.
	// Default 50 (5 s of audio at the default block length).
	QueueBlocks int
	// Watchdog is how long the node waits for samples from an open source before it treats
	// the device as failed. Default 10 block durations, at least 2 s.
	Watchdog time.Duration
	// RetryMax caps the exponential backoff between attempts to re-open a lost device.
	// Default 30 s.
	RetryMax time.Duration

	// Health sets up the health checks and snapshots.
	Health HealthOptions

	// Events, when set, detects noise events and stores an event record for each (start, end,
	// LAFmax, LAeq, LAE, LCpeak, spectrum). Its SensitivityDBFS is taken from the node's.
	// Trade-off: the detector runs its own weighting and, with a spectrum, its own band filter
	// bank beside the meter's, roughly doubling the per-sample cost.
	Events *dsp.EventConfig

	// Calibration, when set, detects sound calibrators on the microphone (see
	// CalibrationOptions) and takes calibration requests.
	Calibration *CalibrationOptions

	// Correction, when set, is a measured microphone and windscreen response, fitted as a
	// filter on the meter's input when the source opens (dsp.CorrectionSections; the fit takes
	// about a second). The event detector's own chain runs without it.
	Correction []dsp.CorrectionPoint

	// Session holds what the node writes in its session records besides the sample rate and
	// device, which it fills in: software version, config hash, time zone.
	Session record.Session

	// Now is the system clock (default time.Now); tests inject their own.
	Now func() time.Time
	// ClockSynced reports whether the system clock is synchronised (default: the kernel's
	// view through adjtimex). Checked once a minute.
	ClockSynced func() bool

	// OnSecond and OnMinute, when set, receive each record after it is appended (the live
	// display of `leqnode demo`, the status page). They run on the processing goroutine and
	// must return quickly.
	OnSecond func(*record.Second)
	OnMinute func(*record.Minute)
	// Notify, when set, is called after records were appended (the publisher's wake-up).
	Notify func()

	Logger *slog.Logger
}

func (o *Options) withDefaults() Options {
	r := *o
	if r.Settling == 0 {
		r.Settling = 5 * time.Second
	}
	if r.BlockDuration <= 0 {
		r.BlockDuration = 100 * time.Millisecond
	}
	if r.QueueBlocks <= 0 {
		r.QueueBlocks = 50
	}
	if r.Watchdog <= 0 {
		r.Watchdog = max(2*time.Second, 10*r.BlockDuration)
	}
	if r.RetryMax <= 0 {
		r.RetryMax = 30 * time.Second
	}
	if r.Now == nil {
		r.Now = time.Now
	}
	if r.ClockSynced == nil {
		r.ClockSynced = KernelClockSynced
	}
	if r.Logger == nil {
		r.Logger = slog.Default()
	}
	r.Health = r.Health.withDefaults()
	return r
}

// Counters are the node's running totals, readable while it runs.
type Counters struct {
	Seconds        atomic.Int64 // second records written
	Minutes        atomic.Int64 // minute records written
	Gaps           atomic.Int64 // gap records written
	DroppedSamples atomic.Int64 // samples lost (device overflows and queue overflows)
	QueueOverflows atomic.Int64 // blocks lost because the queue was full
	Reopens        atomic.Int64 // times the source was re-opened after a failure
	// FastLevel is the latest LAF in dB, as math.Float64bits (NaN before the first block).
	FastLevel atomic.Uint64
}

// Level returns the latest A-weighted Fast level in dB (NaN before the first block).
func (c *Counters) Level() float64 { return math.Float64frombits(c.FastLevel.Load()) }

// Node is a running measurement node.
type Node struct {
	o           Options
	log         *slog.Logger
	Counters    Counters
	lastHealth  atomic.Pointer[record.Health]
	sampleRate  atomic.Int64
	openGen     atomic.Int64  // counts successful opens of the source (the watchdog's guard)
	sensitivity atomic.Uint64 // math.Float64bits of the sensitivity in use
	started     time.Time
	settings    chan Settings
	calRequests chan calRequest
	selfTests   chan [2]int // checks run, checks failed
}

// ReportSelfTest records the outcome of a self-verification of the digital chain (leqnode
// verify): the processing goroutine stores a health snapshot with it at once, raising the
// chain-fault flag when a check failed (and clearing it when all pass). It does not wait.
func (n *Node) ReportSelfTest(checks, failed int) {
	select {
	case n.selfTests <- [2]int{checks, failed}:
	default: // one is already waiting: the node is busy; the next run reports again
	}
}

// Settings are the options that can change while the node runs, without a restart.
type Settings struct {
	SensitivityDBFS float64
	OverloadLevel   float64
	UnderRangeLevel float64
}

// Reconfigure applies new settings at the processing goroutine's next step: the second in
// progress is closed, and a new session record is written when the sensitivity changed. It
// returns false when the node is not running to take them.
func (n *Node) Reconfigure(s Settings) bool {
	select {
	case n.settings <- s:
		return true
	case <-time.After(5 * time.Second):
		return false
	}
}

// Health returns the latest health snapshot, or nil before the first.
func (n *Node) Health() *record.Health { return n.lastHealth.Load() }

// New checks the options and returns a node ready to Run.
func New(o Options) (*Node, error) {
	if o.Source == nil || o.Store == nil {
		return nil, errors.New("node: a source and a store are required")
	}
	r := o.withDefaults()
	n := &Node{o: r, log: r.Logger, started: r.Now().UTC(), settings: make(chan Settings), calRequests: make(chan calRequest), selfTests: make(chan [2]int, 1)}
	n.Counters.FastLevel.Store(math.Float64bits(math.NaN()))
	n.sensitivity.Store(math.Float64bits(r.SensitivityDBFS))
	return n, nil
}

// handoff is what the capture goroutine hands to the processing goroutine: a block of
// samples, or news of the source (opened, lost, ended, failed to open). ("Event" is kept for
// noise events.)
type handoff struct {
	kind    handoffKind
	samples []float32 // data: the block's samples (a pool buffer, returned after use)
	arrival time.Time // when the block arrived, or when the source opened
	skipped int64     // data, lost, EOF: samples lost just before this handoff
	format  capture.Format
	err     error
}

type handoffKind int

const (
	evData       handoffKind = iota
	evOpened                 // the source was (re)opened
	evLost                   // the source failed; it has been closed
	evEOF                    // a finite source ended
	evOpenFailed             // an attempt to open the source failed (err); capture retries with back-off
)

// Run captures and measures until ctx ends or a finite source ends, then flushes the store.
// It returns nil on a clean end.
func (n *Node) Run(ctx context.Context) error {
	o := &n.o
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	p := &processor{n: n, o: o, health: healthState{o: o.Health}, minutes: newMinuteBuilder(), calRun: -1}
	if err := p.startupGap(); err != nil {
		return err
	}
	blocks := make(chan handoff, o.QueueBlocks+4)
	free := make(chan []float32, o.QueueBlocks)
	done := make(chan struct{})
	go func() {
		defer close(done)
		n.capture(ctx, blocks, free)
	}()
	err := p.loop(ctx, blocks, free)
	cancel()
	// A Read blocked on a device that delivers nothing more ends when the source is closed.
	go o.Source.Close()
	go func() {
		for range blocks { // unblock a capture goroutine waiting to send
		}
	}()
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		n.log.Warn("the audio source did not stop within 5 s; leaving it behind", "source", o.Source.Describe())
	}
	p.finish()
	if ferr := o.Store.Flush(); ferr != nil && err == nil {
		err = fmt.Errorf("node: flushing the store: %w", ferr)
	}
	return err
}

// capture runs the source: open, read blocks into pool buffers, re-open after failures.
func (n *Node) capture(ctx context.Context, blocks chan<- handoff, free chan []float32) {
	defer close(blocks)
	o := &n.o
	send := func(ev handoff) bool {
		select {
		case blocks <- ev:
			return true
		case <-ctx.Done():
			return false
		}
	}
	backoff := min(time.Second, o.RetryMax)
	// stamp returns the arrival time of what was just read: the system clock, or with
	// SampleTimed the start time plus the samples delivered so far.
	start := o.Now()
	if o.SampleTimed {
		start = n.sampleOrigin()
	}
	var delivered int64
	var fs float64
	stamp := func() time.Time {
		if o.SampleTimed && fs > 0 {
			return start.Add(time.Duration(float64(delivered) / fs * 1e9))
		}
		return o.Now()
	}
	var discard []float32
	opened := false
	var say rateLimited // one warning a minute about a failing source; the rest at debug level
	for ctx.Err() == nil {
		if opened {
			n.Counters.Reopens.Add(1)
		}
		f, err := o.Source.Open(ctx)
		if err != nil {
			say.log(n.log, "cannot open the audio source; retrying", "source", o.Source.Describe(), "err", err, "retry_in", backoff)
			if !send(handoff{kind: evOpenFailed, err: err, arrival: stamp()}) || !when.Sleep(ctx, backoff) {
				return
			}
			backoff = min(2*backoff, o.RetryMax)
			continue
		}
		opened = true
		n.openGen.Add(1)
		fs = float64(f.SampleRate)
		openedAt := delivered // the back-off restarts only once this stream has run a second
		if !send(handoff{kind: evOpened, format: f, arrival: stamp()}) {
			o.Source.Close()
			return
		}
		blockLen := max(1, int(math.Round(float64(f.SampleRate)*o.BlockDuration.Seconds())))
		if len(free) == 0 && cap(free) > 0 && len(discard) == 0 {
			for range cap(free) {
				free <- make([]float32, blockLen)
			}
		}
		if len(discard) < blockLen {
			discard = make([]float32, blockLen)
		}
		lastDropped := o.Source.Dropped()
		var skipped int64
		for {
			var buf []float32
			overflow := false
			select {
			case buf = <-free:
			default:
				if o.Lossless {
					select {
					case buf = <-free:
					case <-ctx.Done():
						o.Source.Close()
						return
					}
				} else {
					buf, overflow = discard, true
				}
			}
			if cap(buf) < blockLen {
				buf = make([]float32, blockLen)
			}
			nr, rerr := o.Source.Read(buf[:blockLen])
			d := o.Source.Dropped()
			delivered += int64(nr) + d - lastDropped
			arrival := stamp()
			skipped += d - lastDropped
			lastDropped = d
			if overflow {
				skipped += int64(nr)
				n.Counters.QueueOverflows.Add(1)
			} else if nr > 0 {
				n.Counters.DroppedSamples.Add(skipped)
				if !send(handoff{kind: evData, samples: buf[:nr], arrival: arrival, skipped: skipped}) {
					o.Source.Close()
					return
				}
				skipped = 0
			} else {
				free <- buf
			}
			if rerr == nil && ctx.Err() != nil {
				o.Source.Close()
				return
			}
			if errors.Is(rerr, io.EOF) {
				o.Source.Close()
				n.Counters.DroppedSamples.Add(skipped)
				send(handoff{kind: evEOF, skipped: skipped})
				return
			}
			if rerr != nil {
				o.Source.Close()
				if ctx.Err() != nil {
					return
				}
				if delivered-openedAt >= int64(fs) {
					backoff = min(time.Second, o.RetryMax) // it ran: a new outage starts the back-off afresh
				}
				say.log(n.log, "audio source failed; will re-open", "source", o.Source.Describe(), "err", rerr, "retry_in", backoff)
				n.Counters.DroppedSamples.Add(skipped)
				if !send(handoff{kind: evLost, err: rerr, skipped: skipped}) || !when.Sleep(ctx, backoff) {
					return
				}
				backoff = min(2*backoff, o.RetryMax)
				break
			}
		}
	}
}

// sampleOrigin returns the time of the first sample of a sample-timed run (Options.SampleOrigin).
func (n *Node) sampleOrigin() time.Time {
	o := &n.o
	if !o.SampleOrigin.IsZero() {
		return o.SampleOrigin
	}
	now := o.Now()
	if last, err := o.Store.Last(record.KindSecond); err == nil && last != nil {
		if end := last.(*record.Second).Start.Add(last.(*record.Second).Duration); end.After(now) {
			n.log.Info("accelerated run: its records continue after the store's last second, which lies ahead of the clock", "from", end.UTC())
			return end
		}
	}
	return now
}

// rateLimited logs a warning at most once a minute; the others go to the debug level.
type rateLimited struct{ last time.Time }

func (r *rateLimited) log(l *slog.Logger, msg string, args ...any) {
	if now := time.Now(); now.Sub(r.last) >= time.Minute {
		r.last = now
		l.Warn(msg, args...)
		return
	}
	l.Debug(msg, args...)
}
