package dsp

import (
	"fmt"
	"math"
	"testing"

	"github.com/leqnode/leqnode/dsp/reference"
)

// knownShape is a smooth correction written out analytically: a +3 dB presence peak an octave
// wide at 6 kHz (a free-field correction of the kind small microphones need), a 1.5 dB loss
// above 12 kHz (a foam windscreen), -1 dB of low-frequency roll-off compensation below 50 Hz,
// and 0 dB at 1 kHz. Invented for the test (common practice in shape, no source for values).
func knownShape(f float64) float64 {
	lg := math.Log2(f / 6000)
	peak := 3 * math.Exp(-lg*lg/(2*0.5*0.5))
	wind := -1.5 / (1 + math.Pow(12000/f, 4))
	low := 1 / (1 + math.Pow(f/50, 2))
	return peak + wind + low - (3*math.Exp(-math.Pow(math.Log2(1000.0/6000), 2)/(2*0.25)) - 1.5/(1+math.Pow(12, 4)) + 1/(1+400))
}

// TestCorrectionSines: the correction table sampled at the nominal one-third-octave
// frequencies (IEC 61260-1:2014 Annex E), fitted and put into the meter, moves the LZeq of
// sines by the known shape within 0.2 dB, at table frequencies and between them.
func TestCorrectionSines(t *testing.T) {
	for _, fs := range []float64{48000, 16000} {
		var pts []CorrectionPoint
		for _, nom := range reference.NominalThirdOctaveMidbands() {
			var f float64
			for x := -19; x <= 13; x++ {
				if reference.NominalMidband(3, x) == nom {
					f = reference.MidbandFrequency(3, x)
				}
			}
			if f < 0.45*fs {
				pts = append(pts, CorrectionPoint{f, knownShape(f)})
			}
		}
		fit, err := FitCorrection(pts, fs)
		if err != nil {
			t.Fatalf("%g Hz: %v", fs, err)
		}
		cs, as, err := WeightingSections(fs) // designed once, as NewMeter would
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("fs %g: %d sections, largest error %.4f dB, RMS %.4f dB on %g to %g Hz", fs, len(fit.Sections), fit.MaxErrorDB, fit.RMSErrorDB, fit.LowHz, fit.HighHz)
		for _, f := range []float64{31.5, 50, 100, 440, 1000, 2500, 4000, 5200, 6000, 7100, 9000, 12000, 16000, 19000} {
			if f > pts[len(pts)-1].FrequencyHz {
				continue // beyond the table: the fit holds its last value, not the shape
			}
			m, err := NewMeter(MeterConfig{SampleRate: fs, SensitivityDBFS: -26, Correction: fit.Sections, CSections: cs, ASections: as})
			if err != nil {
				t.Fatal(err)
			}
			n := int(fs / 2)
			k := int(math.Round(math.Round(f/2) / f * fs)) // whole periods, about 0.5 s
			x := sine(n+k, f, 0.1, fs)
			var r Result
			m.Process(x[:n])
			m.Take(&r)
			m.Process(x[n:])
			m.Take(&r)
			// Without correction a sine of peak 0.1 reads 20 lg 0.1 dBFS (AES17), so
			// 20 lg 0.1 + 26 + 94 dB at S = -26 dBFS (AN-1112); the DC blocker costs
			// under 0.001 dB from 31.5 Hz up.
			got := r.LZeq - (20*math.Log10(0.1) + 26 + 94)
			if want := knownShape(f); math.Abs(got-want) > 0.2 {
				t.Errorf("fs %g, %g Hz: level moved %.3f dB, want %.3f within 0.2 dB", fs, f, got, want)
			}
		}
	}
}

func TestCorrectionFlatAndErrors(t *testing.T) {
	fit, err := FitCorrection([]CorrectionPoint{{1000, 0}}, 48000)
	if err != nil || fit.MaxErrorDB > 0.001 {
		t.Errorf("flat table: %v, error %.4f dB", err, fit.MaxErrorDB)
	}
	for _, f := range []float64{20, 1000, 15000} {
		if g := GainDB(CascadeResponse(fit.Sections, f, 48000)); math.Abs(g) > 0.001 {
			t.Errorf("flat table: %g dB at %g Hz", g, f)
		}
	}
	for name, pts := range map[string][]CorrectionPoint{
		"empty":     nil,
		"negative":  {{-5, 1}},
		"NaN":       {{1000, math.NaN()}},
		"too large": {{1000, 0}, {8000, 25}},
		"repeated":  {{1000, 0}, {1000, 1}},
		"ripple":    {{1000, 0}, {1050, 6}, {1100, -6}, {1150, 6}, {1200, -6}, {1250, 6}},
	} {
		if _, err := CorrectionSections(pts, 48000); err == nil {
			t.Errorf("%s table accepted", name)
		}
	}
	if _, err := CorrectionSections([]CorrectionPoint{{1000, 0}}, 4000); err == nil {
		t.Error("4 kHz sample rate accepted")
	}
}

func BenchmarkFitCorrection(b *testing.B) {
	var pts []CorrectionPoint
	for x := -17; x <= 13; x++ {
		f := reference.MidbandFrequency(3, x)
		pts = append(pts, CorrectionPoint{f, knownShape(f)})
	}
	for b.Loop() {
		if _, err := FitCorrection(pts, 48000); err != nil {
			b.Fatal(err)
		}
	}
}

func ExampleCorrectionSections() {
	// A windscreen that takes 1 dB off above 8 kHz, given as a small table (invented values).
	table := []CorrectionPoint{{1000, 0}, {4000, 0.2}, {8000, 1.0}, {12500, 1.0}}
	sec, err := CorrectionSections(table, 48000)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, f := range []float64{1000, 8000, 10000} {
		fmt.Printf("%g Hz: %+.1f dB\n", f, GainDB(CascadeResponse(sec, f, 48000)))
	}
	m, err := NewMeter(MeterConfig{SampleRate: 48000, SensitivityDBFS: -26, Correction: sec})
	fmt.Println(m != nil, err)
	// Output:
	// 1000 Hz: +0.0 dB
	// 8000 Hz: +1.0 dB
	// 10000 Hz: +1.0 dB
	// true <nil>
}
