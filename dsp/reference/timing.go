package reference

// Time constants of the exponential time weightings, in seconds.
//
// The exponential time-weighted level is
//
//	Lτ(t) = 10 lg[ (1/τ) ∫₋∞ᵗ p²(ξ) e^(-(t-ξ)/τ) dξ / p0² ],
//
// a squarer followed by a low-pass with one real pole at -1/τ (IEC 61672-1:2002 Figure 1, via
// a public copy of IS 15575 (Part 1):2005; IEC 61672-1:2013 clause 3, from memory).
const (
	// TimeConstantFast is τ of time weighting F: 0.125 s (IEC 61672-1:2013 5.8.1, clause
	// number from memory; value via python-acoustics and IEC 61672-1:2002 5.7.1).
	TimeConstantFast = 0.125

	// TimeConstantSlow is τ of time weighting S: 1 s (same sources as TimeConstantFast).
	TimeConstantSlow = 1.0

	// ImpulseRise is the rise time constant of time weighting I: 35 ms (IEC 60651:1979, from
	// memory). I is not a conformance item of IEC 61672-1:2013, which mentions it only in its
	// informative Annex C; it is kept because practice still asks for LAImax.
	ImpulseRise = 0.035

	// ImpulseDecay is the decay time constant of the peak detector of time weighting I: 1.5 s
	// (IEC 60651:1979, from memory).
	ImpulseDecay = 1.5
)

// DecayRate is the rate at which a time-weighted level falls after a steady signal stops,
// with its acceptance limits, for one time weighting.
type DecayRate struct {
	// Weighting is the time weighting's letter: "F", "S" or "I".
	Weighting string

	// TimeConstant is τ in seconds (the decay constant for I).
	TimeConstant float64

	// Theoretical is 10 lg(e)/τ in dB/s: 34.74 (F), 4.34 (S), 2.90 (I). Computed from the
	// exponential time weighting.
	Theoretical float64

	// HasLimits reports whether Class1 and Uncertainty are given (not for I).
	HasLimits bool

	// DesignGoal is the rounded design goal of IEC 61672-1:2013 5.8.2, dB/s: 34.7 (F), 4.3 (S)
	// (from memory, unverified).
	DesignGoal float64

	// Class1 is the acceptance interval on the deviation of the measured decay rate from
	// DesignGoal, dB/s: F +3.8/-3.7, S +0.8/-0.7 (IEC 61672-1:2013 5.8.2, from memory,
	// unverified; the 2002 edition's rules differ and are not mixed in).
	Class1 Tolerance

	// Uncertainty is the maximum-permitted expanded uncertainty, dB/s: 3.5 (F), 0.4 (S)
	// (IEC 61672-1:2013 Table B.1, via phonometry tests/reference_data/sound_level_meters.py).
	Uncertainty float64
}

// DecayRates returns the decay rates of the F, S and I time weightings. Each call returns a
// fresh slice. The theoretical rates are computed from 10 lg(e)/τ = 4.3429/τ dB/s.
func DecayRates() []DecayRate {
	return []DecayRate{
		{Weighting: "F", TimeConstant: TimeConstantFast, Theoretical: 34.7436,
			HasLimits: true, DesignGoal: 34.7, Class1: Tolerance{Lower: -3.7, Upper: 3.8}, Uncertainty: 3.5},
		{Weighting: "S", TimeConstant: TimeConstantSlow, Theoretical: 4.3429,
			HasLimits: true, DesignGoal: 4.3, Class1: Tolerance{Lower: -0.7, Upper: 0.8}, Uncertainty: 0.4},
		{Weighting: "I", TimeConstant: ImpulseDecay, Theoretical: 2.8953},
	}
}

// LinearityLimits are the level linearity acceptance limits of IEC 61672-1:2013, in dB.
type LinearityLimits struct {
	// RangeClass1 and RangeClass2 limit the level linearity deviation over the whole linear
	// operating range, relative to the reference level: ±0.8 and ±1.1 dB (5.6.5, via
	// phonometry src/phonometry/compliance.py).
	RangeClass1, RangeClass2 Tolerance

	// StepClass1 and StepClass2 limit the deviation for any change of input level of 1 dB to
	// 10 dB: ±0.3 and ±0.5 dB (5.6.6, from memory, unverified).
	StepClass1, StepClass2 Tolerance

	// Uncertainty is the maximum-permitted expanded uncertainty of a linearity test: 0.30 dB
	// (Table B.1, via phonometry sound_level_meters.py).
	Uncertainty float64

	// StepUncertainty is the maximum-permitted expanded uncertainty of a level-step test:
	// 0.25 dB (via phonometry).
	StepUncertainty float64
}

// LevelLinearity returns the level linearity limits of IEC 61672-1:2013. The 2002 edition's
// limits (±1.1 and ±1.4 dB, uncertainty included) are not mixed in.
func LevelLinearity() LinearityLimits {
	return LinearityLimits{
		RangeClass1:     Tolerance{Lower: -0.8, Upper: 0.8},
		RangeClass2:     Tolerance{Lower: -1.1, Upper: 1.1},
		StepClass1:      Tolerance{Lower: -0.3, Upper: 0.3},
		StepClass2:      Tolerance{Lower: -0.5, Upper: 0.5},
		Uncertainty:     0.30,
		StepUncertainty: 0.25,
	}
}

// StabilityLimits are the limits on the change of the indication of a steady 1 kHz signal,
// dB: ±0.1 (class 1) and ±0.3 (class 2), both over a period of continuous operation (5.14.2)
// and after operation at a high level (5.15.2) (IEC 61672-1:2013, via phonometry
// src/phonometry/compliance.py).
func StabilityLimits() (class1, class2 Tolerance) {
	return Tolerance{Lower: -0.1, Upper: 0.1}, Tolerance{Lower: -0.3, Upper: 0.3}
}
