package node

import (
	"fmt"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// eventChain detects noise events and stores an event record for each (Options.Events). The
// detector reads the meter's filtered signals (MeterConfig.Tap) rather than filtering every
// sample again; an event's spectrum comes from the band levels of the seconds it overlaps
// (spectrumHistory). No event is raised while a calibrator is on the microphone.
type eventChain struct {
	p       *processor
	det     *dsp.EventDetector
	event   dsp.Event
	skew    int64 // samples skipped since the detector started: its positions lag the processor's by this
	spectra spectrumHistory
}

// open makes a detector for a (re)opened stream.
func (e *eventChain) open(fs float64) error {
	e.det = nil
	cfg := *e.p.o.Events
	cfg.SensitivityDBFS = e.p.o.SensitivityDBFS
	cfg.Bands = 0
	d, err := dsp.NewEventDetector(cfg, fs)
	if err != nil {
		return fmt.Errorf("node: %w", err)
	}
	e.det, e.skew = d, 0
	return nil
}

// tap is the meter's tap that feeds the detector.
func (e *eventChain) tap() func(z, c, a []float64) { return e.det.ProcessWeighted }

func (e *eventChain) skip(k int64) { e.skew += k }

// block suppresses events while the calibrator watch hears a calibrator.
func (e *eventChain) block([]float32) error {
	e.det.SetSuppressed(e.p.cal != nil && e.p.cal.inTone)
	return nil
}

// measured stores the events the detector closed while the meter's tap fed it the block.
func (e *eventChain) measured() error { return e.store() }

// second keeps the second's band levels for the spectra of the events it overlaps.
func (e *eventChain) second(rec *record.Second, r *dsp.Result) error {
	if e.p.o.Events.Bands != 0 && len(r.Bands) > 0 {
		e.spectra.add(rec.Start, r.Duration, r.Bands)
	}
	return nil
}

// flush closes an event in progress when the stream ends.
func (e *eventChain) flush() error {
	if e.det == nil {
		return nil
	}
	e.det.Flush()
	return e.store()
}

// store stores the events the detector has closed.
func (e *eventChain) store() error {
	p := e.p
	for e.det.Next(&e.event) {
		ev := &e.event
		from := p.clock.Time(ev.Start + e.skew)
		rec := &record.Event{
			Start: from.UTC(), End: from.Add(time.Duration(ev.Duration * 1e9)).UTC(),
			LAFmax: ev.LAFmax, LAeq: ev.LAeq, LAE: ev.LAE, LCpeak: ev.LCpeak,
		}
		if !p.synced {
			rec.Flags |= record.ClockUnsynced
		}
		if p.o.Events.Bands != 0 {
			if sp := e.spectra.over(rec.Start, rec.End); sp != nil {
				rec.Spectrum, rec.FirstBand = sp, p.firstBand
			}
		}
		if err := p.append(rec); err != nil {
			return err
		}
	}
	return nil
}
