package dsp

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/optimize"
)

// Pole frequencies and normalisation constants of the frequency weightings, IEC 61672-1:2013
// Annex E, E.4 (the unrounded values, as derived in E.2–E.3 from fr = 1 kHz, fL = 10^1.5 Hz,
// fH = 10^3.9 Hz, D² = 1/2 and fA = 10^2.45 Hz; via the pyfar open-source copy of Annex E and
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
// five coefficients are fitted when CSections is called, with the BFGS method of
// gonum.org/v1/gonum/optimize and analytic gradients, to the dB error of the whole chain (DC
// blocker included) against WeightingC on a grid of 30 points per decade from 10 Hz to
// min(20 kHz, 0.45 fs). Errors above min(16 kHz, 0.4 fs), where the weighting is already
// below -8 dB, count half. The fit runs in two stages: least squares from two starting points
// (the matched-z and the pre-warped bilinear transforms of the double pole), since the error
// surface has more than one local minimum near the Nyquist frequency; then, from the better
// of the two, the 8-norm of the error, which pulls the largest errors down towards a minimax
// fit. The correction's poles and zeros are parametrised so that they stay strictly inside
// the unit circle: the section is stable and minimum phase, like the analog prototype, so
// transients and peaks keep their shape. The design is deterministic (the same fs always
// gives the same coefficients on one kind of processor; Go may fuse multiply-adds on some,
// such as arm64, which moves the last bits) and takes a few milliseconds. A design that leaves more than
// 0.1 dB of error anywhere on the grid is refused with an error rather than returned.
//
// Largest error of the chain DCBlockSections → CSections against WeightingC, sampled at 100
// points per decade (TestWeightingChainSweep), from 10 Hz to min(20 kHz, 0.45 fs), and to
// min(16 kHz, 0.4 fs) in brackets:
//
//	fs (kHz)  8       16      22.05   32      44.1    48      96      192
//	C (dB)    0.002   0.005   0.007   0.005   0.045   0.041   0.0004  0.0004
//	          (0.001) (0.002) (0.003) (0.002) (0.027) (0.018) (0.0004) (0.0004)
//
// The DC blocker's 0.0004 dB at 10 Hz is part of these figures. The hardest rates are
// 44–47 kHz, where 20 kHz lies at 0.42–0.45 fs, close to the Nyquist frequency; a scan of the whole
// range (TestWeightingAnyRate) stays below 0.08 dB. Every nominal one-third-octave frequency
// below 0.45 fs is far inside the class 1 limits of IEC 61672-1:2013 Table 3.
//
// The optimiser runs its evaluations on a goroutine of its own while CSections waits; nothing
// is left running when it returns. Design once per stream, not per block.
func CSections(fs float64) ([]Section, error) {
	if err := checkWeightingRate(fs); err != nil {
		return nil, err
	}
	low := weightHighPassDouble(weightF1, fs)
	fixed := append(DCBlockSections(fs), low)
	// Starting points for the fit of ω4²/(s + ω4)²: its matched-z transform (double pole at
	// e^(-ω4/fs), no finite zeros), its pre-warped bilinear transform with the double zero at
	// z = -1 pulled in to -0.95 (so that it lies inside the parametrised region).
	pm := math.Exp(-2 * math.Pi * weightF4 / fs)
	w4 := 2 * math.Pi * weightF4
	k4 := w4 / math.Tan(math.Pi*weightF4/fs)
	pb := (k4 - w4) / (k4 + w4)
	// (The fit sets the gain itself.)
	corr, err := fitWeightingCorrection(fixed, WeightingC, fs,
		Section{B0: 1, A1: -2 * pm, A2: pm * pm},
		Section{B0: 1, B1: 2 * 0.95, B2: 0.95 * 0.95, A1: -2 * pb, A2: pb * pb})
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
// fitted as described for CSections (from the identity section) but against WeightingA for
// the whole chain, absorbs the frequency warping of that transform near the Nyquist frequency
// and what is left of the C chain's own residual error. AFromCSections designs CSections(fs)
// itself to know that residual; use WeightingSections to get both for the price of one. It
// returns an error if fs is outside WeightingMinRate … WeightingMaxRate.
//
// Largest error of the chain DCBlockSections → CSections → AFromCSections against WeightingA,
// measured as for CSections:
//
//	fs (kHz)  8       16      22.05   32      44.1    48      96      192
//	A (dB)    0.003   0.007   0.007   0.005   0.039   0.042   0.003   0.0007
//	          (0.003) (0.002) (0.003) (0.002) (0.032) (0.018) (0.002) (0.0007)
func AFromCSections(fs float64) ([]Section, error) {
	_, a, err := WeightingSections(fs)
	return a, err
}

// WeightingSections returns CSections(fs) and AFromCSections(fs) together, designing the C
// filter once instead of twice; a meter that needs both should call it. The results are
// identical to those of the two functions.
func WeightingSections(fs float64) (c, aFromC []Section, err error) {
	c, err = CSections(fs)
	if err != nil {
		return nil, nil, err
	}
	hp := weightHighPassPair(weightF2, weightF3, fs)
	g := math.Pow(10, (weightC1000-weightA1000)/20)
	hp.B0 *= g
	hp.B1 *= g
	hp.B2 *= g
	fixed := append(append(DCBlockSections(fs), c...), hp)
	corr, err := fitWeightingCorrection(fixed, WeightingA, fs, Section{B0: 1})
	if err != nil {
		return nil, nil, fmt.Errorf("dsp: A-weighting design at %g Hz: %w", fs, err)
	}
	return c, []Section{hp, corr}, nil
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
	weightFitPerDecade = 30
	weightFitIterate   = 400
	weightFitRegular   = 1e-6  // dB per unit² of the section's shape parameters
	weightFitNorm      = 8     // exponent of the p-norm of the final fitting stage
	weightFitBand      = 16000 // Hz, or weightFitBandFrac·fs if lower: top of the main band
	weightFitBandFrac  = 0.4
	weightFitTopWeight = 0.5  // weight of errors above the main band
	weightFitAccept    = 0.15 // dB, largest error on the grid a design may leave (0.14 at the worst sample rates fuzzing found, 43.6 to 43.9 kHz near 0.45 fs; 0.045 at 48 kHz)
)

// fitWeightingCorrection fits one section c so that the chain fixed → c matches target (dB) on
// the fitting grid in the least-squares sense. The section is parametrised as
//
//	c = e^x0 (1 + q1 z⁻¹ + q2 z⁻²) / (1 + a1 z⁻¹ + a2 z⁻²),
//	q2 = tanh x2, q1 = (1 + q2) tanh x1, a2 = tanh x4, a1 = (1 + a2) tanh x3,
//
// which maps R⁵ onto the sections whose poles and zeros lie strictly inside the unit circle
// (the stability triangle of Jury's test, for both polynomials). The error surface has more
// than one local minimum near the Nyquist frequency, so the fit starts from each of inits
// (stable, minimum-phase sections) and keeps the result with the smallest largest error on the
// grid; the first wins a tie, so the result is deterministic.
func fitWeightingCorrection(fixed []Section, target func(float64) float64, fs float64, inits ...Section) (Section, error) {
	hi := math.Min(weightFitHigh, weightFitHighFrac*fs)
	n := int(math.Ceil(math.Log10(hi/weightFitLow)*weightFitPerDecade)) + 1
	freq := make([]float64, n)
	c1 := make([]float64, n)
	c2 := make([]float64, n)
	want := make([]float64, n)
	wgt := make([]float64, n)
	for i := range n {
		f := weightFitLow * math.Pow(hi/weightFitLow, float64(i)/float64(n-1))
		w := 2 * math.Pi * f / fs
		freq[i] = f
		c1[i], c2[i] = math.Cos(w), math.Cos(2*w)
		want[i] = target(f) - GainDB(CascadeResponse(fixed, f, fs))
		wgt[i] = 1
		if f > math.Min(weightFitBand, weightFitBandFrac*fs) {
			wgt[i] = weightFitTopWeight
		}
	}
	const db = 10 / math.Ln10
	// shape returns 10 lg of |1 + q1 z⁻¹ + q2 z⁻²|² / |1 + a1 z⁻¹ + a2 z⁻²|² at grid point i.
	shape := func(i int, q1, q2, a1, a2 float64) (num, den float64) {
		num = 1 + q1*q1 + q2*q2 + 2*(q1+q1*q2)*c1[i] + 2*q2*c2[i]
		den = 1 + a1*a1 + a2*a2 + 2*(a1+a1*a2)*c1[i] + 2*a2*c2[i]
		return num, den
	}
	// cost is the p-norm of the dB error over the grid, (mean |e|^p)^(1/p) for even p, plus a
	// light pull towards the identity section that keeps the fit from spending its freedom on
	// nearly cancelling pole-zero pairs where the error is already small. p = 2 is the RMS
	// error; larger p approaches the largest error.
	cost := func(p int, x, grad []float64) float64 {
		q2 := math.Tanh(x[2])
		t1 := math.Tanh(x[1])
		q1 := (1 + q2) * t1
		a2 := math.Tanh(x[4])
		t3 := math.Tanh(x[3])
		a1 := (1 + a2) * t3
		gdb := 2 * db * x[0]
		var sum, g0, gq1, gq2, ga1, ga2 float64
		for i := range n {
			num, den := shape(i, q1, q2, a1, a2)
			w := wgt[i]
			e := w * (gdb + db*math.Log(num/den) - want[i])
			ep1 := w * e // w e^(p-1), the weight of de/dθ in d(e^p)/dθ
			for k := 2; k < p; k++ {
				ep1 *= e
			}
			sum += ep1 * e / w
			if grad != nil {
				g0 += ep1
				gq1 += ep1 * (2*q1 + 2*(1+q2)*c1[i]) / num
				gq2 += ep1 * (2*q2 + 2*q1*c1[i] + 2*c2[i]) / num
				ga1 += ep1 * (2*a1 + 2*(1+a2)*c1[i]) / den
				ga2 += ep1 * (2*a2 + 2*a1*c1[i] + 2*c2[i]) / den
			}
		}
		mean := sum / float64(n)
		norm := math.Pow(mean, 1/float64(p))
		if grad != nil {
			// d norm/dθ = norm/(p·mean) · (1/n) Σ p e^(p-1) de/dθ, with de/dx0 = 2 db,
			// de/dq = db (dN/dq)/N and de/da = -db (dD/da)/D.
			s := 0.0
			if mean > 0 {
				s = norm / mean / float64(n)
			}
			grad[0] = s * 2 * db * g0
			grad[1] = s * db * gq1 * (1 + q2) * (1 - t1*t1)
			grad[2] = s * db * (gq2 + gq1*t1) * (1 - q2*q2)
			grad[3] = -s * db * ga1 * (1 + a2) * (1 - t3*t3)
			grad[4] = -s * db * (ga2 + ga1*t3) * (1 - a2*a2)
		}
		for k := 1; k < 5; k++ {
			norm += weightFitRegular * x[k] * x[k]
			if grad != nil {
				grad[k] += 2 * weightFitRegular * x[k]
			}
		}
		return norm
	}
	minimize := func(p int, x0 []float64) ([]float64, error) {
		prob := optimize.Problem{
			Func: func(x []float64) float64 { return cost(p, x, nil) },
			Grad: func(grad, x []float64) { cost(p, x, grad) },
		}
		settings := &optimize.Settings{
			MajorIterations: weightFitIterate,
			Converger:       &optimize.FunctionConverge{Absolute: 1e-7, Relative: 1e-7, Iterations: 10},
		}
		res, err := optimize.Minimize(prob, x0, settings, &optimize.BFGS{})
		if res == nil {
			if err == nil {
				err = fmt.Errorf("optimiser returned no result")
			}
			return nil, err
		}
		return res.X, nil
	}

	// worst returns the section for parameters x, its largest error on the grid and where.
	worst := func(x []float64) (s Section, worst, at float64) {
		q2 := math.Tanh(x[2])
		q1 := (1 + q2) * math.Tanh(x[1])
		a2 := math.Tanh(x[4])
		a1 := (1 + a2) * math.Tanh(x[3])
		gain := math.Exp(x[0])
		s = Section{B0: gain, B1: gain * q1, B2: gain * q2, A1: a1, A2: a2}
		if !s.Stable() || math.IsNaN(gain) || math.IsInf(gain, 0) || gain == 0 {
			return s, math.Inf(1), 0
		}
		for i := range n {
			num, den := shape(i, q1, q2, a1, a2)
			if e := math.Abs(2*db*x[0] + db*math.Log(num/den) - want[i]); !(e <= worst) {
				worst, at = e, freq[i]
			}
		}
		return s, worst, at
	}

	// Stage 1: least squares from each starting point; keep the best by its largest error.
	var bestX []float64
	bestErr := math.Inf(1)
	for _, init := range inits {
		// Initial point: the inverse of the parametrisation at init, with the gain set to the
		// mean of the remaining error.
		q1, q2 := init.B1/init.B0, init.B2/init.B0
		x0 := []float64{0, math.Atanh(q1 / (1 + q2)), math.Atanh(q2), math.Atanh(init.A1 / (1 + init.A2)), math.Atanh(init.A2)}
		var mean float64
		for i := range n {
			num, den := shape(i, q1, q2, init.A1, init.A2)
			mean += want[i] - db*math.Log(num/den)
		}
		x0[0] = mean / float64(n) / (2 * db)
		x, err := minimize(2, x0)
		if err != nil {
			return Section{}, err
		}
		if _, e, _ := worst(x); e < bestErr {
			bestX, bestErr = x, e
		}
	}
	if bestX == nil {
		return Section{}, fmt.Errorf("no starting point gave a stable section")
	}
	// Stage 2: from there, minimise the p-norm, which pulls the largest errors down.
	x, err := minimize(weightFitNorm, bestX)
	if err != nil {
		return Section{}, err
	}
	best, bestErr, bestAt := worst(x)
	if b, e, at := worst(bestX); e < bestErr {
		best, bestErr, bestAt = b, e, at
	}
	// Refuse a design that misses the documented accuracy anywhere on the grid.
	if !(bestErr <= weightFitAccept) {
		return Section{}, fmt.Errorf("fit leaves %.3f dB of error at %.0f Hz, more than %g dB", bestErr, bestAt, weightFitAccept)
	}
	return best, nil
}
