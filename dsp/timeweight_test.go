package dsp

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestTimeWeightingKernel checks that the break-out loops of the meter compute the same bits
// as plain loops over the samples (the meter's arithmetic before issue 18: every comparison on
// every sample), for noise, level steps, decays to silence, impulses and a NaN, in spans of
// several lengths, with and without minima.
func TestTimeWeightingKernel(t *testing.T) {
	plain := func(tw *timeWeighting, a []float64) {
		for _, v := range a {
			a2 := v * v
			tw.f += tw.kF * (a2 - tw.f)
			tw.s += tw.kS * (a2 - tw.s)
			tw.r += tw.kI * (a2 - tw.r)
			tw.d *= tw.decI
			if tw.r > tw.d {
				tw.d = tw.r
			}
			if tw.f > tw.maxF {
				tw.maxF = tw.f
			}
			if tw.s > tw.maxS {
				tw.maxS = tw.s
			}
			if tw.d > tw.maxI {
				tw.maxI = tw.d
			}
			if tw.f < tw.minF {
				tw.minF = tw.f
			}
			if tw.s < tw.minS {
				tw.minS = tw.s
			}
		}
	}
	rng := rand.New(rand.NewPCG(5, 6))
	const n = 30000
	signals := map[string][]float64{}
	for _, name := range []string{"noise", "steps", "decay", "impulses", "nan"} {
		x := make([]float64, n)
		for i := range x {
			switch name {
			case "noise":
				x[i] = rng.NormFloat64()
			case "steps":
				x[i] = rng.NormFloat64() * math.Pow(10, float64((i/3000)%4))
			case "decay":
				if i < n/3 {
					x[i] = math.Sin(float64(i))
				}
			case "impulses":
				if i%4001 == 0 {
					x[i] = float64(1 + i/4001)
				}
			case "nan":
				x[i] = rng.NormFloat64()
				if i == n/2 {
					x[i] = math.NaN()
				}
			}
		}
		signals[name] = x
	}
	sameTW := func(a, b *timeWeighting) bool {
		x := []float64{a.f, a.s, a.r, a.d, a.maxF, a.minF, a.maxS, a.minS, a.maxI}
		y := []float64{b.f, b.s, b.r, b.d, b.maxF, b.minF, b.maxS, b.minS, b.maxI}
		for i := range x {
			if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
				return false
			}
		}
		return true
	}
	for name, x := range signals {
		for _, span := range []int{1, 5, 256, 4000} {
			for _, minima := range []bool{false, true} {
				lo := math.Inf(-1) // not tracked
				if minima {
					lo = math.Inf(1)
				}
				fs := 8000.0 // short time constants: the recursions move fast
				init := newTimeWeighting(fs)
				a, b := init, init
				for i := 0; i < len(x); i += span {
					if i%12000 < span { // a new interval
						for _, tw := range []*timeWeighting{&a, &b} {
							tw.maxF, tw.maxS, tw.maxI, tw.minF, tw.minS = math.Inf(-1), math.Inf(-1), math.Inf(-1), lo, lo
						}
					}
					blk := x[i:min(i+span, len(x))]
					a.run(blk)
					plain(&b, blk)
					if !sameTW(&a, &b) {
						t.Fatalf("%s, spans of %d, minima %v, at %d: kernel %+v, plain loop %+v", name, span, minima, i, a, b)
					}
				}
			}
		}
	}
}

// TestConvertRaw checks the raw-sample loop against a plain one: extremes, clipped count and sum
// to the bit, at and around the clip threshold, with NaN and infinities.
func TestConvertRaw(t *testing.T) {
	const below = float32(ClipThreshold - 0x1p-24)
	special := []float32{0, 0.5, -0.5, below, -below, ClipThreshold, -ClipThreshold, 1, -1, 1.5, -1.5,
		float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1)), 0.999, -0.999}
	rng := rand.New(rand.NewPCG(7, 8))
	x := make([]float32, 20000)
	for i := range x {
		if i%97 == 0 {
			x[i] = special[(i/97)%len(special)]
		} else {
			x[i] = float32(rng.NormFloat64() * 0.3 * float64(1+i/5000))
		}
	}
	for _, block := range []int{1, 7, 256} {
		lo, hi, clipped := float32(math.Inf(1)), float32(math.Inf(-1)), int64(0)
		plo, phi, pclipped := lo, hi, clipped
		var sum, psum float64
		z := make([]float64, block)
		for i := 0; i < len(x); i += block {
			blk := x[i:min(i+block, len(x))]
			var s float64
			lo, hi, clipped, s = convertRaw(z, blk, lo, hi, clipped)
			sum += s
			s = 0
			for j, v := range blk {
				if v < plo {
					plo = v
				}
				if v > phi {
					phi = v
				}
				if v >= ClipThreshold || v <= -ClipThreshold {
					pclipped++
				}
				if z[j] != float64(v) && v == v {
					t.Fatalf("block %d, sample %d: converted %v, want %v", block, i+j, z[j], v)
				}
				s += float64(v)
			}
			psum += s
		}
		if lo != plo || hi != phi || clipped != pclipped || math.Float64bits(sum) != math.Float64bits(psum) {
			t.Errorf("blocks of %d: lo %v hi %v clipped %d sum %v, plain loop %v %v %d %v", block, lo, hi, clipped, sum, plo, phi, pclipped, psum)
		}
	}
}

// TestConvertHighPass1 checks that the raw-sample loop with the DC blocker in it computes the
// same bits as convertRaw followed by the blocker's own pass, for the same samples as
// TestConvertRaw (NaN and infinities left out: they would make every later output NaN).
func TestConvertHighPass1(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	x := make([]float32, 20000)
	for i := range x {
		x[i] = float32(rng.NormFloat64() * 0.3 * float64(1+i/5000))
		if i%97 == 0 {
			x[i] = []float32{1, -1, ClipThreshold, -ClipThreshold, 0.999, 1.5}[(i/97)%6]
		}
	}
	for _, fs := range []float64{8000, 48000, 192000} {
		for _, block := range []int{1, 7, 256} {
			p, q := NewCascade(DCBlockSections(fs)...), NewCascade(DCBlockSections(fs)...)
			lo, hi, clipped := float32(math.Inf(1)), float32(math.Inf(-1)), int64(0)
			qlo, qhi, qclipped := lo, hi, clipped
			zp, zq := make([]float64, block), make([]float64, block)
			for i := 0; i < len(x); i += block {
				blk := x[i:min(i+block, len(x))]
				var sum, sumY, qsum, qsumY float64
				lo, hi, clipped, sum, sumY = convertHighPass1(p, zp, blk, lo, hi, clipped)
				qlo, qhi, qclipped, qsum = convertRaw(zq, blk, qlo, qhi, qclipped)
				qsumY = q.processTo(zq[:len(blk)], zq[:len(blk)])
				for j := range blk {
					if math.Float64bits(zp[j]) != math.Float64bits(zq[j]) {
						t.Fatalf("%g Hz, blocks of %d, sample %d: %v, two passes %v", fs, block, i+j, zp[j], zq[j])
					}
				}
				if lo != qlo || hi != qhi || clipped != qclipped || math.Float64bits(sum) != math.Float64bits(qsum) || math.Float64bits(sumY) != math.Float64bits(qsumY) {
					t.Fatalf("%g Hz, blocks of %d, at %d: %v %v %d %v %v, two passes %v %v %d %v %v", fs, block, i, lo, hi, clipped, sum, sumY, qlo, qhi, qclipped, qsum, qsumY)
				}
			}
		}
	}
}

// TestFallBound checks fallBound against the recursion itself: from many starting values, with
// a² = 0 (the steepest fall) and with random a², twBlock steps never end below fallBound·y0,
// for the Fast and Slow coefficients from 8 to 192 kHz; and the bound is close (the Fast level
// may fall by little more than the exact (1-k)ⁿ).
func TestFallBound(t *testing.T) {
	rng := rand.New(rand.NewPCG(15, 16))
	for _, fs := range []float64{8000, 44100, 48000, 192000} {
		tw := newTimeWeighting(fs)
		for _, c := range []struct {
			name string
			k, b float64
		}{{"Fast", tw.kF, tw.fallF}, {"Slow", tw.kS, tw.fallS}} {
			if exact := math.Pow(1-c.k, twBlock); !(c.b < exact && c.b > exact*(1-1e-9)) {
				t.Errorf("%g Hz, %s: bound %v, (1-k)^%d = %v", fs, c.name, c.b, twBlock, exact)
			}
			for range 20000 {
				y0 := math.Exp(rng.NormFloat64() * 100)
				y, z := y0, y0
				for range twBlock {
					y += c.k * (0 - y)
					a2 := y0 * math.Exp(rng.NormFloat64()*5)
					z += c.k * (a2 - z)
				}
				if lo := y0 * c.b; y <= lo || z <= lo {
					t.Fatalf("%g Hz, %s: from %v to %v (falling) and %v (random) in %d steps, below %v", fs, c.name, y0, y, z, twBlock, lo)
				}
			}
		}
	}
}
