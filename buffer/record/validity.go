package record

import (
	"math"
	"strconv"
)

// Reason says why the validity rule left a second out of an aggregate; Counted when it did not.
type Reason uint8

// The reasons, in the order Judge tests them: a second with several of these flags is left out
// for the first.
const (
	Counted           Reason = iota // not left out
	ReasonCalibrating               // a calibrator was on the microphone (flag calibrating)
	ReasonSettling                  // filters still settling after a start (flag settling)
	ReasonExcluded                  // excluded by an annotation (flag excluded)
	ReasonSuspect                   // suspect, e.g. calibration drift (flag suspect)
	ReasonNoData                    // samples dropped (flag dropped); gaps count here too
	ReasonSilence                   // digital silence: no level
	NumReasons                      // the number of reasons, Counted included
)

var reasonNames = [NumReasons]string{"counted", "calibrating", "settling", "excluded", "suspect", "no_data", "digital_silence"}

// String returns the reason's name as every output spells it ("calibrating", "no_data", ...).
func (r Reason) String() string {
	if r < NumReasons {
		return reasonNames[r]
	}
	return "unknown"
}

// LeftOutFlags are the flags that leave a second out of every aggregate.
const LeftOutFlags = Calibrating | Settling | Excluded | Suspect | Dropped | DigitalSilence

// BoundFlags are the flags that keep a second in and make its aggregates bounds: Overload, a
// lower bound; UnderRange, an upper bound.
const BoundFlags = Overload | UnderRange

// Judge applies the validity rule to one second: f is the second's flags ORed with those of
// every annotation covering it, level its LAeq (NaN for digital silence).
func Judge(f Flags, level float64) Reason {
	switch {
	case f&Calibrating != 0:
		return ReasonCalibrating
	case f&Settling != 0:
		return ReasonSettling
	case f&Excluded != 0:
		return ReasonExcluded
	case f&Suspect != 0:
		return ReasonSuspect
	case f&Dropped != 0:
		return ReasonNoData
	case f&DigitalSilence != 0 || math.IsNaN(level) || math.IsInf(level, 0):
		return ReasonSilence
	}
	return Counted
}

// Bound says which way an aggregate's level may be off.
type Bound uint8

const (
	Exact Bound = iota // no counted second was overloaded or under range
	Lower              // the true level is at least the one shown ("≥"): overloaded seconds were counted
	Upper              // the true level is at most the one shown ("≤"): seconds under range were counted
)

// Sign returns "≥" for Lower, "≤" for Upper and "" for Exact: the mark printed before a level.
func (b Bound) Sign() string {
	switch b {
	case Lower:
		return "≥"
	case Upper:
		return "≤"
	}
	return ""
}

// String returns "exact", "lower" or "upper", as JSON payloads spell it.
func (b Bound) String() string {
	switch b {
	case Lower:
		return "lower"
	case Upper:
		return "upper"
	}
	return "exact"
}

// Tally counts the seconds of an aggregate by what the validity rule made of them. All fields
// are in seconds. The zero value is an empty tally; tallies of consecutive stretches add.
type Tally struct {
	Counted    float64             // seconds whose levels are in the aggregate
	LeftOut    [NumReasons]float64 // seconds left out, by reason (LeftOut[Counted] is unused)
	Overload   float64             // counted seconds flagged overload
	UnderRange float64             // counted seconds flagged under-range
}

// Add judges one second of length d (seconds) and counts it; it returns the verdict.
func (t *Tally) Add(f Flags, level, d float64) Reason {
	r := Judge(f, level)
	if r != Counted {
		t.LeftOut[r] += d
		return r
	}
	t.Counted += d
	if f&Overload != 0 {
		t.Overload += d
	}
	if f&UnderRange != 0 {
		t.UnderRange += d
	}
	return r
}

// Merge adds o to t.
func (t *Tally) Merge(o Tally) {
	t.Counted += o.Counted
	for i := range t.LeftOut {
		t.LeftOut[i] += o.LeftOut[i]
	}
	t.Overload += o.Overload
	t.UnderRange += o.UnderRange
}

// LeftOutTotal returns the seconds left out for any reason.
func (t Tally) LeftOutTotal() float64 {
	var s float64
	for _, v := range t.LeftOut[ReasonCalibrating:] {
		s += v
	}
	return s
}

// Bound returns which way the aggregate's level may be off: Lower when any counted second was
// overloaded (this wins: see the package documentation), else Upper when any was under range.
func (t Tally) Bound() Bound {
	switch {
	case t.Overload > 0:
		return Lower
	case t.UnderRange > 0:
		return Upper
	}
	return Exact
}

// Flags returns the bound flags the aggregate carries: Overload and UnderRange as its counted
// seconds did.
func (t Tally) Flags() Flags {
	var f Flags
	if t.Overload > 0 {
		f |= Overload
	}
	if t.UnderRange > 0 {
		f |= UnderRange
	}
	return f
}

// LeftOutMap returns the seconds left out by reason name, with every reason present (zeros
// included) so that every output carries the same keys.
func (t Tally) LeftOutMap() map[string]float64 {
	m := make(map[string]float64, NumReasons-1)
	for r := ReasonCalibrating; r < NumReasons; r++ {
		m[r.String()] = t.LeftOut[r]
	}
	return m
}

// Exceeds reports whether level exceeds limit: the level, rounded to the reported 0.1 dB, is
// greater than the limit (common practice: a level equal to the limit complies). NaN never
// exceeds.
func Exceeds(level, limit float64) bool {
	if math.IsNaN(level) || math.IsNaN(limit) {
		return false
	}
	return Round(level, 1) > limit
}

// Round returns v rounded to the given number of decimals exactly as it is printed with
// that many decimals (strconv's correctly rounded decimal form), so that a decision taken on
// the rounded value agrees with the number the reader sees. NaN and infinities are returned as
// they are.
func Round(v float64, decimals int) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'f', decimals, 64), 64)
	return r
}
