package dsp_test

import (
	"fmt"
	"math"

	"github.com/leqnode/leqnode/dsp"
)

// A node feeds every captured block to the detector; when a calibrator's tone has been steady
// for 5 s and ends, the callback receives its level and frequency.
func ExampleCalibratorDetector() {
	const fs = 48000
	det, err := dsp.NewCalibratorDetector(dsp.CalibratorConfig{SampleRate: fs})
	if err != nil {
		fmt.Println(err)
		return
	}
	// 8 s of a 94 dB calibrator on a microphone of sensitivity -26 dBFS: a sine of
	// -26 dBFS (peak 10^(-26/20)), then 1 s of silence.
	block := make([]float32, fs/10)
	amp := math.Pow(10, -26.0/20)
	for b := range 90 {
		for i := range block {
			n := b*len(block) + i
			if n < 8*fs {
				block[i] = float32(amp * math.Sin(2*math.Pi*1000.4*float64(n)/fs))
			} else {
				block[i] = 0
			}
		}
		det.Process(block, func(d dsp.Detection) {
			fmt.Printf("tone %.2f Hz at %.2f dBFS, stable for %.2f s\n", d.FrequencyHz, d.LevelDBFS, d.Stable)
			fmt.Printf("sensitivity for a 94 dB calibrator: %.2f dBFS\n", d.LevelDBFS+94-94)
		})
	}
	// Output:
	// tone 1000.40 Hz at -26.00 dBFS, stable for 8.00 s
	// sensitivity for a 94 dB calibrator: -26.00 dBFS
}
