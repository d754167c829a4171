package dsp

import "math"

// The meter's per-sample loops, written for the Go compiler: each keeps few values in
// registers, and the updates of extremes, which most samples do not make, leave the inner loop
// (a branch out and back) instead of being merged into it, where the register allocator would
// shuffle registers on every sample. The arithmetic, and the order of every sum, is that of a
// plain loop over the samples, so the results are the same to the bit.

// convertRaw converts x to float64 into z (len(z) ≥ len(x)) and returns the raw extremes lo and
// hi, the count of clipped samples (ClipThreshold) and the sum of x, updating the extremes and
// count given. A NaN sample is converted and summed but counts neither as an extreme nor as
// clipped.
//
// A sample inside [lb, ub], where ub is the smaller of hi and the largest float32 below
// ClipThreshold and lb the mirror image, changes neither extreme nor the count: the inner loop
// tests only that.
func convertRaw(z []float64, x []float32, lo, hi float32, clipped int64) (float32, float32, int64, float64) {
	const below = float32(ClipThreshold - 0x1p-24) // the largest float32 below ClipThreshold
	z = z[:len(x)]
	var sum float64
	ub, lb := min(hi, below), max(lo, -below)
	for i := 0; i < len(x); i++ {
		for ; i < len(x); i++ {
			v := x[i]
			if v > ub || v < lb {
				break
			}
			f := float64(v)
			z[i] = f
			sum += f
		}
		if i == len(x) {
			break
		}
		v := x[i]
		if v < lo {
			lo = v
		}
		if v > hi {
			hi = v
		}
		if v >= ClipThreshold || v <= -ClipThreshold {
			clipped++
		}
		f := float64(v)
		z[i] = f
		sum += f
		ub, lb = min(hi, below), max(lo, -below)
	}
	return lo, hi, clipped, sum
}

// convertHighPass1 is convertRaw followed by the cascade c's processTo(z, z) when c is a single
// section with a high-pass numerator (highPassNumerator): one loop converts each sample, keeps
// the raw statistics and runs the section, with the same bits as the two passes. It returns the
// raw statistics as convertRaw does, and Σy² of the filtered samples.
func convertHighPass1(c *Cascade, z []float64, x []float32, lo, hi float32, clipped int64) (float32, float32, int64, float64, float64) {
	const below = float32(ClipThreshold - 0x1p-24)
	z = z[:len(x)]
	s := &c.sec[0]
	s0, s1 := c.state[0][0], c.state[0][1]
	var sum, sumY float64
	ub, lb := min(hi, below), max(lo, -below)
	for i := 0; i < len(x); i++ {
		for ; i < len(x); i++ {
			v := x[i]
			if v > ub || v < lb {
				break
			}
			f := float64(v)
			sum += f
			g := s.B0 * f
			y := g + s0
			s0 = s1 - (g + g + s.A1*y)
			s1 = g - s.A2*y
			z[i] = y
			sumY += y * y
		}
		if i == len(x) {
			break
		}
		v := x[i]
		if v < lo {
			lo = v
		}
		if v > hi {
			hi = v
		}
		if v >= ClipThreshold || v <= -ClipThreshold {
			clipped++
		}
		f := float64(v)
		sum += f
		g := s.B0 * f
		y := g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		z[i] = y
		sumY += y * y
		ub, lb = min(hi, below), max(lo, -below)
	}
	c.state[0] = [2]float64{s0, s1}
	return lo, hi, clipped, sum, sumY
}

// timeWeighting holds the exponential time weightings of the squared A-weighted signal a²
// (IEC 61672-1:2013, 3.7 and 5.8), each the recursion
//
//	y ← y + k·(a² - y),  k = 1 - e^(-1/(fs·τ)),
//
// for Fast (f, τ = TauFast) and Slow (s, τ = TauSlow), and the Impulse detector of IEC 60651:1979
// (described in IEC 61672-1:2013 Annex C): r, the same recursion with τ = TauImpulseRise, held by
// d, which decays by e^(-1/(fs·TauImpulseDecay)) per sample and takes r wherever r exceeds it.
// With them it keeps the interval's extremes of f and s and the maximum of d.
type timeWeighting struct {
	f, s, r, d       float64
	kF, kS, kI, decI float64
	maxF, minF       float64
	maxS, minS, maxI float64
	fallF, fallS     float64 // fallBound of kF and kS over twBlock samples
}

// twBlock is the number of samples for which run decides at once whether a new minimum is
// possible.
const twBlock = 128

// twFloor is the smallest minimum for which run skips the tests for a new one: above it, every
// value the recursions take in a block is a normal float64, for which the bound of fallBound
// holds.
const twFloor = 1e-200

// newTimeWeighting returns the time weightings for sample rate fs, at rest.
func newTimeWeighting(fs float64) timeWeighting {
	t := timeWeighting{
		kF:   -math.Expm1(-1 / (fs * TauFast)),
		kS:   -math.Expm1(-1 / (fs * TauSlow)),
		kI:   -math.Expm1(-1 / (fs * TauImpulseRise)),
		decI: math.Exp(-1 / (fs * TauImpulseDecay)),
	}
	t.fallF, t.fallS = fallBound(t.kF, twBlock), fallBound(t.kS, twBlock)
	return t
}

// fallBound returns a factor b such that n steps of y ← y + k·(a² - y) from y0 ≥ 0, in float64
// with any a², stay above b·y0 whenever b·y0, computed in float64, exceeds twFloor.
//
// One step: a² ≥ 0, so a² - y ≥ -y, and rounding (monotone) keeps the difference d ≥ -y; for
// d ≥ 0 the step does not fall; else k·d rounds to at least -k·y·(1+u) and the sum y + k·d to at
// least y·(1 - k - 2u), u = 2⁻⁵³ (normal numbers). Hence y_n ≥ y0·(1 - k - 2u)ⁿ. The factor is
// computed with room for its own rounding (4u instead of 2u, and 10⁻¹² of the product).
func fallBound(k float64, n int) float64 {
	rho := 1 - k - 4e-16
	b := 1.0
	for range n {
		b *= rho
	}
	return b * (1 - 1e-12)
}

// run processes a span of A-weighted samples. A minimum set to -Inf is not tracked.
//
// The maximum of d needs no test on the samples where d decays: d then falls below its previous
// value, which maxI already holds, so only a sample where d takes r can raise it, and the first
// sample of an interval (maxI = -Inf), whose d is at least the decayed previous one, d·decI: run
// starts maxI there.
//
// The minima need no test in a block of twBlock samples at whose start f·fallF and s·fallS
// exceed the minima (fallBound): neither can then fall to its minimum within the block. A decay
// takes the tests on every sample; a level that moves above its minimum does not.
func (t *timeWeighting) run(a []float64) {
	if len(a) == 0 {
		return
	}
	if x := t.d * t.decI; x > t.maxI {
		t.maxI = x
	}
	for len(a) > 0 {
		n := min(len(a), twBlock)
		if t.f*t.fallF > max(t.minF, twFloor) && t.s*t.fallS > max(t.minS, twFloor) {
			t.runAbove(a[:n])
		} else {
			t.runMin(a[:n])
		}
		a = a[n:]
	}
}

// runMin is run's loop with the tests for new minima.
func (t *timeWeighting) runMin(a []float64) {
	f, s, r, d := t.f, t.s, t.r, t.d
	hiF, loF, hiS, loS, hiI := t.maxF, t.minF, t.maxS, t.minS, t.maxI
	for i := 0; i < len(a); i++ {
		for ; i < len(a); i++ {
			a2 := a[i] * a[i]
			f += t.kF * (a2 - f)
			s += t.kS * (a2 - s)
			r += t.kI * (a2 - r)
			d *= t.decI
			// A decay sets a new minimum on every sample, for seconds: the minima are kept in
			// the loop, the rarer changes leave it.
			if f < loF {
				loF = f
			}
			if s < loS {
				loS = s
			}
			if f > hiF || s > hiS || r > d {
				break
			}
		}
		if i == len(a) {
			break
		}
		if r > d {
			d = r
			if d > hiI {
				hiI = d
			}
		}
		if f > hiF {
			hiF = f
		}
		if s > hiS {
			hiS = s
		}
	}
	t.f, t.s, t.r, t.d = f, s, r, d
	t.maxF, t.minF, t.maxS, t.minS, t.maxI = hiF, loF, hiS, loS, hiI
}

// runAbove is run's loop for a block in which neither f nor s can reach its minimum.
func (t *timeWeighting) runAbove(a []float64) {
	f, s, r, d := t.f, t.s, t.r, t.d
	hiF, hiS, hiI := t.maxF, t.maxS, t.maxI
	for i := 0; i < len(a); i++ {
		for ; i < len(a); i++ {
			a2 := a[i] * a[i]
			f += t.kF * (a2 - f)
			s += t.kS * (a2 - s)
			r += t.kI * (a2 - r)
			d *= t.decI
			if f > hiF || s > hiS || r > d {
				break
			}
		}
		if i == len(a) {
			break
		}
		if r > d {
			d = r
			if d > hiI {
				hiI = d
			}
		}
		if f > hiF {
			hiF = f
		}
		if s > hiS {
			hiS = s
		}
	}
	t.f, t.s, t.r, t.d = f, s, r, d
	t.maxF, t.maxS, t.maxI = hiF, hiS, hiI
}
