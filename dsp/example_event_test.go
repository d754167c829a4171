package dsp_test

import (
	"fmt"
	"math"

	"github.com/leqnode/leqnode/dsp"
)

// A two-second 1 kHz tone of 80 dB in silence, through an event detector with a 70 dB
// threshold: the event's duration, LAFmax and sound exposure level.
func ExampleEventDetector() {
	const fs = 48000
	cfg := dsp.EventConfig{SensitivityDBFS: -26, Threshold: 70, Hysteresis: 5, Hold: 0.5, MaxDuration: 60}
	d, err := dsp.NewEventDetector(cfg, fs)
	if err != nil {
		fmt.Println(err)
		return
	}
	amp := math.Pow(10, (80-94-26)/20.0) // 80 dB at -26 dBFS sensitivity
	x := make([]float32, 5*fs)
	for i := fs; i < 3*fs; i++ {
		x[i] = float32(amp * math.Sin(2*math.Pi*1000*float64(i)/fs))
	}
	for i := 0; i < len(x); i += 480 { // 10 ms blocks, as a capture loop delivers them
		d.Process(x[i : i+480])
	}
	var e dsp.Event
	for d.Next(&e) {
		fmt.Printf("%.2f s, LAFmax %.1f dB, LAE %.1f dB\n", e.Duration, e.LAFmax, e.LAE)
	}
	// Output: 2.42 s, LAFmax 80.0 dB, LAE 83.0 dB
}
