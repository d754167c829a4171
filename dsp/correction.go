package dsp

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/optimize"
)

// CorrectionPoint is one row of a microphone or windscreen correction table: the correction in
// dB to add to levels at frequency FrequencyHz. A free-field correction of +2 dB at 8 kHz means
// the microphone reads 2 dB low there.
type CorrectionPoint struct {
	FrequencyHz  float64
	CorrectionDB float64
}

// Limits of correction tables.
const (
	// CorrectionMaxDB is the largest correction magnitude accepted, 20 dB. A microphone that
	// needs more is outside its specification.
	CorrectionMaxDB = 20.0

	// CorrectionMaxSections is the largest number of sections a fit uses: a low shelf, a high
	// shelf and up to six peaking sections.
	CorrectionMaxSections = 8

	// CorrectionAccept is the largest error, in dB, that a fit may leave on its grid against
	// the interpolated table; a table that cannot be fitted closer is refused.
	CorrectionAccept = 0.15

	// correctionGoal is the error at which the fit stops adding sections.
	correctionGoal = 0.03
)

// CorrectionFit is a correction filter and how well it matches its table.
type CorrectionFit struct {
	// Sections is the filter: apply it with MeterConfig.Correction.
	Sections []Section
	// MaxErrorDB and RMSErrorDB are the largest and the root-mean-square difference between
	// the filter's gain and the interpolated table, on the fitting grid.
	MaxErrorDB, RMSErrorDB float64
	// LowHz and HighHz bound the fitting grid.
	LowHz, HighHz float64
}

// CorrectionSections fits a filter to a correction table for sample rate fs: it returns
// FitCorrection(points, fs).Sections.
func CorrectionSections(points []CorrectionPoint, fs float64) ([]Section, error) {
	f, err := FitCorrection(points, fs)
	if err != nil {
		return nil, err
	}
	return f.Sections, nil
}

// FitCorrection fits a cascade of second-order sections whose gain follows a correction table.
//
// # Method
//
// The table is sorted by frequency and interpolated linearly in lg f (its end values hold
// beyond its ends), on a grid of 32 points per decade from max(10 Hz, lowest table frequency
// / 2) to min(20 kHz, 0.45 fs), to which the table's own frequencies are added; table points
// above 0.45 fs are outside the grid and so not followed. The filter starts as a gain, a low shelf and a high shelf (the shelving sections of
// the widely used audio-EQ cookbook formulas, slope 1, which are stable and minimum phase for
// every corner and gain); then, as long as the largest error exceeds 0.03 dB and fewer than
// CorrectionMaxSections sections are used, a peaking section (same cookbook, stable and
// minimum phase for every centre, gain and Q) is added at the frequency of the largest error.
// After every addition all parameters are fitted together by BFGS
// (gonum.org/v1/gonum/optimize, gradients by central differences from
// gonum.org/v1/gonum/diff/fd) to the least-squares dB error on the grid. Corners and centres
// are mapped into the grid's range and Q into 0.3 to 12 by smooth functions, so every
// parameter vector is a stable filter. The result is minimum phase, like a microphone's own
// response, so transients keep their shape, and the fit is deterministic.
//
// Residual error: a smooth table (a free-field correction, a windscreen's insertion loss)
// is followed within a few hundredths of a dB: for the test table of TestCorrectionSines (a
// 3 dB presence peak, a windscreen's 1.5 dB loss at the top, a low-frequency lift, given at
// the one-third-octave midbands) the largest error on the grid is 0.06 dB and the RMS error
// 0.03 dB at 48 kHz (0.03 and 0.006 dB at 16 kHz), and sines through the meter read within
// 0.2 dB of the shape. The fit takes about a second of one core: do it once at start-up, not
// per stream. As for the weighting design, the optimiser runs its evaluations on a goroutine
// of its own while FitCorrection waits; nothing is left running when it returns. FitCorrection refuses a fit that leaves more
// than CorrectionAccept (0.15 dB) anywhere on the grid, which happens for tables with steps
// or ripple finer than a third of an octave. The filter's gain below the grid follows the low
// shelf, so a table should start at 20 Hz or lower.
//
// The gain at 1 kHz is the table's value there. The sensitivity from a sound calibrator is
// measured at 1 kHz on the uncorrected signal, so a table that is not 0 dB at 1 kHz shifts
// every level by that amount; normalise tables to 0 dB at 1 kHz (as microphone correction
// tables usually are, common practice).
//
// Errors: no points, a frequency that is not positive and finite, a repeated frequency, a
// correction beyond ±CorrectionMaxDB, or a sample rate outside 8 to 192 kHz.
func FitCorrection(points []CorrectionPoint, fs float64) (CorrectionFit, error) {
	var fit CorrectionFit
	if !(fs >= WeightingMinRate && fs <= WeightingMaxRate) {
		return fit, fmt.Errorf("dsp: correction: sample rate %g Hz out of range: use %d to %d Hz", fs, WeightingMinRate, WeightingMaxRate)
	}
	if len(points) == 0 {
		return fit, errors.New("dsp: correction table is empty: give frequency and correction pairs, or none at all")
	}
	pts := append([]CorrectionPoint(nil), points...)
	sort.Slice(pts, func(i, j int) bool { return pts[i].FrequencyHz < pts[j].FrequencyHz })
	for i, p := range pts {
		if !(p.FrequencyHz > 0) || math.IsInf(p.FrequencyHz, 0) {
			return fit, fmt.Errorf("dsp: correction table: frequency %g Hz is not a positive number", p.FrequencyHz)
		}
		if !(math.Abs(p.CorrectionDB) <= CorrectionMaxDB) {
			return fit, fmt.Errorf("dsp: correction table: %g dB at %g Hz is beyond ±%g dB", p.CorrectionDB, p.FrequencyHz, CorrectionMaxDB)
		}
		if i > 0 && p.FrequencyHz == pts[i-1].FrequencyHz {
			return fit, fmt.Errorf("dsp: correction table: %g Hz appears twice: keep one row per frequency", p.FrequencyHz)
		}
	}
	lo := math.Max(10, pts[0].FrequencyHz/2)
	hi := math.Min(20000, 0.45*fs)
	if lo >= hi/2 {
		lo = hi / 2
	}
	fit.LowHz, fit.HighHz = lo, hi
	const perDecade = 32
	ng := int(math.Ceil(math.Log10(hi/lo)*perDecade)) + 1
	var grid []float64
	for i := range ng {
		grid = append(grid, lo*math.Pow(hi/lo, float64(i)/float64(ng-1)))
	}
	for _, p := range pts { // the table's own points are matched too
		if p.FrequencyHz > lo && p.FrequencyHz < hi {
			grid = append(grid, p.FrequencyHz)
		}
	}
	sort.Float64s(grid)
	n := len(grid)
	want := make([]float64, n)
	c1 := make([]float64, n)
	c2 := make([]float64, n)
	for i, f := range grid {
		want[i] = interpolateCorrection(pts, f)
		w := 2 * math.Pi * f / fs
		c1[i], c2[i] = math.Cos(w), math.Cos(2*w)
	}
	lgLo, lgHi := math.Log(lo), math.Log(hi)
	// Parameters: x[0] gain dB; low shelf (corner, gain); high shelf (corner, gain); then
	// peaking sections (centre, gain, Q).
	freqOf := func(u float64) float64 { return math.Exp(lgLo + (lgHi-lgLo)*sigmoid(u)) }
	freqParam := func(f float64) float64 {
		t := (math.Log(f) - lgLo) / (lgHi - lgLo)
		t = math.Min(math.Max(t, 1e-3), 1-1e-3)
		return math.Log(t / (1 - t))
	}
	qOf := func(v float64) float64 { return 0.3 + 11.7*sigmoid(v) }
	build := func(x []float64, dst []Section) []Section {
		dst = dst[:0]
		g := math.Pow(10, x[0]/20)
		dst = append(dst, shelfSection(false, freqOf(x[1]), x[2], fs), shelfSection(true, freqOf(x[3]), x[4], fs))
		for k := 5; k+2 < len(x); k += 3 {
			dst = append(dst, peakingSection(freqOf(x[k]), x[k+1], qOf(x[k+2]), fs))
		}
		dst[0].B0 *= g
		dst[0].B1 *= g
		dst[0].B2 *= g
		return dst
	}
	var scratch []Section
	errs := func(x []float64, out []float64) []float64 {
		scratch = build(x, scratch)
		out = out[:0]
		for i := range grid {
			// 10 lg of Π |N|²/|D|², with |b0 + b1 z⁻¹ + b2 z⁻²|² = b0² + b1² + b2²
			// + 2 (b0 b1 + b1 b2) cos ω + 2 b0 b2 cos 2ω on the unit circle.
			p := 1.0
			for _, s := range scratch {
				num := s.B0*s.B0 + s.B1*s.B1 + s.B2*s.B2 + 2*(s.B0*s.B1+s.B1*s.B2)*c1[i] + 2*s.B0*s.B2*c2[i]
				den := 1 + s.A1*s.A1 + s.A2*s.A2 + 2*(s.A1+s.A1*s.A2)*c1[i] + 2*s.A2*c2[i]
				p *= num / den
			}
			out = append(out, 10*math.Log10(p)-want[i])
		}
		return out
	}
	var ebuf []float64
	cost := func(x []float64) float64 {
		ebuf = errs(x, ebuf)
		var s float64
		for _, e := range ebuf {
			s += e * e
		}
		return s / float64(n)
	}
	worst := func(x []float64) (maxE, rms, at float64) {
		ebuf = errs(x, ebuf)
		var s float64
		for i, e := range ebuf {
			s += e * e
			if math.Abs(e) > maxE {
				maxE, at = math.Abs(e), grid[i]
			}
		}
		return maxE, math.Sqrt(s / float64(n)), at
	}
	x := []float64{interpolateCorrection(pts, 1000),
		freqParam(math.Min(100, hi/4)), 0, freqParam(math.Max(lo*4, math.Min(8000, hi/2))), 0}
	// BFGS with finite-difference gradients stops early when its line search fails on the
	// curved valleys of this problem; restarting it (a fresh Hessian estimate) from where it
	// stopped continues the descent. Restarts end when one gains less than 1e-7 relative.
	minimize := func(x []float64) []float64 {
		p := optimize.Problem{
			Func: cost,
			Grad: func(grad, x []float64) { fd.Gradient(grad, cost, x, &fd.Settings{Formula: fd.Central}) },
		}
		best := cost(x)
		for range 25 {
			res, _ := optimize.Minimize(p, x, &optimize.Settings{MajorIterations: 200,
				Converger: &optimize.FunctionConverge{Absolute: 1e-12, Relative: 1e-9, Iterations: 20}}, &optimize.BFGS{})
			if res == nil || !(res.F < best) {
				break
			}
			gain := (best - res.F) / best
			x, best = res.X, res.F
			if gain < 1e-7 {
				break
			}
		}
		return x
	}
	x = minimize(x)
	for {
		maxE, _, at := worst(x)
		if maxE <= correctionGoal || 2+(len(x)-5)/3 >= CorrectionMaxSections {
			break
		}
		// A peaking section at the largest error, with its sign, of moderate width.
		ebuf = errs(x, ebuf)
		i := sort.SearchFloat64s(grid, at)
		if i >= len(ebuf) {
			i = len(ebuf) - 1
		}
		x = append(x, freqParam(at), -ebuf[i], 0)
		x = minimize(x)
	}
	maxE, rms, _ := worst(x)
	fit.Sections = build(x, nil)
	fit.MaxErrorDB, fit.RMSErrorDB = maxE, rms
	for _, s := range fit.Sections {
		if !s.Stable() {
			return fit, errors.New("dsp: correction fit gave an unstable section (a defect): report the table")
		}
	}
	if maxE > CorrectionAccept {
		return fit, fmt.Errorf("dsp: correction table cannot be followed within %.2f dB (the best fit leaves %.2f dB): smooth it, or give fewer points closer than a third of an octave", CorrectionAccept, maxE)
	}
	return fit, nil
}

// interpolateCorrection returns the table's correction at f, linear in lg f between points and
// constant beyond the ends. pts must be sorted by frequency.
func interpolateCorrection(pts []CorrectionPoint, f float64) float64 {
	if f <= pts[0].FrequencyHz {
		return pts[0].CorrectionDB
	}
	last := pts[len(pts)-1]
	if f >= last.FrequencyHz {
		return last.CorrectionDB
	}
	i := sort.Search(len(pts), func(i int) bool { return pts[i].FrequencyHz > f })
	a, b := pts[i-1], pts[i]
	t := math.Log(f/a.FrequencyHz) / math.Log(b.FrequencyHz/a.FrequencyHz)
	return a.CorrectionDB + t*(b.CorrectionDB-a.CorrectionDB)
}

func sigmoid(u float64) float64 { return 1 / (1 + math.Exp(-u)) }

// peakingSection returns a peaking equaliser section of gain g dB at centre f0 with quality
// factor q (the audio-EQ cookbook formulas, bilinear transform with the centre pre-warped).
func peakingSection(f0, g, q, fs float64) Section {
	a := math.Pow(10, g/40)
	w := 2 * math.Pi * f0 / fs
	sn, cs := math.Sincos(w)
	alpha := sn / (2 * q)
	a0 := 1 + alpha/a
	return Section{
		B0: (1 + alpha*a) / a0, B1: -2 * cs / a0, B2: (1 - alpha*a) / a0,
		A1: -2 * cs / a0, A2: (1 - alpha/a) / a0,
	}
}

// shelfSection returns a low (high false) or high shelving section of gain g dB with corner
// f0 and slope 1 (the audio-EQ cookbook formulas).
func shelfSection(high bool, f0, g, fs float64) Section {
	a := math.Pow(10, g/40)
	w := 2 * math.Pi * f0 / fs
	sn, cs := math.Sincos(w)
	alpha := sn / 2 * math.Sqrt2 // slope S = 1: alpha = sin w / 2 · sqrt((A + 1/A)(1/S - 1) + 2)
	sa := 2 * math.Sqrt(a) * alpha
	var b0, b1, b2, a0, a1, a2 float64
	if !high {
		b0 = a * ((a + 1) - (a-1)*cs + sa)
		b1 = 2 * a * ((a - 1) - (a+1)*cs)
		b2 = a * ((a + 1) - (a-1)*cs - sa)
		a0 = (a + 1) + (a-1)*cs + sa
		a1 = -2 * ((a - 1) + (a+1)*cs)
		a2 = (a + 1) + (a-1)*cs - sa
	} else {
		b0 = a * ((a + 1) + (a-1)*cs + sa)
		b1 = -2 * a * ((a - 1) + (a+1)*cs)
		b2 = a * ((a + 1) + (a-1)*cs - sa)
		a0 = (a + 1) - (a-1)*cs + sa
		a1 = 2 * ((a - 1) - (a+1)*cs)
		a2 = (a + 1) - (a-1)*cs - sa
	}
	return Section{B0: b0 / a0, B1: b1 / a0, B2: b2 / a0, A1: a1 / a0, A2: a2 / a0}
}
