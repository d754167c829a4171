package calibrate

import (
	"fmt"
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// DefaultMatchWindow is how far, in dB, a tone's level may lie from a calibrator's stated
// level and still be taken for that calibrator: 6 dB, twice the default adjustment range, so
// that a microphone fault (more than 3 dB off) is still recorded as a failed check, while a
// steady 1 kHz tone at an ordinary level (a test signal, an alarm far away) is not a check.
const DefaultMatchWindow = 6.0

// MatchReference returns the stated level among refs nearest the level the node read for the
// tone, levelDBFS - inUse + 94, and whether it lies within window dB (DefaultMatchWindow when
// 0) of it. Without refs it uses the stated levels of the usual calibrators, 94 and 114 dB.
func MatchReference(levelDBFS, inUse float64, refs []float64, window float64) (float64, bool) {
	if len(refs) == 0 {
		refs = []float64{94, 114}
	}
	if window == 0 {
		window = DefaultMatchWindow
	}
	read := levelDBFS - inUse + dsp.ReferenceLevel
	best, dist := math.NaN(), math.Inf(1)
	for _, r := range refs {
		if d := math.Abs(read - r); d < dist {
			best, dist = r, d
		}
	}
	return best, dist <= window
}

// Observed is a detection placed on the wall clock by the node's sample clock.
type Observed struct {
	Detection dsp.Detection
	// ToneFrom and End are the wall-clock times of Detection.ToneStart and Detection.End.
	ToneFrom, End time.Time
}

// HandleOptions tune Handle. The zero value takes the defaults.
type HandleOptions struct {
	// References are the stated levels of the calibrators in use (default 94 and 114 dB).
	References []float64
	// MatchWindow is DefaultMatchWindow when 0.
	MatchWindow float64
	// Class is the calibrators' class (default class 1).
	Class dsp.CalibratorClass
	// Margin widens the calibrating annotation on each side (default 2 s): the tone fades in
	// and out around what the detector measures.
	Margin time.Duration
}

// Handle stores what a calibrator tone detected while the node ran means: an annotation
// marking the tone's seconds (widened by the margin) record.Calibrating, and the check,
// compared with the previous one by RecordCheck (which marks drift Suspect). It returns nil
// and no error when the tone's level matches no calibrator (not a check: nothing is stored).
// The sensitivity is not changed here: a node applies a new one only when asked (Adjust,
// SaveState and a new session record).
func Handle(s *buffer.Store, obs Observed, inUse float64, o HandleOptions) (*record.Calibration, Drift, error) {
	ref, ok := MatchReference(obs.Detection.LevelDBFS, inUse, o.References, o.MatchWindow)
	if !ok {
		return nil, Drift{}, nil
	}
	margin := o.Margin
	if margin == 0 {
		margin = 2 * time.Second
	}
	if _, err := s.Append(CalibratingAnnotation(obs.ToneFrom.Add(-margin), obs.End.Add(margin), ref)); err != nil {
		return nil, Drift{}, fmt.Errorf("storing the calibrating annotation: %w", err)
	}
	rec := NewCheck(obs.End, obs.Detection, ref, inUse, o.Class)
	dr, err := RecordCheck(s, rec)
	return rec, dr, err
}
