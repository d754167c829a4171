package node

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// processor is the processing goroutine's state: the meter, the sample clock, the interval
// being measured and its flags. The measurements beside the meter (events, the calibrator
// watch, the health checks) are side-chains with their own state (sideChain); the processor
// drives them.
type processor struct {
	n *Node
	o *Options

	meter      *dsp.Meter
	clock      *SampleClock
	fs         float64
	device     string
	res        dsp.Result
	minutes    *minuteBuilder
	firstBand  int
	correction []dsp.Section // fitted from Options.Correction for the current rate

	anchored    bool
	pos         int64     // samples fed to the meter since the source was opened
	secStart    time.Time // start of the interval being measured
	nextSecond  time.Time // the UTC second boundary that ends it
	secFlags    record.Flags
	secDropped  uint64
	settleUntil time.Time
	synced      bool // the system clock was synchronised at the latest reading (sysWatch)

	// The side-chains, in the order they see each block: the calibrator watch first (events
	// are suppressed while it hears a calibrator). events and cal are nil when not configured.
	health *healthChain
	events *eventChain
	cal    *calChain
	chains []sideChain

	rec  *recorder   // appends to the store, and follows a store that cannot write
	rate deviceState // what the node knows of a device at the wrong rate

	lastEnd  time.Time // wall time of the end of the last sample measured
	lostAt   time.Time // when the source was lost (zero while it runs)
	lostWhy  string
	lastSess *record.Session
}

// newProcessor sets up the processing state and its side-chains. states writes the
// sensitivity state file (nil when calibration is off); sys reads the machine for the health
// snapshots.
func newProcessor(n *Node, states *stateWriter, sys *sysWatch) *processor {
	o := &n.o
	p := &processor{n: n, o: o, minutes: newMinuteBuilder()}
	p.health = &healthChain{p: p, o: o.Health, sys: sys}
	p.rec = &recorder{n: n, o: o, health: p.health}
	if o.Calibration != nil {
		p.cal = newCalChain(p, states)
		p.chains = append(p.chains, p.cal)
	}
	if o.Events != nil {
		p.events = &eventChain{p: p}
		p.chains = append(p.chains, p.events)
	}
	p.chains = append(p.chains, p.health)
	return p
}

// loop handles events until the capture goroutine ends or a store error stops the node.
func (p *processor) loop(ctx context.Context, blocks <-chan handoff, free chan<- []float32) error {
	o := p.o
	watchdog := time.NewTimer(o.Watchdog)
	defer watchdog.Stop()
	// Calibration requests and the state writer's outcomes, when calibration is on (a nil
	// channel is never ready).
	var calRequests <-chan calRequest
	var saved <-chan error
	if p.cal != nil {
		calRequests, saved = p.n.calRequests, p.cal.states.done
	}
	open := false
	handle := func(ev handoff) error {
		switch ev.kind {
		case evOpened:
			open = true
			return p.opened(ev)
		case evData:
			err := p.data(ev)
			select {
			case free <- ev.samples[:cap(ev.samples)]:
			default:
			}
			return err
		case evLost:
			open = false
			if err := p.skipLost(ev.skipped); err != nil {
				return err
			}
			return p.lost(ev.err.Error())
		case evOpenFailed:
			if p.lostWhy == "" {
				p.lostWhy = "audio source not available: " + ev.err.Error()
			}
		case evEOF:
			open = false
			if err := p.skipLost(ev.skipped); err != nil {
				return err
			}
			return p.finish()
		}
		return nil
	}
	for {
		select {
		case <-ctx.Done():
			// Measure what capture already queued, without waiting for more.
			for {
				select {
				case ev, ok := <-blocks:
					if !ok {
						return nil
					}
					if err := handle(ev); err != nil {
						return err
					}
				default:
					return nil
				}
			}
		case ev, ok := <-blocks:
			if !ok {
				return nil
			}
			if err := handle(ev); err != nil {
				return err
			}
			if !watchdog.Stop() {
				select {
				case <-watchdog.C:
				default:
				}
			}
			watchdog.Reset(o.Watchdog)
		case st := <-p.n.selfTests:
			if err := p.health.selfTest(st[0], st[1]); err != nil {
				return err
			}
		case r := <-calRequests:
			p.cal.request(r)
		case err := <-saved:
			if err := p.cal.saved(err); err != nil {
				return err
			}
		case st := <-p.n.settings:
			if err := p.reconfigure(st); err != nil {
				return err
			}
		case <-watchdog.C:
			watchdog.Reset(o.Watchdog)
			if open && ctx.Err() == nil && !o.SampleTimed {
				p.n.log.Warn("no samples from the audio source: closing it to recover", "source", o.Source.Describe(), "waited", o.Watchdog)
				p.lostWhy = fmt.Sprintf("no samples for %v (watchdog)", o.Watchdog)
				// Closing makes the blocked Read fail; the capture goroutine then re-opens. A
				// Close that comes late must not close the stream opened after it.
				gen := p.n.openGen.Load()
				go func() {
					if p.n.openGen.Load() == gen {
						p.n.closeSource()
					}
				}()
			}
		}
	}
}

// opened starts measuring a (re)opened source: a new meter and clock, a gap for the time the
// source was away, a session record when the settings changed.
func (p *processor) opened(ev handoff) error {
	o := p.o
	now := ev.arrival
	// An outage in progress ends with the first sample measured (data), not here: a device that
	// opens and fails again before any audio continues the same outage.
	fs := float64(ev.format.SampleRate)
	p.rate.format = ev.format
	p.n.sampleRate.Store(int64(ev.format.SampleRate))
	if len(o.Correction) > 0 && (p.correction == nil || fs != p.fs) {
		// Fitted once per rate; the fit takes about a second.
		secs, err := dsp.CorrectionSections(o.Correction, fs)
		if err != nil {
			return fmt.Errorf("node: microphone correction: %w", err)
		}
		p.correction = secs
	}
	for _, c := range p.chains {
		if err := c.open(fs); err != nil {
			return err
		}
	}
	// The event detector reads the meter's filtered signals (MeterConfig.Tap) rather than
	// filtering every sample again.
	var tap func(z, c, a []float64)
	if p.events != nil {
		tap = p.events.tap()
	}
	// A fresh meter at every open, so the old filter state does not smear into the new stream.
	m, err := dsp.NewMeter(dsp.MeterConfig{SampleRate: fs, SensitivityDBFS: o.SensitivityDBFS, Bands: o.Bands, Correction: p.correction, Tap: tap})
	if err != nil {
		return fmt.Errorf("node: %w", err)
	}
	p.meter, p.fs = m, fs
	if b := m.Bands(); len(b) > 0 {
		p.firstBand = b[0].X
	}
	p.clock = NewSampleClock(fs)
	p.anchored = false
	p.pos = 0

	p.settleUntil = now.Add(o.Settling)
	p.device = o.Source.Describe()
	sess := o.Session
	sess.At = now.UTC()
	for _, k := range record.Kinds() {
		sess.FirstSeq[k] = o.Store.FirstSeq(k)
	}
	sess.SensitivityDBFS = o.SensitivityDBFS
	sess.SampleRate = ev.format.SampleRate
	sess.Device = p.device
	if p.lastSess == nil || !sameSession(p.lastSess, &sess) {
		p.lastSess = &sess
		cp := sess
		return p.append(&cp)
	}
	return nil
}

func sameSession(a, b *record.Session) bool {
	return a.SoftwareVersion == b.SoftwareVersion && a.ConfigHash == b.ConfigHash &&
		a.SensitivityDBFS == b.SensitivityDBFS && a.SampleRate == b.SampleRate &&
		a.Device == b.Device && a.TimeZone == b.TimeZone && a.NodeID == b.NodeID && a.Site == b.Site &&
		a.Latitude == b.Latitude && a.Longitude == b.Longitude
}

// reconfigure applies settings that change while the node runs.
func (p *processor) reconfigure(st Settings) error {
	o := p.o
	sensChanged := st.SensitivityDBFS != o.SensitivityDBFS
	if sensChanged && p.meter != nil && p.anchored {
		// The samples measured so far belong to the old sensitivity.
		if err := p.closeSecondAt(); err != nil {
			return err
		}
	}
	o.SensitivityDBFS, o.OverloadLevel, o.UnderRangeLevel = st.SensitivityDBFS, st.OverloadLevel, st.UnderRangeLevel
	if !sensChanged {
		return nil
	}
	if p.meter != nil {
		p.meter.SetSensitivity(st.SensitivityDBFS)
	}
	p.n.sensitivity.Store(math.Float64bits(st.SensitivityDBFS))
	p.n.log.Info("microphone sensitivity changed", "sensitivity_dbfs", st.SensitivityDBFS)
	if p.lastSess == nil {
		return nil
	}
	sess := *p.lastSess
	sess.At = o.Now().UTC()
	sess.SensitivityDBFS = st.SensitivityDBFS
	p.lastSess = &sess
	cp := sess
	return p.append(&cp)
}

// closeSecondAt ends the interval in progress at the current sample, short of its boundary;
// the next interval runs from here to the boundary.
func (p *processor) closeSecondAt() error {
	next := p.nextSecond
	now := p.clock.Time(p.pos)
	p.nextSecond = now
	err := p.closeSecond()
	p.secStart, p.nextSecond = now, next
	return err
}

// data measures one block.
func (p *processor) data(ev handoff) error {
	x := ev.samples
	n := int64(len(x))
	if p.rate.faulty {
		return p.faultyBlock(ev)
	}
	if !p.anchored {
		p.clock.Observe(n, ev.arrival)
		p.anchored = true
		p.secStart = p.clock.Time(0)
		p.nextSecond = p.secStart.Truncate(time.Second).Add(time.Second)
		p.secFlags, p.secDropped = 0, 0
		if err := p.endOutage(p.secStart); err != nil {
			return err
		}
	} else {
		if ev.skipped > 0 {
			if err := p.skip(ev.skipped); err != nil {
				return err
			}
		}
		before := p.clock.Time(p.pos)
		if step := p.clock.Observe(p.pos+n, ev.arrival); step != 0 {
			if faulty, err := p.clockStepped(ev.arrival); faulty || err != nil {
				return err // a device fault: this block is not measured
			}
			if err := p.closeSecond(); err != nil {
				return err
			}
			after := p.clock.Time(p.pos)
			if err := p.rec.gap(before, after, fmt.Sprintf("system clock stepped by %v", step.Round(time.Millisecond))); err != nil {
				return err
			}
			if err := p.flushMinutes(); err != nil {
				return err
			}
			p.secStart = after
			p.nextSecond = after.Truncate(time.Second).Add(time.Second)
		}
	}
	p.synced = p.health.sys.latest().synced
	for _, c := range p.chains {
		if err := c.block(x); err != nil {
			return err
		}
	}
	for len(x) > 0 {
		end := max(p.clock.Sample(p.nextSecond), p.pos)
		take := min(int64(len(x)), end-p.pos)
		if take > 0 {
			p.meter.Process(x[:take])
			p.pos += take
			x = x[take:]
		}
		if p.pos == end {
			if err := p.closeSecond(); err != nil {
				return err
			}
		}
	}
	p.lastEnd = p.clock.Time(p.pos)
	p.n.Counters.FastLevel.Store(math.Float64bits(p.meter.FastLevel()))
	for _, c := range p.chains {
		if err := c.measured(); err != nil {
			return err
		}
	}
	return nil
}

// flushChains closes what the side-chains have open: the stream ended or broke.
func (p *processor) flushChains() error {
	var errs []error
	for _, c := range p.chains {
		errs = append(errs, c.flush())
	}
	return errors.Join(errs...)
}

// closeSecond ends the interval being measured, stores its record and moves to the next.
func (p *processor) closeSecond() error {
	o := p.o
	p.meter.Take(&p.res)
	r := &p.res
	start := p.secStart
	p.secStart = p.nextSecond
	p.nextSecond = p.nextSecond.Add(time.Second)
	var err error
	if r.Samples > 0 {
		f := p.secFlags
		if start.Before(p.settleUntil) {
			f |= record.Settling
		}
		if !p.synced {
			f |= record.ClockUnsynced
		}
		if p.cal != nil && p.cal.covers(start, time.Duration(r.Duration*1e9)) {
			f |= record.Calibrating
		}
		if r.Clipped > 0 {
			f |= record.Clipped | record.Overload
		}
		if o.OverloadLevel > 0 && r.LZpeak >= o.OverloadLevel {
			f |= record.Overload
		}
		if o.UnderRangeLevel > 0 && r.LAeq < o.UnderRangeLevel {
			f |= record.UnderRange
		}
		hf := p.health.judge(r, f, p.secDropped)
		f |= hf & (record.DigitalSilence | record.StuckInput | record.DCOffset)
		rec := &record.Second{
			Start: start.UTC(), Duration: time.Duration(math.Round(r.Duration * 1e9)),
			LAeq: r.LAeq, LCeq: r.LCeq, LZeq: r.LZeq, LAFmax: r.LAFmax, LAFmin: r.LAFmin,
			LASmax: r.LASmax, LASmin: r.LASmin, LAImax: r.LAImax, LCpeak: r.LCpeak, LZpeak: r.LZpeak,
			LAE: r.LAE, Flags: f, DroppedSamples: p.secDropped,
		}
		if o.SecondSpectra && len(r.Bands) > 0 {
			rec.Spectrum = append([]float64(nil), r.Bands...)
			rec.FirstBand = p.firstBand
		}
		err = p.append(rec)
		p.n.Counters.Seconds.Add(1)
		if err == nil {
			err = p.minutes.push(start, rec.Duration, f, r, p.storeMinute)
		}
		if o.OnSecond != nil {
			o.OnSecond(rec)
		}
		for _, c := range p.chains {
			if err != nil {
				break
			}
			err = c.second(rec, r)
		}
	}
	p.secFlags, p.secDropped = 0, 0
	return err
}

// storeMinute stores a minute record the minute builder completed.
func (p *processor) storeMinute(rec *record.Minute) error {
	if len(rec.Spectrum) > 0 {
		rec.FirstBand = p.firstBand
	}
	p.n.Counters.Minutes.Add(1)
	if err := p.append(rec); err != nil {
		return err
	}
	if p.o.OnMinute != nil {
		p.o.OnMinute(rec)
	}
	return nil
}

// append stores r (recorder.append).
func (p *processor) append(r record.Record) error { return p.rec.append(r) }

// flushMinutes puts every waiting second into its minute and stores the minute: the stream
// ended or the clock stepped.
func (p *processor) flushMinutes() error { return p.minutes.flush(p.storeMinute) }

// finish stores what is left when the node stops or the stream ends: the partial second and
// minute, the event in progress, and the check whose state file is being written. Every part is
// tried; the errors are joined.
func (p *processor) finish() error {
	var errs []error
	if p.meter != nil && p.anchored {
		errs = append(errs, p.closeSecond(), p.flushMinutes(), p.flushChains())
		p.anchored = false
	}
	if p.cal != nil && p.cal.saving != nil {
		// The processing is over: waiting for the file system no longer holds up the audio.
		errs = append(errs, p.cal.saved(<-p.cal.states.done))
	}
	errs = append(errs, p.rec.finish())
	return errors.Join(errs...)
}
