package calibrate

import (
	"context"
	"errors"
	"math"
	"time"
)

// Summary is the outcome of a calibration as `leqnode calibrate --format json` prints it. The
// field names are a contract other tools rely on; the values are null when no tone was found.
type Summary struct {
	FrequencyHz     *float64 `json:"frequency_hz"`
	MeasuredDBFS    *float64 `json:"measured_dBFS"`
	SensitivityDBFS *float64 `json:"sensitivity_dBFS"`
	StableS         *float64 `json:"stable_s"`
	OK              bool     `json:"ok"`
	// NominalDBFS is the sensitivity the result was judged against, when one was known.
	NominalDBFS *float64 `json:"nominal_dBFS,omitempty"`
	// Reason says why OK is what it is, in one sentence (Judgement.Reason, or what a
	// recording without a calibrator tone held).
	Reason string `json:"reason,omitempty"`
}

// Summarize returns the summary of a result, values rounded to 0.001; ok says whether the result may be applied
// (a tone was found, its frequency is plausible and the sensitivity is within the range).
func (r *Result) Summarize(ok bool) Summary {
	if r == nil {
		return Summary{}
	}
	// Round to a thousandth (Hz, dB, s): far below what the measurement resolves.
	r3 := func(v float64) float64 { return math.Round(v*1000) / 1000 }
	f, l, s, st := r3(r.Detection.FrequencyHz), r3(r.Detection.LevelDBFS), r3(r.SensitivityDBFS), r3(r.Detection.Stable)
	return Summary{FrequencyHz: &f, MeasuredDBFS: &l, SensitivityDBFS: &s, StableS: &st, OK: ok}
}

// Request asks a running node to take the next stable calibrator tone.
type Request struct {
	// Reference is the calibrator's stated level, dB.
	Reference float64
	// Timeout is how long to wait for a stable tone.
	Timeout time.Duration
	// Apply asks the node to apply the new sensitivity (within its adjustment range), store it
	// in the state directory and write a new session record.
	Apply bool
}

// Requester is what a running node offers through its control socket for calibration: wait
// for the next stable tone and return its summary. The daemon's control socket implements it;
// `leqnode calibrate` without FILE uses it.
type Requester interface {
	RequestCheck(ctx context.Context, req Request) (Summary, error)
}

// ErrNoControlSocket reports that no running node can be asked: the control socket is not
// available.
var ErrNoControlSocket = errors.New("the daemon's control socket is not available")
