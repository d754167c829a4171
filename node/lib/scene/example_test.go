package scene_test

import (
	"fmt"
	"log"
	"math"

	"github.com/leqnode/leqnode/node/lib/scene"
)

// A node's-eye view of Harrowby Lane: five seconds of a 94 dB calibrator, then the street.
// The calibrator's RMS in dBFS is its level minus 94 plus the sensitivity, minus 3.01 dB for a
// sine's crest factor (AES17 puts a full-scale sine, not a full-scale RMS, at 0 dBFS).
func Example() {
	s, err := scene.New(scene.Config{Seed: 42, CalibratorSeconds: 5})
	if err != nil {
		log.Fatal(err)
	}
	buf := make([]float32, 48000)
	for sec := 0; sec < 8; sec++ {
		s.Read(buf)
		var ms float64
		for _, v := range buf {
			ms += float64(v) * float64(v)
		}
		ms /= float64(len(buf))
		// SPL = level in dBFS (AES17) - sensitivity + 94.
		fmt.Printf("second %d: %.1f dB\n", sec, 10*math.Log10(2*ms)+26+94)
	}
	for _, ev := range s.Events(0, 60*48000)[:3] {
		fmt.Printf("%s at %.1f s, %.1f dB\n", ev.Kind, float64(ev.Peak)/48000, ev.Level)
	}
	// Output:
	// second 0: 93.3 dB
	// second 1: 94.0 dB
	// second 2: 94.0 dB
	// second 3: 94.0 dB
	// second 4: 93.3 dB
	// second 5: 79.2 dB
	// second 6: 76.1 dB
	// second 7: 71.0 dB
	// car at 6.2 s, 65.1 dB
	// car at 5.6 s, 74.8 dB
	// car at 17.9 s, 70.9 dB
}
