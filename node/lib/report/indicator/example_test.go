package indicator_test

import (
	"fmt"

	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// Lden from the period levels of one day (Directive 2002/49/EC, Annex I).
func ExampleComposite() {
	lden := indicator.Composite([]float64{65, 62, 58}, []float64{12, 4, 8}, []float64{0, 5, 10})
	fmt.Printf("Lden = %.2f dB\n", lden)
	// Output: Lden = 66.55 dB
}

// A one-third-octave spectrum with a 1 kHz band 6 dB above both neighbours.
func ExampleTonal() {
	first := -3 // 500 Hz
	levels := []float64{50, 51, 52, 58, 52, 51}
	for _, t := range indicator.Tonal(first, levels) {
		fmt.Printf("%s Hz stands out by %.1f dB (margin %g dB)\n", t.Nominal, t.Above, t.Margin)
	}
	// Output: 1000 Hz stands out by 6.0 dB (margin 5 dB)
}
