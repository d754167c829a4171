package reference

// ToneburstFrequency is the frequency of the tonebursts of IEC 61672-1:2013 Table 4, in Hz.
const ToneburstFrequency = 4000.0

// ToneburstUncertainty is the maximum-permitted expanded uncertainty of a toneburst test,
// in dB (IEC 61672-1:2013 Table B.1, via phonometry tests/reference_data/sound_level_meters.py).
const ToneburstUncertainty = 0.30

// Toneburst is one row of IEC 61672-1:2013 Table 4, "Reference 4 kHz toneburst responses and
// acceptance limits". A burst of Duration seconds is cut from a steady 4 kHz sine of
// A-weighted level LA, starting and ending at zero crossings (from memory); the responses are
// the differences LAFmax - LA, LASmax - LA and LAE - LA.
//
// The reference responses follow from the standard's equations: for the time-weighted maxima
// δref = 10 lg(1 - e^(-Tb/τ)) (Eq. 7, τ = 0.125 s for F, 1 s for S), and for the sound
// exposure level δref = 10 lg(Tb/T0), T0 = 1 s (Eq. 8); the table rounds them to 0.1 dB.
type Toneburst struct {
	// Duration is the burst duration Tb in seconds.
	Duration float64

	// Fast and Exposure are the tabulated reference responses LAFmax - LA and LAE - LA, dB.
	Fast, Exposure float64

	// FastClass1 and FastClass2 are the acceptance limits on the deviation from Fast; the
	// same limits apply to the deviation from Exposure.
	FastClass1, FastClass2 Tolerance

	// HasSlow reports whether the table gives an S response at this duration; it does only
	// down to 2 ms.
	HasSlow bool

	// Slow is the tabulated reference response LASmax - LA, dB, when HasSlow.
	Slow float64

	// SlowClass1 and SlowClass2 are the acceptance limits on the deviation from Slow, when
	// HasSlow.
	SlowClass1, SlowClass2 Tolerance
}

// Tonebursts returns IEC 61672-1:2013 Table 4, longest burst (1 s) first, down to 0.25 ms.
// Each call returns a fresh slice.
//
// Source: IEC 61672-1:2013 Table 4 (reference responses and class 1 and class 2 acceptance
// limits) via phonometry tests/reference_data/sound_level_meters.py. The reference responses
// were recomputed from Eq. 7 and Eq. 8 and agree within the 0.05 dB of their rounding.
func Tonebursts() []Toneburst {
	pm := func(up, lo float64) Tolerance { return Tolerance{Lower: lo, Upper: up} }
	return []Toneburst{
		{Duration: 1, Fast: 0.0, Exposure: 0.0, FastClass1: pm(0.5, -0.5), FastClass2: pm(1.0, -1.0),
			HasSlow: true, Slow: -2.0, SlowClass1: pm(0.5, -0.5), SlowClass2: pm(1.0, -1.0)},
		{Duration: 0.5, Fast: -0.1, Exposure: -3.0, FastClass1: pm(0.5, -0.5), FastClass2: pm(1.0, -1.0),
			HasSlow: true, Slow: -4.1, SlowClass1: pm(0.5, -0.5), SlowClass2: pm(1.0, -1.0)},
		{Duration: 0.2, Fast: -1.0, Exposure: -7.0, FastClass1: pm(0.5, -0.5), FastClass2: pm(1.0, -1.0),
			HasSlow: true, Slow: -7.4, SlowClass1: pm(0.5, -0.5), SlowClass2: pm(1.0, -1.0)},
		{Duration: 0.1, Fast: -2.6, Exposure: -10.0, FastClass1: pm(1.0, -1.0), FastClass2: pm(1.0, -1.0),
			HasSlow: true, Slow: -10.2, SlowClass1: pm(1.0, -1.0), SlowClass2: pm(1.0, -1.0)},
		{Duration: 0.05, Fast: -4.8, Exposure: -13.0, FastClass1: pm(1.0, -1.0), FastClass2: pm(1.0, -1.5),
			HasSlow: true, Slow: -13.1, SlowClass1: pm(1.0, -1.0), SlowClass2: pm(1.0, -1.5)},
		{Duration: 0.02, Fast: -8.3, Exposure: -17.0, FastClass1: pm(1.0, -1.0), FastClass2: pm(1.0, -2.0),
			HasSlow: true, Slow: -17.0, SlowClass1: pm(1.0, -1.5), SlowClass2: pm(1.0, -2.0)},
		{Duration: 0.01, Fast: -11.1, Exposure: -20.0, FastClass1: pm(1.0, -1.0), FastClass2: pm(1.0, -2.0),
			HasSlow: true, Slow: -20.0, SlowClass1: pm(1.0, -2.0), SlowClass2: pm(1.0, -3.0)},
		{Duration: 0.005, Fast: -14.1, Exposure: -23.0, FastClass1: pm(1.0, -1.0), FastClass2: pm(1.0, -2.5),
			HasSlow: true, Slow: -23.0, SlowClass1: pm(1.0, -2.5), SlowClass2: pm(1.0, -4.0)},
		{Duration: 0.002, Fast: -18.0, Exposure: -27.0, FastClass1: pm(1.0, -1.5), FastClass2: pm(1.0, -2.5),
			HasSlow: true, Slow: -27.0, SlowClass1: pm(1.0, -3.0), SlowClass2: pm(1.0, -5.0)},
		{Duration: 0.001, Fast: -21.0, Exposure: -30.0, FastClass1: pm(1.0, -2.0), FastClass2: pm(1.0, -3.0)},
		{Duration: 0.0005, Fast: -24.0, Exposure: -33.0, FastClass1: pm(1.0, -2.5), FastClass2: pm(1.0, -4.0)},
		{Duration: 0.00025, Fast: -27.0, Exposure: -36.0, FastClass1: pm(1.0, -3.0), FastClass2: pm(1.5, -5.0)},
	}
}
