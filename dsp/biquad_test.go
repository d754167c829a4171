package dsp

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestCascadeHighPassKernels checks that Process, which runs sections with the numerator
// B0·(1 - z⁻¹)² through highPass2 and highPass1, computes the same bits as Step, the general
// transposed direct form II, for the meter's chains (DC blocker alone, C, A from C, and the DC
// blocker with a microphone correction) at several sample rates, in blocks of several sizes.
func TestCascadeHighPassKernels(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	x := make([]float64, 5000)
	for i := range x {
		x[i] = rng.NormFloat64() * math.Pow(10, float64(i%7-3))
	}
	corr := Section{B0: 1.01, B1: -0.3, B2: 0.05, A1: -0.29, A2: 0.04}
	for _, fs := range []float64{8000, 44100, 48000, 192000} {
		c, a, err := WeightingSections(fs)
		if err != nil {
			t.Fatal(err)
		}
		chains := map[string][]Section{"dc": DCBlockSections(fs), "C": c, "A": a, "dc+correction": append(DCBlockSections(fs), corr)}
		for name, sec := range chains {
			if !highPassNumerator(sec[0]) {
				t.Fatalf("%g Hz, %s: the first section %+v does not have the numerator B0·(1 - z⁻¹)²", fs, name, sec[0])
			}
			for _, block := range []int{1, 3, 256} {
				p, q := NewCascade(sec...), NewCascade(sec...)
				for i := 0; i < len(x); i += block {
					blk := append([]float64(nil), x[i:min(i+block, len(x))]...)
					p.Process(blk)
					for j, v := range x[i:min(i+block, len(x))] {
						if y := q.Step(v); math.Float64bits(y) != math.Float64bits(blk[j]) {
							t.Fatalf("%g Hz, %s, blocks of %d, sample %d: Process %v, Step %v", fs, name, block, i+j, blk[j], y)
						}
					}
				}
			}
		}
	}
	if highPassNumerator(corr) || highPassNumerator(Section{B0: 1}) {
		t.Error("a general section passes for a high-pass numerator")
	}
}

// TestCascadeProcessTo checks that processTo gives the bits of a copy, Process and a sum of
// squares in order, for the meter's chains and for longer ones (the general path), in place and
// out of place, in blocks of even and odd lengths.
func TestCascadeProcessTo(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	x := make([]float64, 3000)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	c, a, err := WeightingSections(48000)
	if err != nil {
		t.Fatal(err)
	}
	corr := Section{B0: 1.01, B1: -0.3, B2: 0.05, A1: -0.29, A2: 0.04}
	chains := map[string][]Section{"dc": DCBlockSections(48000), "C": c, "A": a,
		"dc+correction": append(DCBlockSections(48000), corr), "dc+2 corrections": append(DCBlockSections(48000), corr, corr),
		"correction": {corr}}
	for name, sec := range chains {
		for k, inPlace := range []bool{false, true, false, true} {
			size := 256 // even and odd blocks: the kernels take two samples per turn
			if k >= 2 {
				size = 7
			}
			p, q := NewCascade(sec...), NewCascade(sec...)
			for i := 0; i < len(x); i += size {
				src := x[i:min(i+size, len(x))]
				want := append([]float64(nil), src...)
				q.Process(want)
				var wantSum float64
				for _, v := range want {
					wantSum += v * v
				}
				got := make([]float64, len(src))
				var sum float64
				if inPlace {
					copy(got, src)
					sum = p.processTo(got, got)
				} else {
					sum = p.processTo(got, src)
				}
				for j := range got {
					if math.Float64bits(got[j]) != math.Float64bits(want[j]) {
						t.Fatalf("%s, in place %v, sample %d: %v, want %v", name, inPlace, i+j, got[j], want[j])
					}
				}
				if math.Float64bits(sum) != math.Float64bits(wantSum) {
					t.Fatalf("%s, in place %v, block at %d: sum %v, want %v", name, inPlace, i, sum, wantSum)
				}
			}
		}
	}
}
