package reference

// Tolerance is an acceptance interval on a deviation in decibels (measured response minus its
// design goal or reference response): a deviation d passes when Lower ≤ d ≤ Upper. A side
// without a limit is math.Inf(-1) or math.Inf(+1).
//
// The acceptance limits of IEC 61672-1:2013 apply to the measured deviation; the standard also
// states a maximum-permitted measurement uncertainty (Annex B, Table B.1), given beside each
// table here. A laboratory claims conformance only when the deviation, widened by its actual
// measurement uncertainty, stays inside the limits. A digital simulation has no measurement
// uncertainty to speak of, so the tests of this project compare the deviation directly.
type Tolerance struct {
	Lower, Upper float64
}

// Contains reports whether deviation d (dB) lies inside t, limits included. NaN is never
// inside.
func (t Tolerance) Contains(d float64) bool {
	return d >= t.Lower && d <= t.Upper
}
