package dsp

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/optimize"
)

// Pole frequencies and normalisation constants of the frequency weightings, IEC 61672-1:2013
// Annex E, E.4 (the unrounded values, as derived in E.2–E.3 from fr = 1 kHz, fL = 10^1.5 Hz,
// fH = 10^3.9 Hz, D² = 1/2 and fA = 10^2.45 Hz; via the pyfar transcription of Annex E and
// recomputed from that derivation).
const (
	weightF1    = 20.598997 // Hz, double real pole of C and A (low side)
	weightF2    = 107.65265 // Hz, single real pole of A
	weightF3    = 737.86223 // Hz, single real pole of A
	weightF4    = 12194.217 // Hz, double real pole of C and A (high side)
	weightC1000 = -0.062    // dB, C-weighting of the unnormalised curve at 1 kHz (E.6)
	weightA1000 = -2.000    // dB, A-weighting of the unnormalised curve at 1 kHz (E.6)
)

// Sample-rate range of the digital weighting filters.
const (
	WeightingMinRate = 8000   // Hz, lowest sample rate CSections and AFromCSections design for
	WeightingMaxRate = 192000 // Hz, highest sample rate CSections and AFromCSections design for
)

// DCBlockCorner is the -3 dB corner, in hertz, of the DC-blocking high-pass returned by
// DCBlockSections: a second-order Butterworth high-pass whose gain is
//
//	|H(f)|² = f⁴ / (f⁴ + fc⁴),
//
// so it costs 10 lg(1 + (fc/f)⁴) dB: 0.0004 dB at 10 Hz, 0.04 dB at 3 Hz, 3.01 dB at 1 Hz.
// The trade-off: a lower corner lets more of a microphone's slow offset drift through and takes
// longer to settle (the step response decays with a time constant of √2/(2π fc) ≈ 0.23 s, so
// levels read after construction need about 2 s to be clean of a DC offset); a higher corner
// costs accuracy at 10 Hz, where every weighting is held to 0.1 dB of its analytic curve and
// the blocker's budget is 0.01 dB (reached at fc ≈ 2.2 Hz). Its phase shift also touches slow
// transients: it raises the C-weighted peak of one cycle of 31.5 Hz (IEC 61672-1:2013 Table 5)
// by 0.18 dB, to 2.69 dB above LC against the table's 2.5 dB and class 1 limits of ±2 dB; the
// raise scales with fc.
const DCBlockCorner = 1.0

// WeightingA returns the A-weighting of IEC 61672-1:2013 at frequency f (Hz), in decibels:
//
//	A(f) = 20 lg[ f4² f⁴ / ((f² + f1²) (f² + f2²)^½ (f² + f3²)^½ (f² + f4²)) ] - A1000
//
// with f1 = 20.598997 Hz, f2 = 107.65265 Hz, f3 = 737.86223 Hz, f4 = 12194.217 Hz and
// A1000 = -2.000 dB (Annex E, formulas E.6 and E.4). The value at 1 kHz is +0.0003 dB; the
// design goals of Table 3 are this function at the exact frequencies 1000·10^(n/10) Hz,
// rounded to 0.1 dB. WeightingA(0) is -Inf.
func WeightingA(f float64) float64 {
	f2 := f * f
	num := weightF4 * weightF4 * f2 * f2
	den := (f2 + weightF1*weightF1) * math.Sqrt((f2+weightF2*weightF2)*(f2+weightF3*weightF3)) *
		(f2 + weightF4*weightF4)
	return 20*math.Log10(num/den) - weightA1000
}

// WeightingC returns the C-weighting of IEC 61672-1:2013 at frequency f (Hz), in decibels:
//
//	C(f) = 20 lg[ f4² f² / ((f² + f1²) (f² + f4²)) ] - C1000
//
// with f1 = 20.598997 Hz, f4 = 12194.217 Hz and C1000 = -0.062 dB (Annex E, formulas E.1
// and E.4). The value at 1 kHz is +0.0001 dB. WeightingC(0) is -Inf.
func WeightingC(f float64) float64 {
	f2 := f * f
	num := weightF4 * weightF4 * f2
	den := (f2 + weightF1*weightF1) * (f2 + weightF4*weightF4)
	return 20*math.Log10(num/den) - weightC1000
}

// DCBlockSections returns the DC-blocking high-pass that heads every weighting chain: one
// second-order Butterworth section with its corner at DCBlockCorner (1 Hz), designed by the
// bilinear transform with the corner pre-warped. Its zeros sit exactly at z = 1, so a constant
// input decays to zero; a microphone's DC offset therefore never reads as sound. Alone, it is
// the Z-weighting of the meter: it costs under 0.001 dB from 10 Hz up, well inside the
// IEC 61672-1:2013 Table 3 class 1 limits for Z.
//
// At 192 kHz the poles lie 2·10⁻⁵ inside the unit circle: the coefficients and the filter state
// need float64, as Section and Cascade keep them. DCBlockSections panics if fs is not a finite
// rate above 100 Hz.
func DCBlockSections(fs float64) []Section {
	if !(fs > 100) || math.IsInf(fs, 1) {
		panic(fmt.Sprintf("dsp: DCBlockSections: sample rate %v Hz is not a usable rate", fs))
	}
	// Bilinear transform of s² / (s² + √2 ωc s + ωc²), pre-warped so that the corner is exact:
	// with k = tan(π fc / fs), the denominator is (1 + √2 k + k²) + 2(k² - 1) z⁻¹ + (1 - √2 k + k²) z⁻².
	k := math.Tan(math.Pi * DCBlockCorner / fs)
	a0 := 1 + math.Sqrt2*k + k*k
	g := 1 / a0
	return []Section{{
		B0: g, B1: -2 * g, B2: g,
		A1: 2 * (k*k - 1) / a0,
		A2: (1 - math.Sqrt2*k + k*k) / a0,
	}}
}

// CSections returns the C-weighting filter for sample rate fs, to be applied after
// DCBlockSections: the chain DCBlockSections(fs) followed by CSections(fs) has the response
// WeightingC. It returns an error if fs is outside WeightingMinRate … WeightingMaxRate.
//
// Method: the low-frequency factor s²/(s + ω1)² of the analog prototype (IEC 61672-1:2013
// Annex E, E.1) becomes one section by the bilinear transform, pre-warped at f1; below 1 kHz it
// is within 0.0004 dB of the analog factor at 8 kHz and closer at higher rates. The
// high-frequency factor ω4²/(s + ω4)² cannot be mapped so simply: its double pole at 12.2 kHz
// is cramped against the Nyquist frequency, and a plain bilinear design reads 0.55 dB low at
// 8 kHz and 6.4 dB low at 16 kHz at fs = 48 kHz. It is replaced by a correction section whose
// five coefficients are fitted when CSections is called, by BFGS minimisation
// (gonum.org/v1/gonum/optimize) of the mean squared dB error of the whole chain (DC blocker
// included) against WeightingC on a grid of 60 points per decade from 10 Hz to
// min(20 kHz, 0.45 fs). The correction's poles and zeros are parametrised so that they stay
// strictly inside the unit circle: the section is stable and minimum phase, like the analog
// prototype, so transients and peaks keep their shape. The fit starts from the matched-z
// transform of the double pole; it is deterministic (the same fs always gives the same
// coefficients) and takes a few milliseconds. A design that leaves more than 0.1 dB of error
// anywhere on the grid is refused with an error rather than returned.
//
// Largest error of the chain DCBlockSections → CSections against WeightingC, 10 Hz to
// min(20 kHz, 0.45 fs), 100 points per decade (TestWeightingChainSweep):
//
//	fs (kHz)   8      16     22.05  32     44.1   48     96     192
//	C (dB)     0.002  0.005  0.007  0.004  0.036  0.057  0.0004 0.0007
//
// At 48 kHz the error is 0.017 dB up to 16 kHz; the largest errors sit at the top of the
// range, where the weighting itself is -11 dB. Every nominal one-third-octave frequency below
// 0.45 fs is far inside the class 1 limits of IEC 61672-1:2013 Table 3.
//
// The optimiser runs its evaluations on a goroutine of its own while CSections waits; nothing
// is left running when it returns. Design once per stream, not per block.
func CSections(fs float64) ([]Section, error) {
	if err := checkWeightingRate(fs); err != nil {
		return nil, err
	}
	low := weightHighPassDouble(weightF1, fs)
	fixed := append(DCBlockSections(fs), low)
	p := math.Exp(-2 * math.Pi * weightF4 / fs)
	init := Section{B0: (1 - p) * (1 - p), A1: -2 * p, A2: p * p}
	corr, err := fitWeightingCorrection(fixed, WeightingC, fs, init)
	if err != nil {
		return nil, fmt.Errorf("dsp: C-weighting design at %g Hz: %w", fs, err)
	}
	return []Section{low, corr}, nil
}

// AFromCSections returns the sections that turn the output of CSections into an A-weighted
// signal, so that a meter computes Z, C and A in one chain:
//
//	input → DCBlockSections (Z) → CSections (C) → AFromCSections (A)
//
// The analog relation is A = C · s²/((s + ω2)(s + ω3)) · 10^((C1000 - A1000)/20) (IEC
// 61672-1:2013 Annex E, E.1 and E.6). The two first-order high-passes at f2 and f3 become one
// section by the bilinear transform, each pole pre-warped; a second, correction section,
// fitted as described for CSections but against WeightingA for the whole chain, absorbs the
// frequency warping of that transform near the Nyquist frequency and what is left of the C
// chain's own residual error. AFromCSections designs CSections(fs) itself to know that
// residual, so it costs about twice as much as CSections. It returns an error if fs is
// outside WeightingMinRate … WeightingMaxRate.
//
// Largest error of the chain DCBlockSections → CSections → AFromCSections against WeightingA,
// measured as for CSections:
//
//	fs (kHz)   8      16     22.05  32     44.1   48     96     192
//	A (dB)     0.003  0.004  0.006  0.003  0.029  0.048  0.002  0.001
func AFromCSections(fs float64) ([]Section, error) {
	c, err := CSections(fs)
	if err != nil {
		return nil, err
	}
	hp := weightHighPassPair(weightF2, weightF3, fs)
	g := math.Pow(10, (weightC1000-weightA1000)/20)
	hp.B0 *= g
	hp.B1 *= g
	hp.B2 *= g
	fixed := append(append(DCBlockSections(fs), c...), hp)
	corr, err := fitWeightingCorrection(fixed, WeightingA, fs, Section{B0: 1})
	if err != nil {
		return nil, fmt.Errorf("dsp: A-weighting design at %g Hz: %w", fs, err)
	}
	return []Section{hp, corr}, nil
}

func checkWeightingRate(fs float64) error {
	if !(fs >= WeightingMinRate && fs <= WeightingMaxRate) {
		return fmt.Errorf("dsp: sample rate %g Hz is outside the %d–%d Hz the weighting filters support: resample the input",
			fs, WeightingMinRate, WeightingMaxRate)
	}
	return nil
}

// weightHighPassDouble returns the bilinear transform of s²/(s + ω)², pre-warped at f:
// [k/(k+ω)]² (1 - z⁻¹)² / (1 - p z⁻¹)² with p = (k - ω)/(k + ω), k = ω / tan(π f / fs):
// a high-pass with a double zero at DC and a double real pole.
func weightHighPassDouble(f, fs float64) Section {
	w := 2 * math.Pi * f
	k := w / math.Tan(math.Pi*f/fs)
	g := k / (k + w)
	p := 1 - 2*w/(k+w) // = (k - ω)/(k + ω), written to keep precision when ω ≪ k
	return Section{B0: g * g, B1: -2 * g * g, B2: g * g, A1: -2 * p, A2: p * p}
}

// weightHighPassPair returns the bilinear transform of s²/((s + ωa)(s + ωb)), each pole
// pre-warped at its own frequency.
func weightHighPassPair(fa, fb, fs float64) Section {
	wa, wb := 2*math.Pi*fa, 2*math.Pi*fb
	ka := wa / math.Tan(math.Pi*fa/fs)
	kb := wb / math.Tan(math.Pi*fb/fs)
	ga, gb := ka/(ka+wa), kb/(kb+wb)
	pa, pb := 1-2*wa/(ka+wa), 1-2*wb/(kb+wb)
	g := ga * gb
	return Section{B0: g, B1: -2 * g, B2: g, A1: -(pa + pb), A2: pa * pb}
}

// Fitting grid and limits for the weighting correction sections.
const (
	weightFitLow       = 10.0  // Hz
	weightFitHigh      = 20000 // Hz, or weightFitHighFrac·fs if lower
	weightFitHighFrac  = 0.45
	weightFitPerDecade = 60
	weightFitIterate   = 400
	weightFitRegular   = 1e-6 // dB² per unit² of the section's shape parameters
	weightFitAccept    = 0.1  // dB, largest error on the grid a design may leave
)

// fitWeightingCorrection fits one section c so that the chain fixed → c matches target (dB) on the
// fitting grid in the least-squares sense, starting from init (which must be stable and
// minimum phase). The section is parametrised as
//
//	c = e^x0 (1 + q1 z⁻¹ + q2 z⁻²) / (1 + a1 z⁻¹ + a2 z⁻²),
//	q2 = tanh x2, q1 = (1 + q2) tanh x1, a2 = tanh x4, a1 = (1 + a2) tanh x3,
//
// which maps R⁵ onto the sections whose poles and zeros lie strictly inside the unit circle
// (the stability triangle of Jury's test, for both polynomials).
func fitWeightingCorrection(fixed []Section, target func(float64) float64, fs float64, init Section) (Section, error) {
	hi := math.Min(weightFitHigh, weightFitHighFrac*fs)
	n := int(math.Ceil(math.Log10(hi/weightFitLow)*weightFitPerDecade)) + 1
	c1 := make([]float64, n)
	c2 := make([]float64, n)
	want := make([]float64, n)
	for i := range n {
		f := weightFitLow * math.Pow(hi/weightFitLow, float64(i)/float64(n-1))
		w := 2 * math.Pi * f / fs
		c1[i], c2[i] = math.Cos(w), math.Cos(2*w)
		want[i] = target(f) - GainDB(CascadeResponse(fixed, f, fs))
	}
	const db = 10 / math.Ln10
	eval := func(x, grad []float64) float64 {
		q2 := math.Tanh(x[2])
		t1 := math.Tanh(x[1])
		q1 := (1 + q2) * t1
		a2 := math.Tanh(x[4])
		t3 := math.Tanh(x[3])
		a1 := (1 + a2) * t3
		gdb := 2 * db * x[0]
		var sum, g0, gq1, gq2, ga1, ga2 float64
		for i := range n {
			// |1 + q1 z⁻¹ + q2 z⁻²|² and |1 + a1 z⁻¹ + a2 z⁻²|² at z = e^{jω}.
			num := 1 + q1*q1 + q2*q2 + 2*(q1+q1*q2)*c1[i] + 2*q2*c2[i]
			den := 1 + a1*a1 + a2*a2 + 2*(a1+a1*a2)*c1[i] + 2*a2*c2[i]
			e := gdb + db*math.Log(num/den) - want[i]
			sum += e * e
			if grad != nil {
				g0 += e
				gq1 += e * (2*q1 + 2*(1+q2)*c1[i]) / num
				gq2 += e * (2*q2 + 2*q1*c1[i] + 2*c2[i]) / num
				ga1 += e * (2*a1 + 2*(1+a2)*c1[i]) / den
				ga2 += e * (2*a2 + 2*a1*c1[i] + 2*c2[i]) / den
			}
		}
		if grad != nil {
			// d(sum)/dθ = Σ 2 e de/dθ; de/dq = db (dN/dq)/N, de/da = -db (dD/da)/D.
			gq1 *= 2 * db
			gq2 *= 2 * db
			ga1 *= -2 * db
			ga2 *= -2 * db
			inv := 1 / float64(n)
			grad[0] = 2 * g0 * 2 * db * inv
			grad[1] = gq1 * (1 + q2) * (1 - t1*t1) * inv
			grad[2] = (gq2 + gq1*t1) * (1 - q2*q2) * inv
			grad[3] = ga1 * (1 + a2) * (1 - t3*t3) * inv
			grad[4] = (ga2 + ga1*t3) * (1 - a2*a2) * inv
		}
		// A light pull towards the identity section keeps the fit from spending its freedom on
		// nearly cancelling pole-zero pairs where the error is already small.
		sum /= float64(n)
		for k := 1; k < 5; k++ {
			sum += weightFitRegular * x[k] * x[k]
			if grad != nil {
				grad[k] += 2 * weightFitRegular * x[k]
			}
		}
		return sum
	}
	// Initial point: the inverse of the parametrisation at init.
	g := init.B0
	x0 := []float64{
		math.Log(g),
		math.Atanh((init.B1 / g) / (1 + init.B2/g)),
		math.Atanh(init.B2 / g),
		math.Atanh(init.A1 / (1 + init.A2)),
		math.Atanh(init.A2),
	}
	// Start the gain at the mean of the remaining error.
	var mean float64
	for i := range n {
		q1, q2 := init.B1/g, init.B2/g
		num := 1 + q1*q1 + q2*q2 + 2*(q1+q1*q2)*c1[i] + 2*q2*c2[i]
		den := 1 + init.A1*init.A1 + init.A2*init.A2 + 2*(init.A1+init.A1*init.A2)*c1[i] + 2*init.A2*c2[i]
		mean += want[i] - db*math.Log(num/den)
	}
	x0[0] = mean / float64(n) / (2 * db)

	prob := optimize.Problem{
		Func: func(x []float64) float64 { return eval(x, nil) },
		Grad: func(grad, x []float64) { eval(x, grad) },
	}
	settings := &optimize.Settings{
		MajorIterations: weightFitIterate,
		Converger:       &optimize.FunctionConverge{Absolute: 1e-14, Relative: 1e-12, Iterations: 20},
	}
	res, err := optimize.Minimize(prob, x0, settings, &optimize.BFGS{})
	if err != nil && res == nil {
		return Section{}, err
	}
	x := res.X
	q2 := math.Tanh(x[2])
	q1 := (1 + q2) * math.Tanh(x[1])
	a2 := math.Tanh(x[4])
	a1 := (1 + a2) * math.Tanh(x[3])
	gain := math.Exp(x[0])
	s := Section{B0: gain, B1: gain * q1, B2: gain * q2, A1: a1, A2: a2}
	if !s.Stable() || math.IsNaN(gain) || math.IsInf(gain, 0) {
		return Section{}, fmt.Errorf("fitted correction section %+v is not stable", s)
	}
	// Refuse a design that misses the documented accuracy anywhere on the grid.
	for i := range n {
		f := weightFitLow * math.Pow(hi/weightFitLow, float64(i)/float64(n-1))
		if e := GainDB(s.Response(f, fs)) - want[i]; !(math.Abs(e) <= weightFitAccept) {
			return Section{}, fmt.Errorf("fit leaves %.3f dB of error at %.0f Hz, more than %g dB", e, f, weightFitAccept)
		}
	}
	return s, nil
}
