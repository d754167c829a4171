// Package calibrate is the node's side of a field check with a sound calibrator: it finds the
// calibrator's tone in a recording, turns a detection into a stored check, decides whether a
// new microphone sensitivity may be applied, keeps the applied sensitivity in the state
// directory, and marks data whose calibration is in doubt.
//
// # Model
//
// The microphone sensitivity S is the level in dBFS (AES17) that a 1 kHz sine of 94 dB SPL
// produces. A calibrator of stated level Lref that the node measures at LdBFS implies
//
//	S = LdBFS + 94 - Lref,
//
// whatever sensitivity was in use at the time; the level the node reported with the
// sensitivity S0 in use is Lmeas = LdBFS - S0 + 94, and the check's deviation is Lmeas - Lref.
//
// Every check is stored as a record.Calibration record. Drift is judged on the implied
// sensitivities of consecutive checks: when they differ by more than DriftLimit (0.5 dB), the
// data between the two checks cannot say which sensitivity held when, and RecordCheck marks
// [previous check, this check) Suspect with a record.Annotation. The rule follows the field
// practice of checking before and after a measurement and rejecting the series when the two
// readings differ by more than 0.5 dB; it is recalled from ISO 1996-2:2017 (calibration
// clause) but could not be confirmed from a source, so it stands here as common practice.
//
// A new sensitivity is applied only within AdjustRange (default ±3 dB) of the microphone's
// nominal sensitivity; beyond it the microphone, its port or its wiring is more likely at
// fault than its sensitivity, and Adjust refuses with ErrMicrophoneFault.
//
// # Use
//
// While running, the node feeds its samples to a dsp.CalibratorDetector and passes each
// detection, placed on the wall clock, to Handle: it marks the tone's seconds Calibrating,
// matches the tone to a calibrator level (94 or 114 dB), and stores the check through
// RecordCheck. To adjust, Apply checks the range, saves the state file (SaveState) and marks
// the check applied; at start the node reads the state with LoadState. Offline, FromFile and
// FromReader find the tone in a recording.
//
// Numbers from a low-cost node are indicative. Legally valid measurements need a type-approved
// class 1 instrument with traceable calibration; local regulations and accredited practice
// prevail. Calibrators produce 94 dB or 114 dB: keep them on the microphone, not near an ear.
package calibrate

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/wav"
)

// Defaults of a check.
const (
	// DefaultReference is the stated level of the usual sound calibrator, 94 dB (1 Pa).
	DefaultReference = 94.0

	// DefaultAdjustRange is the largest change of sensitivity from the nominal that is
	// applied, ±3 dB.
	DefaultAdjustRange = 3.0

	// DriftLimit is the largest difference, in dB, between the sensitivities implied by two
	// consecutive checks that leaves the data between them unflagged: 0.5 dB, and exactly
	// 0.5 dB passes ("more than 0.5 dB" flags). Common practice; recalled from ISO 1996-2:2017,
	// not confirmed from a source.
	DriftLimit = 0.5
)

// ErrNoTone reports that no stable calibrator tone was found.
var ErrNoTone = errors.New("no calibrator tone found")

// ErrMicrophoneFault reports a sensitivity beyond the allowed adjustment range.
var ErrMicrophoneFault = errors.New("microphone fault")

// Options sets up a check. The zero value checks against a 94 dB class 1 calibrator with the
// detector's defaults.
type Options struct {
	// Reference is the calibrator's stated level in dB (default 94).
	Reference float64

	// Class is the calibrator's class, used to judge the tone's frequency and level
	// (default class 1 of IEC 60942:2017).
	Class dsp.CalibratorClass

	// Channel of the recording to use, counted from 1 (default 1).
	Channel int

	// Detector tunes the tone detector; its SampleRate is set from the recording.
	Detector dsp.CalibratorConfig
}

func (o Options) resolved() Options {
	if o.Reference == 0 {
		o.Reference = DefaultReference
	}
	if o.Channel == 0 {
		o.Channel = 1
	}
	return o
}

// Result is the outcome of looking for a calibrator in a recording.
type Result struct {
	// Detection is the longest stable tone found.
	Detection dsp.Detection
	// Detections is the number of stable tones found.
	Detections int
	// SampleRate of the recording, Hz.
	SampleRate float64
	// Reference is the calibrator's stated level used, dB.
	Reference float64
	// SensitivityDBFS is the sensitivity the tone implies: LevelDBFS + 94 - Reference.
	SensitivityDBFS float64
	// FrequencyPlausible reports whether the tone's frequency lies within the calibrator
	// class's limit around 1 kHz (IEC 60942:2017 Table 4).
	FrequencyPlausible bool
}

// Sensitivity returns the microphone sensitivity (dBFS for 94 dB at 1 kHz) implied by a tone
// measured at levelDBFS from a calibrator of stated level reference: levelDBFS + 94 - reference.
func Sensitivity(levelDBFS, reference float64) float64 {
	return levelDBFS + dsp.ReferenceLevel - reference
}

// FromFile looks for a calibrator tone in the WAV file at path ("-" is not special here).
func FromFile(ctx context.Context, path string, opts Options) (*Result, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer func() { _ = f.Close() }() // read only: a failing Close loses nothing
	return FromReader(ctx, f, opts)
}

// FromReader looks for a calibrator tone in a WAV stream and returns the longest stable one.
// It returns an error wrapping ErrNoTone when none is found, and the stream's error when the
// recording is bad.
func FromReader(ctx context.Context, r io.Reader, opts Options) (*Result, error) {
	o := opts.resolved()
	wr, err := wav.NewReader(bufio.NewReaderSize(r, 1<<16))
	if err != nil {
		return nil, err
	}
	f := wr.Format()
	if o.Channel < 1 || o.Channel > f.Channels {
		return nil, fmt.Errorf("channel %d does not exist: the recording has %d channel(s), count from 1", o.Channel, f.Channels)
	}
	cfg := o.Detector
	cfg.SampleRate = float64(f.SampleRate)
	cfg.Diagnose = true // to say what was found when no calibrator is
	det, err := dsp.NewCalibratorDetector(cfg)
	if err != nil {
		return nil, err
	}
	res := &Result{SampleRate: cfg.SampleRate, Reference: o.Reference}
	found := func(d dsp.Detection) {
		res.Detections++
		if d.Stable > res.Detection.Stable {
			res.Detection = d
		}
	}
	frames := make([]float32, 4096*f.Channels)
	mono := make([]float32, 4096)
	for {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		n, rerr := wr.Read(frames)
		nf := n / f.Channels
		for i := range nf {
			mono[i] = frames[i*f.Channels+o.Channel-1]
		}
		det.Process(mono[:nf], found)
		if rerr == io.EOF {
			break
		}
		if rerr != nil {
			return nil, rerr
		}
	}
	det.Flush(found)
	if res.Detections == 0 {
		secs := float64(det.Position()) / cfg.SampleRate
		c, maxDom, ok := det.Candidate()
		return nil, fmt.Errorf("%w in %.1f s of audio: %s", ErrNoTone, secs, describeCandidate(c, maxDom, ok, cfg))
	}
	res.SensitivityDBFS = Sensitivity(res.Detection.LevelDBFS, o.Reference)
	res.FrequencyPlausible = dsp.CalibratorTolerances(o.Class).FrequencyPlausible(res.Detection.FrequencyHz, dsp.CalibratorFrequency)
	return res, nil
}

// describeCandidate says what a recording without a calibrator tone held instead, and what to
// do about it, judged by the detector's rules (cfg's values, defaults where zero).
func describeCandidate(c dsp.ToneCandidate, maxDom float64, ok bool, cfg dsp.CalibratorConfig) string {
	or := func(v, d float64) float64 {
		if v == 0 {
			return d
		}
		return v
	}
	tol := or(cfg.FrequencyTolerance, dsp.DefaultCalibratorFrequencyTolerance)
	need := or(cfg.DominanceDB, dsp.DefaultCalibratorDominance)
	stab := or(cfg.StabilityDB, dsp.DefaultCalibratorStability)
	minS := minStable(cfg)
	hold := fmt.Sprintf("hold a 1 kHz calibrator on the microphone for at least %g s", minS)
	switch {
	case !ok && math.IsInf(maxDom, -1):
		return "the recording is digital silence: check the input and its gain, then " + hold
	case !ok:
		return fmt.Sprintf("no steady tone, only sound spread over many bands (no one-third-octave band stood more than %.1f dB above the others): %s", math.Max(maxDom, 0), hold)
	case math.Abs(c.FrequencyHz-dsp.CalibratorFrequency) > tol*dsp.CalibratorFrequency:
		return fmt.Sprintf("found a steady tone at %.1f Hz (%.1f dBFS, %.1f s), not at 1 kHz: set the calibrator to 1 kHz (some offer 250 Hz), or this is another sound; %s", c.FrequencyHz, c.LevelDBFS, c.Seconds, hold)
	case c.DominanceDB < need:
		return fmt.Sprintf("found a 1 kHz tone (%.1f dBFS, %.1f s) standing only %.1f dB above the background in the other bands, where a calibrator needs %g dB: seat the calibrator fully on the microphone, or check in a quieter place", c.LevelDBFS, c.Seconds, c.DominanceDB, need)
	case c.Seconds < minS:
		return fmt.Sprintf("found a 1 kHz tone (%.1f dBFS) held for only %.1f s: %s", c.LevelDBFS, c.Seconds, hold)
	case c.SteadySeconds < minS:
		return fmt.Sprintf("found a 1 kHz tone (%.1f dBFS) for %.1f s, but its level drifted: it stayed within %g dB for at most %.1f s, where a calibrator holds it for %g s; hold the calibrator still, let it settle, and check its battery", c.LevelDBFS, c.Seconds, stab, c.SteadySeconds, minS)
	}
	return fmt.Sprintf("found a 1 kHz tone (%.1f dBFS, %.1f s) that did not stay steady enough: %s", c.LevelDBFS, c.Seconds, hold)
}

func minStable(c dsp.CalibratorConfig) float64 {
	if c.MinStable > 0 {
		return c.MinStable
	}
	return dsp.DefaultCalibratorMinStable
}

// Adjust decides whether the sensitivity a check implies may be applied: it returns proposed
// when it lies within rangeDB (DefaultAdjustRange when 0) of the microphone's nominal
// sensitivity, and otherwise an error wrapping ErrMicrophoneFault that says by how much it
// lies outside. The danger of a wide range: a blocked or wet microphone reads low, and a
// range wide enough to "correct" it hides the fault under a sensitivity that is wrong at every
// frequency but 1 kHz.
func Adjust(nominal, proposed, rangeDB float64) (float64, error) {
	if rangeDB == 0 {
		rangeDB = DefaultAdjustRange
	}
	if math.IsNaN(proposed) || math.IsInf(proposed, 0) {
		return 0, fmt.Errorf("%w: the check gave no usable sensitivity", ErrMicrophoneFault)
	}
	if d := proposed - nominal; math.Abs(d) > rangeDB {
		return 0, fmt.Errorf("%w: the calibrator implies a sensitivity of %.2f dBFS, %+.2f dB from the nominal %.2f dBFS, beyond the allowed ±%g dB: check the microphone, its port and its wiring (or the calibrator's stated level)",
			ErrMicrophoneFault, proposed, d, nominal, rangeDB)
	}
	return proposed, nil
}

// CheckTolerance is the largest deviation, in dB, of a check's reading from the calibrator's
// stated level for which NewCheck sets OK: the drift limit, 0.5 dB (common practice).
const CheckTolerance = DriftLimit

// NewCheck turns a detection made while the node measured with sensitivity inUse (dBFS) into
// a calibration record ending at at: the level the node read (LdBFS - inUse + 94), its
// deviation from the calibrator's stated level reference, the tone's frequency and stability.
// OK is set when the deviation is within CheckTolerance, the frequency is plausible for a
// calibrator of class c and no sample clipped (a clipped check also carries record.Clipped). The record's sensitivities are both inUse; a caller that applies a
// new sensitivity sets SensitivityAfter and Applied.
func NewCheck(at time.Time, d dsp.Detection, reference, inUse float64, c dsp.CalibratorClass) *record.Calibration {
	measured := d.LevelDBFS - inUse + dsp.ReferenceLevel
	dev := measured - reference
	plausible := dsp.CalibratorTolerances(c).FrequencyPlausible(d.FrequencyHz, dsp.CalibratorFrequency)
	rec := &record.Calibration{
		At: at.UTC(), Reference: reference, Measured: measured, Deviation: dev,
		Frequency: d.FrequencyHz, Stability: d.StabilityDB,
		SensitivityBefore: inUse, SensitivityAfter: inUse,
		OK: math.Abs(dev) <= CheckTolerance && plausible && d.Clipped == 0,
	}
	if d.Clipped > 0 {
		rec.Flags |= record.Clipped
	}
	return rec
}

// Implied returns the microphone sensitivity a stored check implies: the dBFS the tone
// produced, Measured + SensitivityBefore - 94, plus 94 - Reference.
func Implied(c *record.Calibration) float64 {
	return c.Measured + c.SensitivityBefore - c.Reference
}

// Drifted reports whether two implied sensitivities (or two readings of one calibrator
// with one sensitivity) differ by more than DriftLimit. Exactly DriftLimit does not drift.
func Drifted(before, after float64) bool {
	// Round to a micro-decibel so that 94.5 - 94.0 computed in binary counts as 0.5.
	return math.Round(math.Abs(after-before)*1e6) > DriftLimit*1e6
}

// Drift is what RecordCheck found.
type Drift struct {
	// Previous is the check before this one, nil for the first check in the store.
	Previous *record.Calibration
	// DeltaDB is Implied(this) - Implied(previous), 0 without a previous check.
	DeltaDB float64
	// Flagged reports that DeltaDB exceeded DriftLimit and an annotation was written.
	Flagged bool
	// Annotation is the Suspect annotation written, when Flagged.
	Annotation *record.Annotation
}

// RecordCheck stores the check c and compares it with the previous stored check: when their
// implied sensitivities differ by more than DriftLimit it appends an annotation marking
// [previous check, this check) record.Suspect. It returns what it found. The store's group
// commit decides when both records reach the disk; call Flush to force it.
func RecordCheck(s *buffer.Store, c *record.Calibration) (Drift, error) {
	var dr Drift
	last, err := s.Last(record.KindCalibration)
	if err != nil {
		return dr, fmt.Errorf("reading the previous calibration check: %w", err)
	}
	if p, ok := last.(*record.Calibration); ok && p != nil {
		dr.Previous = p
		dr.DeltaDB = Implied(c) - Implied(p)
		if Drifted(Implied(p), Implied(c)) && c.At.After(p.At) {
			c.Flags |= record.Suspect
			dr.Flagged = true
			dr.Annotation = &record.Annotation{
				From: p.At.UTC(), To: c.At.UTC(), Flags: record.Suspect,
				Reason: fmt.Sprintf("calibration drift of %+.2f dB between the checks of %s and %s exceeds %.1f dB (common practice)",
					dr.DeltaDB, p.At.UTC().Format(time.RFC3339), c.At.UTC().Format(time.RFC3339), DriftLimit),
			}
		}
	}
	if _, err := s.Append(c); err != nil {
		return dr, fmt.Errorf("storing the calibration check: %w", err)
	}
	if dr.Annotation != nil {
		if _, err := s.Append(dr.Annotation); err != nil {
			return dr, fmt.Errorf("storing the drift annotation: %w", err)
		}
	}
	return dr, nil
}

// CalibratingAnnotation returns the annotation that marks [from, to) record.Calibrating, so
// that statistics, events and reports leave out the seconds a calibrator was on the
// microphone. Widen the range by a margin of a second or two on each side: the tone fades in
// and out around the stable window the detector reports.
func CalibratingAnnotation(from, to time.Time, reference float64) *record.Annotation {
	return &record.Annotation{
		From: from.UTC(), To: to.UTC(), Flags: record.Calibrating,
		Reason: fmt.Sprintf("sound calibrator (%g dB, 1 kHz) on the microphone", reference),
	}
}

// Span returns the wall-clock range of a detection's tone, from ToneStart to End, for a
// stream whose sample 0 was at t0, widened by margin on each side.
func Span(d dsp.Detection, t0 time.Time, fs float64, margin time.Duration) (from, to time.Time) {
	at := func(n int64) time.Time { return t0.Add(time.Duration(math.Round(float64(n) / fs * 1e9))) }
	return at(d.ToneStart).Add(-margin), at(d.End).Add(margin)
}
