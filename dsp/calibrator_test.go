package dsp

import (
	"math"
	"math/rand/v2"
	"testing"
)

// calSignal builds a test recording: silence-free background noise, then a tone that fades in
// linearly over fade seconds, holds for hold seconds, then stops; the recording ends after
// tail seconds of background. Levels in dBFS (AES17: a sine of peak A reads 20 lg A dBFS);
// the noise is white Gaussian noise whose RMS is belowDB under the tone's RMS.
type calSignal struct {
	fs                     float64
	freq, levelDBFS        float64
	lead, fade, hold, tail float64
	belowDB                float64
	wobbleDB, wobbleHz     float64 // slow level modulation, dB peak to peak
	seed                   uint64
}

func (c calSignal) render() []float32 {
	n := int((c.lead + c.fade + c.hold + c.tail) * c.fs)
	x := make([]float32, n)
	amp := math.Pow(10, c.levelDBFS/20) // AES17: peak amplitude of a sine of that dBFS
	noiseRMS := amp / math.Sqrt2 * math.Pow(10, -c.belowDB/20)
	rng := rand.New(rand.NewPCG(c.seed, 7))
	for i := range x {
		t := float64(i) / c.fs
		g := 0.0
		switch {
		case t < c.lead:
		case t < c.lead+c.fade:
			g = (t - c.lead) / c.fade
		case t < c.lead+c.fade+c.hold:
			g = 1
		}
		if c.wobbleDB > 0 {
			g *= math.Pow(10, c.wobbleDB/40*math.Sin(2*math.Pi*c.wobbleHz*t))
		}
		v := g * amp * math.Sin(2*math.Pi*c.freq*t)
		if c.belowDB > 0 {
			v += noiseRMS * rng.NormFloat64()
		}
		x[i] = float32(v)
	}
	return x
}

func detectAll(t *testing.T, cfg CalibratorConfig, x []float32, block int) []Detection {
	t.Helper()
	d, err := NewCalibratorDetector(cfg)
	if err != nil {
		t.Fatal(err)
	}
	var out []Detection
	found := func(det Detection) { out = append(out, det) }
	for len(x) > 0 {
		n := min(block, len(x))
		d.Process(x[:n], found)
		x = x[n:]
	}
	d.Flush(found)
	return out
}

// TestCalibratorSensitivity checks the sensitivity obtained from calibrator recordings: a
// microphone of sensitivity S (dBFS for 94 dB SPL at 1 kHz, the MEMS data-sheet definition,
// Analog Devices AN-1112) produces L - 94 + S dBFS from a calibrator of level L, so the
// sensitivity derived from the detection, LevelDBFS + 94 - L, must give S back within 0.1 dB
// (the accuracy asked of the node, common practice). Calibrator levels 94 and 114 dB are the
// usual stated levels of IEC 60942 calibrators (from memory). Background noise 30 dB below
// adds 10 lg(1 + 10^-3) = 0.004 dB.
func TestCalibratorSensitivity(t *testing.T) {
	for _, tc := range []struct {
		name      string
		fs        float64
		sens, ref float64
		freq      float64
	}{
		{"94 dB at 48 kHz", 48000, -26, 94, 1000},
		{"114 dB at 48 kHz", 48000, -26, 114, 1000},
		{"94 dB, hot microphone, 44.1 kHz", 44100, -18.5, 94, 1000},
		{"114 dB at 16 kHz, tone 0.6 % high", 16000, -38, 114, 1006},
		{"94 dB at 8 kHz", 8000, -30, 94, 998},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sig := calSignal{fs: tc.fs, freq: tc.freq, levelDBFS: tc.ref - 94 + tc.sens,
				lead: 1, fade: 2, hold: 8, tail: 1, belowDB: 30, seed: 1}
			dets := detectAll(t, CalibratorConfig{SampleRate: tc.fs}, sig.render(), 4800)
			if len(dets) != 1 {
				t.Fatalf("got %d detections, want 1: %+v", len(dets), dets)
			}
			det := dets[0]
			got := det.LevelDBFS + 94 - tc.ref
			t.Logf("sensitivity %.4f dBFS (want %g), %.4f Hz, stable %.2f s, spread %.3f dB, dominance %.1f dB", got, tc.sens, det.FrequencyHz, det.Stable, det.StabilityDB, det.DominanceDB)
			if math.Abs(got-tc.sens) > 0.1 {
				t.Errorf("sensitivity %.3f dBFS, want %.1f within 0.1 dB", got, tc.sens)
			}
			if math.Abs(det.FrequencyHz-tc.freq) > 0.1 {
				t.Errorf("frequency %.4f Hz, want %g within 0.1 Hz", det.FrequencyHz, tc.freq)
			}
			if det.Stable < 5 || det.Stable > 8.01 {
				t.Errorf("stable %.2f s, want 5 to 8 s", det.Stable)
			}
			// The stable window lies inside the held tone; the tone run starts in the fade-in.
			if float64(det.Start) < 3*tc.fs-0.25*tc.fs || float64(det.End) > 11*tc.fs {
				t.Errorf("window [%d, %d) outside the held tone [%g, %g)", det.Start, det.End, 3*tc.fs, 11*tc.fs)
			}
			if float64(det.ToneStart) > 3*tc.fs || float64(det.ToneStart) < tc.fs {
				t.Errorf("tone start %d not in the fade-in [%g, %g]", det.ToneStart, tc.fs, 3*tc.fs)
			}
			if det.StabilityDB > 0.1 || det.DominanceDB < 20 {
				t.Errorf("stability %.3f dB, dominance %.1f dB", det.StabilityDB, det.DominanceDB)
			}
		})
	}
}

// TestCalibratorFrequency checks the frequency estimate to 0.1 Hz over the ±2 % window, and
// that tones within it but outside IEC 60942:2017 Table 4's ±0.7 % (class 1, via the phonometry
// open-source copy) are still found and then judged implausible for class 1. The limit is the
// Table 4 limit alone: the 2017 edition states the maximum-permitted uncertainty (0.2 %, Table
// A.2) apart from it, so 1008.9 Hz (0.89 %, inside limit plus uncertainty) is outside.
func TestCalibratorFrequency(t *testing.T) {
	tol1 := CalibratorTolerances(CalibratorClass1)
	for _, tc := range []struct {
		f         float64
		plausible bool // within ±0.7 % of 1 kHz
	}{
		{1000, true}, {1000.05, true}, {993.21, true}, {1006.9, true}, {1007.6, false}, {992.4, false},
		{1008.9, false}, {1009.5, false}, {985.4, false}, {1019.3, false}, {980.6, false},
	} {
		sig := calSignal{fs: 48000, freq: tc.f, levelDBFS: -12, lead: 0.3, fade: 0.5, hold: 6, tail: 0.5, belowDB: 40, seed: 3}
		dets := detectAll(t, CalibratorConfig{SampleRate: 48000}, sig.render(), 1000)
		if len(dets) != 1 {
			t.Errorf("%g Hz: %d detections, want 1", tc.f, len(dets))
			continue
		}
		t.Logf("%g Hz: estimated %.4f Hz", tc.f, dets[0].FrequencyHz)
		if e := dets[0].FrequencyHz - tc.f; math.Abs(e) > 0.1 {
			t.Errorf("%g Hz: estimated %.4f Hz, error %.4f Hz, want within 0.1 Hz", tc.f, dets[0].FrequencyHz, e)
		}
		if got := tol1.FrequencyPlausible(dets[0].FrequencyHz, CalibratorFrequency); got != tc.plausible {
			t.Errorf("%g Hz: class 1 plausible %v, want %v", tc.f, got, tc.plausible)
		}
	}
}

// pinkNoise returns pink noise (-3 dB per octave) by the filter of Paul Kellet's economy
// method (common practice; accurate to ±0.5 dB above 10 Hz at 44.1 kHz).
func pinkNoise(n int, rms float64, seed uint64) []float32 {
	rng := rand.New(rand.NewPCG(seed, 11))
	x := make([]float64, n)
	var b0, b1, b2 float64
	var ss float64
	for i := range x {
		w := rng.NormFloat64()
		b0 = 0.99765*b0 + w*0.0990460
		b1 = 0.96300*b1 + w*0.2965164
		b2 = 0.57000*b2 + w*1.0526913
		x[i] = b0 + b1 + b2 + w*0.1848
		ss += x[i] * x[i]
	}
	g := rms / math.Sqrt(ss/float64(n))
	out := make([]float32, n)
	for i, v := range x {
		out[i] = float32(v * g)
	}
	return out
}

// speechLike returns noise shaped like speech: white noise through a band-pass of roughly
// 300 Hz to 3 kHz (two one-pole sections), modulated at a syllable rate of 4 Hz with
// pauses (common practice for a speech-like test signal; no standard spectrum is claimed).
func speechLike(n int, fs float64, seed uint64) []float32 {
	rng := rand.New(rand.NewPCG(seed, 13))
	out := make([]float32, n)
	aLo := math.Exp(-2 * math.Pi * 300 / fs)
	aHi := math.Exp(-2 * math.Pi * 3000 / fs)
	var lp, lp2 float64
	for i := range out {
		w := rng.NormFloat64()
		lp = aHi*lp + (1-aHi)*w // low-pass at 3 kHz
		lp2 = aLo*lp2 + (1-aLo)*lp
		bp := lp - lp2 // minus its low-pass at 300 Hz
		t := float64(i) / fs
		env := math.Max(0, math.Sin(2*math.Pi*4*t)) * (0.6 + 0.4*math.Sin(2*math.Pi*0.7*t))
		out[i] = float32(0.3 * env * bp)
	}
	return out
}

// TestCalibratorRejects checks that signals that are not a calibrator's tone are not taken for
// one: tones outside 2 % of 1 kHz, a 1 kHz tone whose level wavers by 1 dB (over the 0.1 dB
// stability limit), pink noise, speech-like noise, a tone too short, and a 1 kHz tone drowned
// in noise only 10 dB below it over the whole band (its band is not 20 dB above the others).
func TestCalibratorRejects(t *testing.T) {
	const fs = 48000
	tone := func(f float64) []float32 {
		return calSignal{fs: fs, freq: f, levelDBFS: -10, lead: 0.5, fade: 0.5, hold: 10, tail: 0.5, belowDB: 30, seed: 5}.render()
	}
	for _, tc := range []struct {
		name string
		x    []float32
	}{
		{"250 Hz tone", tone(250)},
		{"1.1 kHz tone", tone(1100)},
		{"1.021 kHz tone", tone(1021)},
		{"978 Hz tone", tone(978)},
		{"1 kHz tone wavering by 1 dB", calSignal{fs: fs, freq: 1000, levelDBFS: -10, lead: 0.5, fade: 0.5, hold: 12, tail: 0.5,
			belowDB: 30, wobbleDB: 1, wobbleHz: 0.3, seed: 5}.render()},
		{"1 kHz tone for 4 s", calSignal{fs: fs, freq: 1000, levelDBFS: -10, lead: 0.5, fade: 0.2, hold: 4, tail: 0.5, belowDB: 30, seed: 5}.render()},
		{"1 kHz tone, broadband noise 10 dB below", calSignal{fs: fs, freq: 1000, levelDBFS: -10, lead: 0.5, fade: 0.5, hold: 10, tail: 0.5, belowDB: 10, seed: 5}.render()},
		{"pink noise", pinkNoise(12*fs, 0.1, 9)},
		{"speech-like noise", speechLike(12*fs, fs, 10)},
	} {
		if dets := detectAll(t, CalibratorConfig{SampleRate: fs}, tc.x, 4096); len(dets) != 0 {
			t.Errorf("%s: taken for a calibrator: %+v", tc.name, dets)
		}
	}
}

// TestCalibratorClipped: a 114 dB calibrator on a microphone of -18 dBFS would be a sine of
// +2 dBFS (AN-1112 definition); the converter clips it at full scale. The tone is still found,
// and the detection says it clipped.
func TestCalibratorClipped(t *testing.T) {
	x := calSignal{fs: 48000, freq: 1000, levelDBFS: 2, lead: 0.5, fade: 1, hold: 7, tail: 0.5, seed: 1}.render()
	for i, v := range x {
		x[i] = max(-1, min(1, v))
	}
	dets := detectAll(t, CalibratorConfig{SampleRate: 48000}, x, 4800)
	if len(dets) != 1 || dets[0].Clipped == 0 {
		t.Fatalf("detections %+v, want one with clipped samples", dets)
	}
	clean := detectAll(t, CalibratorConfig{SampleRate: 48000}, calSignal{fs: 48000, freq: 1000, levelDBFS: -1, lead: 0.5, fade: 1, hold: 7, tail: 0.5, seed: 1}.render(), 4800)
	if len(clean) != 1 || clean[0].Clipped != 0 {
		t.Errorf("a -1 dBFS tone: %+v, want no clipped samples", clean)
	}
}

// TestCalibratorBlockSizeIndependence checks that the detections do not depend on how the
// input is cut (the dsp package's contract).
func TestCalibratorBlockSizeIndependence(t *testing.T) {
	x := calSignal{fs: 48000, freq: 1001.3, levelDBFS: -20, lead: 0.7, fade: 2, hold: 7, tail: 1, belowDB: 30, seed: 2}.render()
	ref := detectAll(t, CalibratorConfig{SampleRate: 48000}, x, len(x))
	if len(ref) != 1 {
		t.Fatalf("%d detections, want 1", len(ref))
	}
	for _, b := range []int{1, 37, 480, 12000, 48000} {
		got := detectAll(t, CalibratorConfig{SampleRate: 48000}, x, b)
		if len(got) != 1 || got[0] != ref[0] {
			t.Errorf("block %d: %+v, want %+v", b, got, ref)
		}
	}
}

// TestCalibratorMaxStable checks early reports of a long tone and the sample positions.
func TestCalibratorMaxStable(t *testing.T) {
	const fs = 16000
	x := calSignal{fs: fs, freq: 1000, levelDBFS: -6, lead: 1, fade: 0, hold: 21, tail: 1, belowDB: 50, seed: 4}.render()
	dets := detectAll(t, CalibratorConfig{SampleRate: fs, MaxStable: 10}, x, 3000)
	if len(dets) != 2 {
		t.Fatalf("%d detections, want 2 (10 s each)", len(dets))
	}
	for i, d := range dets {
		if d.Stable != 10 {
			t.Errorf("detection %d: %.2f s, want 10 s", i, d.Stable)
		}
		if d.ToneStart != fs {
			t.Errorf("detection %d: tone start %d, want %d (the tone starts after 1 s, on a block boundary)", i, d.ToneStart, fs)
		}
		// Sine of peak 10^(-6/20): -6 dBFS (AES17), noise 50 dB below.
		if math.Abs(d.LevelDBFS+6) > 0.01 {
			t.Errorf("detection %d: %.4f dBFS, want -6", i, d.LevelDBFS)
		}
	}
	if dets[0].End != dets[1].Start {
		t.Errorf("windows [%d,%d) and [%d,%d) not adjacent", dets[0].Start, dets[0].End, dets[1].Start, dets[1].End)
	}
}

func TestCalibratorAllocations(t *testing.T) {
	d, err := NewCalibratorDetector(CalibratorConfig{SampleRate: 48000})
	if err != nil {
		t.Fatal(err)
	}
	x := calSignal{fs: 48000, freq: 1000, levelDBFS: -10, hold: 1, belowDB: 30, seed: 1}.render()
	n := 0
	found := func(Detection) { n++ }
	allocs := testing.AllocsPerRun(20, func() { d.Process(x[:4800], found) })
	if allocs != 0 {
		t.Errorf("Process allocates %.1f times per call, want 0", allocs)
	}
}

func TestCalibratorConfigErrors(t *testing.T) {
	for _, cfg := range []CalibratorConfig{
		{SampleRate: 4000},
		{SampleRate: 48000, FrequencyTolerance: 0.5},
		{SampleRate: 48000, DominanceDB: -1},
		{SampleRate: 48000, StabilityDB: 10},
		{SampleRate: 48000, MinStable: 0.5},
		{SampleRate: 48000, MinStable: 10, MaxStable: 5},
	} {
		if _, err := NewCalibratorDetector(cfg); err == nil {
			t.Errorf("%+v: no error", cfg)
		}
	}
}

// TestCalibratorTolerances checks the IEC 60942:2017 class limits for 1 kHz calibrators
// (Table 2 level and fluctuation, Table 4 frequency, Tables A.1/A.2 uncertainties, via the
// phonometry open-source copy tests/reference_data/calibrators.py).
func TestCalibratorTolerances(t *testing.T) {
	for _, tc := range []struct {
		c                   CalibratorClass
		level, fluct, freq  float64
		levelUnc, freqUncer float64
	}{
		{CalibratorClassLS, 0.10, 0.03, 0.007, 0.10, 0.002},
		{CalibratorClass1, 0.25, 0.07, 0.007, 0.15, 0.002},
		{CalibratorClass2, 0.40, 0.15, 0.017, 0.35, 0.002},
	} {
		got := CalibratorTolerances(tc.c)
		if got.Level != tc.level || got.Fluctuation != tc.fluct || got.Frequency != tc.freq ||
			got.LevelUncertainty != tc.levelUnc || got.FrequencyUncertainty != tc.freqUncer {
			t.Errorf("class %s: %+v", tc.c, got)
		}
	}
	// IEC 60942:2017 Table 4 limits, the uncertainty not added (Table A.2 states it apart):
	// class 1 ±0.7 %, class 2 ±1.7 % of 1000 Hz.
	for _, tc := range []struct {
		c  CalibratorClass
		f  float64
		ok bool
	}{
		{CalibratorClassLS, 1007, true}, {CalibratorClassLS, 1008, false},
		{CalibratorClass1, 993, true}, {CalibratorClass1, 1007, true}, {CalibratorClass1, 1008, false}, {CalibratorClass1, 991.5, false},
		{CalibratorClass2, 1017, true}, {CalibratorClass2, 983, true}, {CalibratorClass2, 1018, false}, {CalibratorClass2, 981.5, false},
	} {
		if got := CalibratorTolerances(tc.c).FrequencyPlausible(tc.f, 1000); got != tc.ok {
			t.Errorf("class %s at %g Hz: plausible %v, want %v", tc.c, tc.f, got, tc.ok)
		}
	}
	// The node's own frequency uncertainty (its sample clock) lies within the maximum the
	// standard permits for a test of the frequency (Table A.2: 0.2 %).
	if SampleClockTolerance > CalibratorTolerances(CalibratorClass1).FrequencyUncertainty {
		t.Errorf("sample clock tolerance %g exceeds the maximum-permitted uncertainty", SampleClockTolerance)
	}
	c1 := CalibratorTolerances(CalibratorClass1)
	for _, tc := range []struct {
		d  float64
		ok bool
	}{{0, true}, {0.25, true}, {-0.25, true}, {0.26, false}, {-0.3, false}} {
		if c1.LevelConsistent(tc.d) != tc.ok {
			t.Errorf("class 1 level deviation %g: consistent %v, want %v", tc.d, !tc.ok, tc.ok)
		}
	}
}

// BenchmarkCalibratorDetector: "tone" is the worst case (a calibrator on: every block gets its
// spectrum and phase), "noise" the usual one (pink noise: the band-pass gate spares the FFT).
func BenchmarkCalibratorDetector(b *testing.B) {
	for _, bc := range []struct {
		name string
		x    []float32
	}{
		{"tone", calSignal{fs: 48000, freq: 1000, levelDBFS: -10, hold: 1, belowDB: 30, seed: 1}.render()},
		{"noise", pinkNoise(48000, 0.05, 3)},
	} {
		b.Run(bc.name, func(b *testing.B) {
			d, err := NewCalibratorDetector(CalibratorConfig{SampleRate: 48000})
			if err != nil {
				b.Fatal(err)
			}
			b.SetBytes(int64(len(bc.x)) * 4)
			b.ReportAllocs()
			for b.Loop() {
				d.Process(bc.x, nil)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(bc.x)), "ns/sample")
		})
	}
}

// FuzzCalibratorDetector: any samples (16-bit values, 8 kHz, 1 s minimum) give detections
// that keep the detector's promises, and never a panic.
func FuzzCalibratorDetector(f *testing.F) {
	tone := calSignal{fs: 8000, freq: 1000, levelDBFS: -10, lead: 0.2, fade: 0.3, hold: 1.6, tail: 0.2, belowDB: 30, seed: 1}.render()
	seed := make([]byte, 0, 2*len(tone))
	for _, v := range tone {
		s := int16(v * 32767)
		seed = append(seed, byte(s), byte(s>>8))
	}
	f.Add(seed)
	f.Add([]byte{0, 0, 1, 0})
	f.Fuzz(func(t *testing.T, data []byte) {
		x := make([]float32, len(data)/2)
		for i := range x {
			x[i] = float32(int16(uint16(data[2*i])|uint16(data[2*i+1])<<8)) / 32768
		}
		d, err := NewCalibratorDetector(CalibratorConfig{SampleRate: 8000, MinStable: 1})
		if err != nil {
			t.Fatal(err)
		}
		check := func(det Detection) {
			if !(det.Start < det.End && det.End <= int64(len(x)) && det.ToneStart <= det.Start) ||
				math.Abs(det.FrequencyHz-1000) > 20 || det.StabilityDB > 0.1 || det.DominanceDB < 20 ||
				math.IsNaN(det.LevelDBFS) || det.Stable < 1 {
				t.Fatalf("detection breaks a promise: %+v", det)
			}
		}
		d.Process(x, check)
		d.Flush(check)
	})
}

// TestCalibratorDiagnosis: with Diagnose, when no calibrator is found the detector says what
// it did find, each expected value taken from the test signal's own construction: a steady
// tone at 250 Hz, a 1 kHz tone too little above broadband noise, one whose level drifts, one
// held too briefly, and no tone at all in noise.
func TestCalibratorDiagnosis(t *testing.T) {
	for _, tc := range []struct {
		name      string
		sig       calSignal
		freq      float64 // 0: no candidate expected
		minS      float64
		maxS      float64
		check     func(ToneCandidate) bool
		checkText string
	}{
		{"250 Hz", calSignal{fs: 48000, freq: 250, levelDBFS: -12, lead: 1, fade: 0.5, hold: 8, tail: 1, belowDB: 40, seed: 1},
			250, 7.5, 9, func(c ToneCandidate) bool { return c.DominanceDB > 20 && c.SteadySeconds >= 7.5 }, "dominant and steady"},
		// White noise 5 dB below the tone overall: the top one-third-octave band (near
		// 20 kHz, about a fifth of the 24 kHz bandwidth) holds about -7 dB of the noise, so
		// the 1 kHz band stands about 12 dB above it, short of the 20 dB a calibrator needs.
		{"1 kHz above noise by too little", calSignal{fs: 48000, freq: 1000, levelDBFS: -12, lead: 1, fade: 0.5, hold: 8, tail: 1, belowDB: 5, seed: 2},
			1000, 7.5, 9, func(c ToneCandidate) bool { return c.DominanceDB > 6 && c.DominanceDB < 20 }, "between 6 and 20 dB above the rest"},
		// 1 dB peak-to-peak level wobble at 0.2 Hz: the level moves by up to 0.16 dB per
		// 0.25 s block, so it stays within 0.1 dB for far less than 5 s.
		{"1 kHz drifting", calSignal{fs: 48000, freq: 1000, levelDBFS: -12, lead: 1, fade: 0.5, hold: 8, tail: 1, belowDB: 40, wobbleDB: 1, wobbleHz: 0.2, seed: 3},
			1000, 7.5, 9.5, func(c ToneCandidate) bool { return c.SteadySeconds < 3 }, "steady for under 3 s"},
		{"1 kHz too short", calSignal{fs: 48000, freq: 1000, levelDBFS: -12, lead: 1, fade: 0.1, hold: 3, tail: 1, belowDB: 40, seed: 4},
			1000, 2.5, 3.6, func(c ToneCandidate) bool { return c.SteadySeconds >= 2.5 }, "steady throughout"},
		{"noise", calSignal{fs: 48000, freq: 1000, levelDBFS: -12, lead: 10, belowDB: 1, seed: 5}, 0, 0, 0, nil, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			d, err := NewCalibratorDetector(CalibratorConfig{SampleRate: tc.sig.fs, Diagnose: true})
			if err != nil {
				t.Fatal(err)
			}
			n := 0
			x := tc.sig.render()
			d.Process(x, func(Detection) { n++ })
			d.Flush(func(Detection) { n++ })
			if n != 0 {
				t.Fatalf("%d detections, want none", n)
			}
			c, maxDom, ok := d.Candidate()
			t.Logf("candidate %+v ok %v, largest dominance %.1f dB", c, ok, maxDom)
			if tc.freq == 0 {
				if ok && c.Seconds > 1 {
					t.Errorf("a tone found in noise: %+v", c)
				}
				return
			}
			if !ok || math.Abs(c.FrequencyHz-tc.freq) > 1 || c.Seconds < tc.minS || c.Seconds > tc.maxS || !tc.check(c) {
				t.Errorf("candidate %+v, want %g Hz for %g to %g s, %s", c, tc.freq, tc.minS, tc.maxS, tc.checkText)
			}
			// The tone's level as constructed: a sine of peak amplitude 10^(-12/20) is -12 dBFS
			// (AES17); allow for the fade, the noise and, drifting, the wobble.
			if math.Abs(c.LevelDBFS+12) > 1.5 {
				t.Errorf("level %.2f dBFS, want -12", c.LevelDBFS)
			}
		})
	}
}
