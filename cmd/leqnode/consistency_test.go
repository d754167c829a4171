package main

import (
	"math"
	"testing"
)

// consistencySignal is 150 s at 48 kHz (sensitivity -26 dBFS) holding every case the validity
// rule knows: steady noise at about 60 dB, a 94 dB calibrator tone (20 to 32 s), a 1 kHz
// machine at 80 dB that is sound (50 to 62 s), 5 s overloaded at 112 dB (80 to 85 s, above the
// configured 110 dB overload level) and 10 s under the measuring range (100 to 110 s).
func consistencySignal() []float32 {
	const fs = 48000
	amp := func(l float64) float64 { return math.Pow(10, (l-94-26)/20) } // peak; SPL = dBFS - S + 94 (AES17)
	x := make([]float32, 150*fs)
	var state uint64 = 7
	for i := range x {
		t := float64(i) / fs
		state = state*6364136223846793005 + 1442695040888963407
		u := float64(state>>11)/float64(1<<53)*2 - 1  // uniform [-1, 1): RMS 1/√3
		bg := amp(60) * u * math.Sqrt(3) / math.Sqrt2 // noise with the RMS of a 60 dB sine
		var v float64
		switch {
		case t >= 20 && t < 32:
			v = amp(94)*math.Sin(2*math.Pi*1000*t) + bg
		case t >= 50 && t < 62:
			v = amp(80)*math.Sin(2*math.Pi*1000*t) + bg
		case t >= 80 && t < 85:
			v = amp(112)*math.Sin(2*math.Pi*500*t) + bg
		case t >= 100 && t < 110:
			v = bg * math.Pow(10, -40.0/20) // about 20 dB: under 29 dB(A) self-noise + 5 dB
		default:
			v = bg
		}
		x[i] = float32(v)
	}
	return x
}

// TestOneTruth feeds one signal through `leqnode run` and reads the same quantities from the
// second records, the minute records, `leqnode export`, the status page's JSON, the metrics and
// the report: the numbers agree to the rounding and carry the same names. Expected minute levels
// are the energy mean of the counted seconds written out here (ISO 1996-1:2016, 3.1.7), with the
// rule of "Which seconds count" (docs/measuring.md) applied by hand.
func TestOneTruth(t *testing.T) {
	r := oneTruthRun(t)
	byMinute := checkMinutesByHand(t, r)
	checkExportedMinutes(t, r)
	checkStatusPage(t, r)
	checkReportFromMinutes(t, r, byMinute)
}
