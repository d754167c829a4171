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

// processor is the processing goroutine's state: the meter, the sample clock and the
// interval being measured.
type processor struct {
	n *Node
	o *Options

	meter     *dsp.Meter
	clock     *SampleClock
	fs        float64
	device    string
	res       dsp.Result
	minutes   *minuteBuilder
	firstBand int

	anchored    bool
	pos         int64     // samples fed to the meter since the source was opened
	secStart    time.Time // start of the interval being measured
	nextSecond  time.Time // the UTC second boundary that ends it
	secFlags    record.Flags
	secDropped  uint64
	settleUntil time.Time
	synced      bool
	syncChecked time.Time

	health healthState

	correction []dsp.Section // fitted from Options.Correction for the current rate
	cal        *dsp.CalibratorDetector
	calSkew    int64 // samples skipped since the calibrator detector started
	calPending *calRequest
	calErr     error
	// calRun is the detector's tonal run that matched a configured calibrator (-1: none);
	// [calFrom, calUntil) is the time its seconds are marked calibrating, margins included.
	calRun            int64
	calFrom, calUntil time.Time

	spectra spectrumHistory // band levels of the recent seconds, for event spectra
	events  *dsp.EventDetector
	event   dsp.Event
	evSkew  int64 // samples skipped since the detector started: its positions lag pos by this

	store storeState  // what the node knows of a store that cannot write
	rate  deviceState // what the node knows of a device at the wrong rate

	lastEnd  time.Time // wall time of the end of the last sample measured
	lostAt   time.Time // when the source was lost (zero while it runs)
	lostWhy  string
	lastSess *record.Session
}

// loop handles events until the capture goroutine ends or a store error stops the node.
func (p *processor) loop(ctx context.Context, blocks <-chan handoff, free chan<- []float32) error {
	o := p.o
	watchdog := time.NewTimer(o.Watchdog)
	defer watchdog.Stop()
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
			p.skipLost(ev.skipped)
			return p.lost(ev.err.Error())
		case evOpenFailed:
			if p.lostWhy == "" {
				p.lostWhy = "audio source not available: " + ev.err.Error()
			}
		case evEOF:
			open = false
			p.skipLost(ev.skipped)
			p.finish()
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
			if err := p.selfTest(st[0], st[1]); err != nil {
				return err
			}
		case r := <-p.n.calRequests:
			if p.calPending != nil {
				r.reply <- calReply{err: errors.New("another calibration request is waiting for a tone: try again later")}
			} else {
				p.calPending = &r
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
						o.Source.Close()
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
	// The event detector reads the meter's filtered signals (MeterConfig.Tap) rather than
	// filtering every sample again; its spectrum comes from the seconds' band levels.
	var tap func(z, c, a []float64)
	p.events = nil
	if o.Events != nil {
		cfg := *o.Events
		cfg.SensitivityDBFS = o.SensitivityDBFS
		cfg.Bands = 0
		d, err := dsp.NewEventDetector(cfg, fs)
		if err != nil {
			return fmt.Errorf("node: %w", err)
		}
		p.events, p.evSkew = d, 0
		tap = d.ProcessWeighted
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
	if o.Calibration != nil {
		d, err := dsp.NewCalibratorDetector(dsp.CalibratorConfig{SampleRate: fs})
		if err != nil {
			return fmt.Errorf("node: %w", err)
		}
		p.cal, p.calSkew = d, 0
	}

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
	o := p.o
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
			p.skip(ev.skipped)
		}
		before := p.clock.Time(p.pos)
		if step := p.clock.Observe(p.pos+n, ev.arrival); step != 0 {
			if p.clockStepped(ev.arrival) {
				return nil // a device fault: this block is not measured
			}
			p.closeSecond()
			after := p.clock.Time(p.pos)
			if err := p.gap(before, after, fmt.Sprintf("system clock stepped by %v", step.Round(time.Millisecond))); err != nil {
				return err
			}
			if err := p.flushMinutes(); err != nil {
				return err
			}
			p.secStart = after
			p.nextSecond = after.Truncate(time.Second).Add(time.Second)
		}
	}
	if now := o.Now(); now.Sub(p.syncChecked) >= time.Minute {
		p.synced, p.syncChecked = o.ClockSynced(), now
	}
	inTone := false
	if p.cal != nil {
		p.cal.Process(x, p.onTone)
		if p.calErr != nil {
			return p.calErr
		}
		var err error
		if inTone, err = p.calibratorOn(); err != nil {
			return err
		}
	}
	if p.events != nil {
		p.events.SetSuppressed(inTone) // no event while a calibrator is on
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
	if p.events != nil {
		return p.storeEvents() // the meter's tap fed the detector
	}
	return nil
}

// storeEvents stores the events the detector has closed.
func (p *processor) storeEvents() error {
	for p.events.Next(&p.event) {
		e := &p.event
		from := p.clock.Time(e.Start + p.evSkew)
		rec := &record.Event{
			Start: from.UTC(), End: from.Add(time.Duration(e.Duration * 1e9)).UTC(),
			LAFmax: e.LAFmax, LAeq: e.LAeq, LAE: e.LAE, LCpeak: e.LCpeak,
		}
		if !p.synced {
			rec.Flags |= record.ClockUnsynced
		}
		if p.o.Events.Bands != 0 {
			if sp := p.spectra.over(rec.Start, rec.End); sp != nil {
				rec.Spectrum, rec.FirstBand = sp, p.firstBand
			}
		}
		if err := p.append(rec); err != nil {
			return err
		}
	}
	return nil
}

// flushEvents closes an event in progress when the stream ends.
func (p *processor) flushEvents() error {
	if p.events == nil {
		return nil
	}
	p.events.Flush()
	return p.storeEvents()
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
		if start.Before(p.calUntil) && p.calFrom.Before(start.Add(time.Duration(r.Duration*1e9))) {
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
		hf := p.health.second(r, f, p.secDropped)
		f |= hf & (record.DigitalSilence | record.StuckInput | record.DCOffset)
		rec := &record.Second{
			Start: start.UTC(), Duration: time.Duration(math.Round(r.Duration * 1e9)),
			LAeq: r.LAeq, LCeq: r.LCeq, LZeq: r.LZeq, LAFmax: r.LAFmax, LAFmin: r.LAFmin,
			LASmax: r.LASmax, LASmin: r.LASmin, LAImax: r.LAImax, LCpeak: r.LCpeak, LZpeak: r.LZpeak,
			LAE: r.LAE, Flags: f, DroppedSamples: p.secDropped,
		}
		if o.Events != nil && o.Events.Bands != 0 && len(r.Bands) > 0 {
			p.spectra.add(start, r.Duration, r.Bands)
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
		if err == nil {
			err = p.healthAfter(hf, start.Add(rec.Duration))
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

// flushMinutes puts every waiting second into its minute and stores the minute: the stream
// ended or the clock stepped.
func (p *processor) flushMinutes() error { return p.minutes.flush(p.storeMinute) }

// finish stores what is left when the node stops: the partial second and minute.
func (p *processor) finish() {
	if p.meter != nil && p.anchored {
		p.closeSecond()
		p.flushMinutes()
		p.flushEvents()
		p.anchored = false
	}
	if p.store.failing {
		// A last try, so that what the store refused is explained before the node stops.
		if err := p.o.Store.Flush(); err == nil {
			p.storeRecovered()
		} else {
			p.n.log.Error("the store still cannot write as the node stops: records held in memory are lost", "err", err, "refused", p.store.lost)
		}
	}
}
