package node

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/calibrate"
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

// onTone handles one stable tone found by the calibrator detector.
func (p *processor) onTone(d dsp.Detection) {
	o := p.o.Calibration
	at := func(pos int64) time.Time { return p.clock.Time(pos + p.calSkew) }
	refs := o.References
	req := p.calPending
	if req != nil && req.reference > 0 {
		refs = []float64{req.reference}
	}
	inUse := p.o.SensitivityDBFS
	ref, ok := calibrate.MatchReference(d.LevelDBFS, inUse, refs, p.calWindow())
	if !ok {
		p.n.log.Warn("a steady 1 kHz tone was heard, but its level matches no configured calibrator", "level_dbfs", d.LevelDBFS, "references", refs)
		return
	}
	if err := p.append(calibrate.CalibratingAnnotation(at(d.ToneStart).Add(-calMargin), at(d.End).Add(calMargin), ref)); err != nil {
		p.calErr = err
		return
	}
	rec := calibrate.NewCheck(at(d.End), d, ref, inUse, o.Class)
	applied := false
	var applyErr error
	var newSens float64
	if req != nil && req.apply {
		if o.StateDir == "" {
			applyErr = errors.New("no state directory to keep the new sensitivity: set [calibration] state_dir")
		} else if st, err := calibrate.Apply(o.StateDir, rec, o.NominalDBFS, o.AdjustRange); err != nil {
			applyErr = err
			if errors.Is(err, calibrate.ErrMicrophoneFault) {
				p.health.sticky |= record.MicFault
				p.n.log.Error("calibration refused: microphone fault", "err", err)
			}
		} else {
			applied = true
			newSens = st.SensitivityDBFS
			p.health.sticky &^= record.MicFault
		}
	}
	dr, err := calibrate.RecordCheck(p.o.Store, rec)
	switch {
	case errors.Is(err, buffer.ErrNotCommitted) || errors.Is(err, buffer.ErrRefused):
		p.storeFailing(err) // held, or refused and counted; the node measures on
	case err != nil:
		p.calErr = err
	}
	if applied {
		// From here on the node measures with the new sensitivity (new session record).
		if err := p.reconfigure(Settings{SensitivityDBFS: newSens, OverloadLevel: p.o.OverloadLevel, UnderRangeLevel: p.o.UnderRangeLevel}); err != nil {
			p.calErr = err
		}
	}
	if p.o.Notify != nil {
		p.o.Notify()
	}
	p.n.log.Info("calibration check", "reference_db", ref, "measured_db", rec.Measured, "deviation_db", rec.Deviation,
		"frequency_hz", rec.Frequency, "ok", rec.OK, "applied", applied, "drift_db", dr.DeltaDB, "drift_flagged", dr.Flagged)
	if req != nil {
		req.reply <- calReply{res: &CalibrationResult{Detection: d, Check: rec, Applied: applied}, err: applyErr}
		p.calPending = nil
	}
}

// calibratorOn follows the detector's tonal run and reports whether a calibrator is on the
// microphone now. A tone counts as a calibrator only when its level matches a configured
// calibrator's within the adjustment range at the sensitivity in use (at 1 kHz the A-weighted
// Fast level is the tone's level: IEC 61672-1:2013 Table 3 gives A = 0 dB there); any other
// steady tone, a 1 kHz alarm or machine, is sound and stays in the data. From the moment a run
// matches, the seconds from calMargin before its start to calMargin after its end are marked
// calibrating: those already stored by an annotation, those waiting for their minute directly,
// the rest as they close.
func (p *processor) calibratorOn() (bool, error) {
	start, in := p.cal.InTone()
	if !in {
		return false, nil
	}
	now := p.clock.Time(p.pos)
	if start == p.calRun {
		p.calUntil = now.Add(calMargin)
		return true, nil
	}
	refs := p.o.Calibration.References
	if req := p.calPending; req != nil && req.reference > 0 {
		refs = []float64{req.reference}
	}
	level := p.meter.FastLevel()
	ref, ok := calibrate.MatchReference(level-dsp.ReferenceLevel+p.o.SensitivityDBFS, p.o.SensitivityDBFS, refs, p.calWindow())
	if !ok {
		return false, nil
	}
	p.calRun = start
	p.calFrom = p.clock.Time(start + p.calSkew).Add(-calMargin)
	p.calUntil = now.Add(calMargin)
	p.minutes.mark(p.calFrom, p.calUntil, record.Calibrating)
	if p.secStart.After(p.calFrom) {
		// Seconds already stored: marked when read, as a calibration check's are.
		if err := p.append(calibrate.CalibratingAnnotation(p.calFrom, p.secStart, ref)); err != nil {
			return false, fmt.Errorf("node: marking calibrating seconds: %w", err)
		}
	}
	return true, nil
}

// calWindow is how far, in dB, a tone's level may lie from a configured calibrator's and still
// be taken for it: the adjustment range (default 3 dB), since a calibrator read further off
// than that cannot be put right by calibration. While a calibration is requested the user has
// said a calibrator is on, so the wider calibrate.DefaultMatchWindow applies and a microphone
// fault shows as a failed check rather than as sound.
func (p *processor) calWindow() float64 {
	if p.calPending != nil {
		return calibrate.DefaultMatchWindow
	}
	if w := p.o.Calibration.AdjustRange; w > 0 {
		return w
	}
	return 3
}
