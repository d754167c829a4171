package dsp_test

import (
	"fmt"
	"math"

	"github.com/leqnode/leqnode/dsp"
)

// Example_weightingChain builds the Z → C → A chain for 48 kHz and compares its response with
// the analytic A-weighting of IEC 61672-1:2013 Annex E at a few frequencies.
func Example_weightingChain() {
	const fs = 48000
	c, err := dsp.CSections(fs)
	if err != nil {
		fmt.Println(err)
		return
	}
	a, err := dsp.AFromCSections(fs)
	if err != nil {
		fmt.Println(err)
		return
	}
	chain := append(append(dsp.DCBlockSections(fs), c...), a...)
	for _, f := range []float64{31.5, 1000, 8000, 16000} {
		got := dsp.GainDB(dsp.CascadeResponse(chain, f, fs))
		want := dsp.WeightingA(f)
		fmt.Printf("A(%g Hz) = %.1f dB; digital chain within 0.1 dB: %v\n", f, want, math.Abs(got-want) < 0.1)
	}

	// Filtering: one cascade runs the whole chain in place, block by block.
	meter := dsp.NewCascade(chain...)
	block := make([]float64, 480)
	var sum float64
	for n := 0; n < 100; n++ { // 1 s in 10 ms blocks
		for i := range block {
			t := float64(n*len(block)+i) / fs
			block[i] = math.Sin(2 * math.Pi * 1000 * t)
		}
		meter.Process(block)
		if n >= 50 { // the last half second, after settling
			for _, y := range block {
				sum += y * y
			}
		}
	}
	level := 10 * math.Log10(2*sum/(50*480)) // dBFS: a full-scale sine is 0 dBFS (AES17)
	fmt.Printf("1 kHz full-scale sine, A-weighted, within 0.01 dB of 0 dBFS: %v\n", math.Abs(level) < 0.01)
	// Output:
	// A(31.5 Hz) = -39.5 dB; digital chain within 0.1 dB: true
	// A(1000 Hz) = 0.0 dB; digital chain within 0.1 dB: true
	// A(8000 Hz) = -1.1 dB; digital chain within 0.1 dB: true
	// A(16000 Hz) = -6.7 dB; digital chain within 0.1 dB: true
	// 1 kHz full-scale sine, A-weighted, within 0.01 dB of 0 dBFS: true
}
