package node

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/calibrate"
)

// CalibrationOptions set up the detection of sound calibrators while the node runs. Every
// stable calibrator tone the node hears becomes a calibration check record; the seconds the tone
// covers are annotated calibrating, so statistics, events and reports leave them out; a check
// that differs from the previous one by more than 0.5 dB annotates the data between them as
// suspect (calibrate.RecordCheck). A check is applied (the sensitivity adjusted) only when asked
// for through RequestCalibration.
type CalibrationOptions struct {
	// References are the stated levels of the calibrators used on this node (default 94 and
	// 114 dB). A tone is matched to the nearest.
	References []float64
	// Class is the calibrators' IEC 60942 class, for the plausibility of the tone's frequency.
	Class dsp.CalibratorClass
	// NominalDBFS is the microphone's data-sheet sensitivity: adjustments stay within
	// AdjustRange of it.
	NominalDBFS float64
	// AdjustRange is the largest adjustment from the nominal sensitivity, dB (default 3).
	// Danger: a wider range lets a failing microphone be calibrated back into apparent health.
	AdjustRange float64
	// StateDir keeps the applied sensitivity (calibrate.StateFile) across restarts; empty
	// refuses every adjustment.
	StateDir string
}

// CalibrationResult is the outcome of a requested calibration.
type CalibrationResult struct {
	Detection dsp.Detection
	Check     *record.Calibration
	Applied   bool
}

type calRequest struct {
	reference float64
	apply     bool
	reply     chan calReply
}

type calReply struct {
	res *CalibrationResult
	err error
}

// RequestCalibration asks the node to take the next stable calibrator tone of the given level
// (0: any configured reference) and, with apply, to put the sensitivity it implies into use,
// within the adjustment range. It waits until the tone has been measured or ctx ends.
func (n *Node) RequestCalibration(ctx context.Context, reference float64, apply bool) (*CalibrationResult, error) {
	if n.o.Calibration == nil {
		return nil, errors.New("this node does not detect calibrators: enable [calibration] in its configuration")
	}
	r := calRequest{reference: reference, apply: apply, reply: make(chan calReply, 1)}
	select {
	case n.calRequests <- r:
	case <-ctx.Done():
		return nil, ctx.Err()
	}
	select {
	case rep := <-r.reply:
		return rep.res, rep.err
	case <-ctx.Done():
		return nil, fmt.Errorf("no stable calibrator tone heard: %w", ctx.Err())
	}
}

// calChain watches for sound calibrators on the microphone (Options.Calibration): it marks the
// seconds a calibrator covers, stores a calibration check for every stable tone, and answers
// calibration requests. Applying a check (RequestCalibration with apply) changes the
// sensitivity at once, at the sample where the tone was judged, as a Settings change would;
// the state file that keeps it across restarts is written by the node's state writer, off the
// processing goroutine. The check record and the answer to the request wait for that write: a
// write that fails puts the old sensitivity back (a session record says so) and the check is
// stored as not applied.
type calChain struct {
	p   *processor
	o   *CalibrationOptions
	det *dsp.CalibratorDetector
	// skew is the samples skipped since the detector started: its positions lag the
	// processor's by this.
	skew    int64
	pending *calRequest
	err     error // a store error met inside the detector's callback
	inTone  bool  // a calibrator is on the microphone now
	// run is the detector's tonal run that matched a configured calibrator (-1: none);
	// [from, until) is the time its seconds are marked calibrating, margins included.
	run         int64
	from, until time.Time

	states *stateWriter
	saving *calSaving // an applied check whose state file is being written
}

// calSaving is an applied check waiting for its state file.
type calSaving struct {
	det      dsp.Detection
	rec      *record.Calibration
	ref      float64
	state    calibrate.State
	previous float64 // the sensitivity before the check
	req      *calRequest
}

func newCalChain(p *processor, states *stateWriter) *calChain {
	return &calChain{p: p, o: p.o.Calibration, run: -1, states: states}
}

// open makes a detector for a (re)opened stream.
func (c *calChain) open(fs float64) error {
	d, err := dsp.NewCalibratorDetector(dsp.CalibratorConfig{SampleRate: fs})
	if err != nil {
		return fmt.Errorf("node: %w", err)
	}
	c.det, c.skew = d, 0
	return nil
}

func (c *calChain) skip(k int64) { c.skew += k }

// block looks for calibrator tones in a block before the meter measures it.
func (c *calChain) block(x []float32) error {
	c.det.Process(x, c.onTone)
	if c.err != nil {
		return c.err
	}
	var err error
	c.inTone, err = c.on()
	return err
}

func (c *calChain) measured() error                          { return nil }
func (c *calChain) second(*record.Second, *dsp.Result) error { return nil }
func (c *calChain) flush() error                             { return nil }

// covers reports whether a calibrator covered part of the interval [start, start+dur).
func (c *calChain) covers(start time.Time, dur time.Duration) bool {
	return start.Before(c.until) && c.from.Before(start.Add(dur))
}

// request takes a calibration request; one waits at a time.
func (c *calChain) request(r calRequest) {
	if c.pending != nil {
		r.reply <- calReply{err: errors.New("another calibration request is waiting for a tone: try again later")}
		return
	}
	c.pending = &r
}

// onTone handles one stable tone found by the calibrator detector.
func (c *calChain) onTone(d dsp.Detection) {
	p, o := c.p, c.o
	at := func(pos int64) time.Time { return p.clock.Time(pos + c.skew) }
	refs := o.References
	req := c.pending
	if c.saving != nil {
		req = nil // the request is answered when the state file of its check is written
	}
	if req != nil && req.reference > 0 {
		refs = []float64{req.reference}
	}
	inUse := p.o.SensitivityDBFS
	ref, ok := calibrate.MatchReference(d.LevelDBFS, inUse, refs, c.window())
	if !ok {
		p.n.log.Warn("a steady 1 kHz tone was heard, but its level matches no configured calibrator", "level_dbfs", d.LevelDBFS, "references", refs)
		return
	}
	if err := p.append(calibrate.CalibratingAnnotation(at(d.ToneStart).Add(-calMargin), at(d.End).Add(calMargin), ref)); err != nil {
		c.err = err
		return
	}
	rec := calibrate.NewCheck(at(d.End), d, ref, inUse, o.Class)
	var applyErr error
	if req != nil && req.apply {
		if o.StateDir == "" {
			applyErr = errors.New("no state directory to keep the new sensitivity: set [calibration] state_dir")
		} else if st, err := calibrate.Prepare(rec, o.NominalDBFS, o.AdjustRange); err != nil {
			applyErr = err
			if errors.Is(err, calibrate.ErrMicrophoneFault) {
				p.health.raise(record.MicFault)
				p.n.log.Error("calibration refused: microphone fault", "err", err)
			}
		} else {
			// From here on the node measures with the new sensitivity (new session record);
			// the check is stored once the state file keeps it (saved).
			c.saving = &calSaving{det: d, rec: rec, ref: ref, state: st, previous: inUse, req: req}
			c.states.save(o.StateDir, st)
			if err := p.reconfigure(Settings{SensitivityDBFS: st.SensitivityDBFS, OverloadLevel: p.o.OverloadLevel, UnderRangeLevel: p.o.UnderRangeLevel}); err != nil {
				c.err = err
			}
			return
		}
	}
	c.checked(d, rec, ref, req, applyErr)
}

// saved takes the outcome of writing the state file of an applied check: the check is stored
// as applied, or, when the write failed, as not applied and with the old sensitivity back in use.
func (c *calChain) saved(err error) error {
	s, p := c.saving, c.p
	c.saving = nil
	if s == nil {
		return nil
	}
	if err == nil {
		s.rec.SensitivityAfter, s.rec.Applied = s.state.SensitivityDBFS, true
		p.health.clear(record.MicFault)
	} else {
		p.n.log.Error("the new sensitivity could not be kept in the state directory: measuring with the old one again; free space or fix the permissions of [calibration] state_dir",
			"state_dir", c.o.StateDir, "err", err)
		if rerr := p.reconfigure(Settings{SensitivityDBFS: s.previous, OverloadLevel: p.o.OverloadLevel, UnderRangeLevel: p.o.UnderRangeLevel}); rerr != nil {
			return rerr
		}
	}
	c.checked(s.det, s.rec, s.ref, s.req, err)
	return c.err
}

// checked stores a calibration check, logs it and answers the request it served.
func (c *calChain) checked(d dsp.Detection, rec *record.Calibration, ref float64, req *calRequest, applyErr error) {
	p := c.p
	dr, err := calibrate.RecordCheck(p.o.Store, rec)
	switch {
	case errors.Is(err, buffer.ErrNotCommitted) || errors.Is(err, buffer.ErrRefused):
		p.rec.failing(err) // held, or refused and counted; the node measures on
	case err != nil:
		c.err = fmt.Errorf("node: storing a calibration check: %w", err)
	}
	if p.o.Notify != nil {
		p.o.Notify()
	}
	p.n.log.Info("calibration check", "reference_db", ref, "measured_db", rec.Measured, "deviation_db", rec.Deviation,
		"frequency_hz", rec.Frequency, "ok", rec.OK, "applied", rec.Applied, "drift_db", dr.DeltaDB, "drift_flagged", dr.Flagged)
	if req != nil {
		req.reply <- calReply{res: &CalibrationResult{Detection: d, Check: rec, Applied: rec.Applied}, err: applyErr}
		if c.pending == req {
			c.pending = nil
		}
	}
}

// on follows the detector's tonal run and reports whether a calibrator is on the
// microphone now. A tone counts as a calibrator only when its level matches a configured
// calibrator's within the adjustment range at the sensitivity in use (at 1 kHz the A-weighted
// Fast level is the tone's level: IEC 61672-1:2013 Table 3 gives A = 0 dB there); any other
// steady tone, a 1 kHz alarm or machine, is sound and stays in the data. From the moment a run
// matches, the seconds from calMargin before its start to calMargin after its end are marked
// calibrating: those already stored by an annotation, those waiting for their minute directly,
// the rest as they close.
func (c *calChain) on() (bool, error) {
	p := c.p
	start, in := c.det.InTone()
	if !in {
		return false, nil
	}
	now := p.clock.Time(p.pos)
	if start == c.run {
		c.until = now.Add(calMargin)
		return true, nil
	}
	refs := c.o.References
	if req := c.pending; req != nil && req.reference > 0 {
		refs = []float64{req.reference}
	}
	level := p.meter.FastLevel()
	ref, ok := calibrate.MatchReference(level-dsp.ReferenceLevel+p.o.SensitivityDBFS, p.o.SensitivityDBFS, refs, c.window())
	if !ok {
		return false, nil
	}
	c.run = start
	c.from = p.clock.Time(start + c.skew).Add(-calMargin)
	c.until = now.Add(calMargin)
	p.minutes.mark(c.from, c.until, record.Calibrating)
	if p.secStart.After(c.from) {
		// Seconds already stored: marked when read, as a calibration check's are.
		if err := p.append(calibrate.CalibratingAnnotation(c.from, p.secStart, ref)); err != nil {
			return false, fmt.Errorf("node: marking calibrating seconds: %w", err)
		}
	}
	return true, nil
}

// window is how far, in dB, a tone's level may lie from a configured calibrator's and still
// be taken for it: the adjustment range (default 3 dB), since a calibrator read further off
// than that cannot be put right by calibration. While a calibration is requested the user has
// said a calibrator is on, so the wider calibrate.DefaultMatchWindow applies and a microphone
// fault shows as a failed check rather than as sound.
func (c *calChain) window() float64 {
	if c.pending != nil {
		return calibrate.DefaultMatchWindow
	}
	if w := c.o.AdjustRange; w > 0 {
		return w
	}
	return 3
}
