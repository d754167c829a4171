package reference_test

import (
	"fmt"
	"math"
	"testing"

	"github.com/leqnode/leqnode/dsp/reference"
)

// annexEA and annexEC are the IEC 61672-1:2013 Annex E formulas E.1 and E.6, written out here
// independently of package dsp, with the pole frequencies of E.4 (via the pyfar open-source copy
// of Annex E) and A1000 = -2.000 dB, C1000 = -0.062 dB.
func annexEA(f float64) float64 {
	const f1, f2, f3, f4 = 20.598997, 107.65265, 737.86223, 12194.217
	ff := f * f
	return 20*math.Log10(f4*f4*ff*ff/((ff+f1*f1)*math.Sqrt(ff+f2*f2)*math.Sqrt(ff+f3*f3)*(ff+f4*f4))) + 2.000
}

func annexEC(f float64) float64 {
	const f1, f4 = 20.598997, 12194.217
	ff := f * f
	return 20*math.Log10(f4*f4*ff/((ff+f1*f1)*(ff+f4*f4))) + 0.062
}

func TestWeightingTableShape(t *testing.T) {
	tab := reference.WeightingTable()
	if len(tab) != 34 {
		t.Fatalf("IEC 61672-1:2013 Table 3 has 34 rows (10 Hz to 20 kHz), got %d", len(tab))
	}
	// Nominal frequencies of the one-third-octave series, IEC 61260-1:2014 Annex E (ISO 266
	// rounding), 10 Hz to 20 kHz, as written in IEC 61672-1:2013 Table 3.
	nominal := []string{"10", "12.5", "16", "20", "25", "31.5", "40", "50", "63", "80", "100",
		"125", "160", "200", "250", "315", "400", "500", "630", "800", "1000", "1250", "1600",
		"2000", "2500", "3150", "4000", "5000", "6300", "8000", "10000", "12500", "16000", "20000"}
	for i, p := range tab {
		if p.Nominal != nominal[i] || p.Index != i-20 {
			t.Errorf("row %d: nominal %q index %d, want %q %d", i, p.Nominal, p.Index, nominal[i], i-20)
		}
		// Exact frequency 1000·10^(n/10), computed from IEC 61260-1:2014 Eq. 1–2 (base 10, b = 3).
		if want := 1000 * math.Pow(10, float64(i-20)/10); math.Abs(p.Frequency-want) > 1e-9*want {
			t.Errorf("%s Hz: exact frequency %v, want %v", p.Nominal, p.Frequency, want)
		}
		// The nominal value rounds the exact one to within 3 % (IEC 61260-1:2014 Annex E: common
		// practice reading of the ISO 266 rounding).
		var nom float64
		fmt.Sscan(p.Nominal, &nom)
		if math.Abs(nom/p.Frequency-1) > 0.03 {
			t.Errorf("%s Hz: nominal and exact frequency %v differ by more than 3 %%", p.Nominal, p.Frequency)
		}
		// Class 2 limits are never tighter than class 1 (IEC 61672-1:2013 Table 3 structure).
		if p.Class2.Lower > p.Class1.Lower || p.Class2.Upper < p.Class1.Upper {
			t.Errorf("%s Hz: class 2 limits %+v tighter than class 1 %+v", p.Nominal, p.Class2, p.Class1)
		}
		if !p.Class1.Contains(0) || !p.Class2.Contains(0) {
			t.Errorf("%s Hz: a zero deviation must pass", p.Nominal)
		}
	}
	// At the reference frequency the design goals are 0 dB and class 1 is ±0.7 dB
	// (IEC 61672-1:2013 Table 3, via phonometry compliance.py).
	ref := tab[20]
	if ref.Nominal != "1000" || ref.A != 0 || ref.C != 0 || ref.Class1 != (reference.Tolerance{Lower: -0.7, Upper: 0.7}) {
		t.Errorf("1 kHz row %+v", ref)
	}
}

// TestWeightingTableMatchesAnnexE checks the transcribed Table 3 design goals against the
// Annex E formulas at the exact frequencies: the table is the formulas rounded to 0.1 dB, so
// they agree within 0.05 dB, except A at 158.49 Hz (-13.34996 dB, on the rounding boundary,
// tabulated -13.4), which gets 0.06 dB (acoustics-check-values notes, from the pyfar and
// python-acoustics open-source copies).
func TestWeightingTableMatchesAnnexE(t *testing.T) {
	for _, p := range reference.WeightingTable() {
		tolA := 0.05 + 1e-9
		if p.Nominal == "160" {
			tolA = 0.06
		}
		if d := p.A - annexEA(p.Frequency); math.Abs(d) > tolA {
			t.Errorf("%s Hz: Table 3 A %.1f vs Annex E %.4f", p.Nominal, p.A, annexEA(p.Frequency))
		}
		if d := p.C - annexEC(p.Frequency); math.Abs(d) > 0.05+1e-9 {
			t.Errorf("%s Hz: Table 3 C %.1f vs Annex E %.4f", p.Nominal, p.C, annexEC(p.Frequency))
		}
	}
}

func TestWeightingTableFreshSlices(t *testing.T) {
	a := reference.WeightingTable()
	a[0].A = 99
	if b := reference.WeightingTable(); b[0].A == 99 {
		t.Fatal("WeightingTable shares its backing array between calls")
	}
	p := reference.PeakTests()
	p[0].PeakMinusLevel = 99
	if q := reference.PeakTests(); q[0].PeakMinusLevel == 99 {
		t.Fatal("PeakTests shares its backing array between calls")
	}
}

// TestTonebursts checks IEC 61672-1:2013 Table 4 against its own defining equations, written
// out here: Eq. 7, δ = 10 lg(1 - e^(-Tb/τ)) with τ = 0.125 s (F) and 1 s (S), and Eq. 8,
// δ = 10 lg(Tb/1 s). The table rounds to 0.1 dB, so each value lies within 0.05 dB.
func TestTonebursts(t *testing.T) {
	tb := reference.Tonebursts()
	if len(tb) != 12 {
		t.Fatalf("Table 4 has 12 durations from 1 s to 0.25 ms, got %d", len(tb))
	}
	const tol = 0.05 + 1e-9
	for i, b := range tb {
		if i > 0 && b.Duration >= tb[i-1].Duration {
			t.Errorf("row %d: durations not decreasing", i)
		}
		fast := 10 * math.Log10(1-math.Exp(-b.Duration/0.125))
		slow := 10 * math.Log10(1-math.Exp(-b.Duration/1.0))
		expo := 10 * math.Log10(b.Duration/1.0)
		if math.Abs(b.Fast-fast) > tol {
			t.Errorf("Tb %g s: F %.1f vs Eq. 7 %.3f", b.Duration, b.Fast, fast)
		}
		if math.Abs(b.Exposure-expo) > tol {
			t.Errorf("Tb %g s: LAE %.1f vs Eq. 8 %.3f", b.Duration, b.Exposure, expo)
		}
		// S is tabulated down to 2 ms only (Table 4 via phonometry).
		if b.HasSlow != (b.Duration >= 0.002) {
			t.Errorf("Tb %g s: HasSlow %v", b.Duration, b.HasSlow)
		}
		if b.HasSlow && math.Abs(b.Slow-slow) > tol {
			t.Errorf("Tb %g s: S %.1f vs Eq. 7 %.3f", b.Duration, b.Slow, slow)
		}
		for _, c := range []struct {
			name   string
			c1, c2 reference.Tolerance
		}{{"F", b.FastClass1, b.FastClass2}, {"S", b.SlowClass1, b.SlowClass2}} {
			if c.name == "S" && !b.HasSlow {
				continue
			}
			if c.c2.Lower > c.c1.Lower || c.c2.Upper < c.c1.Upper || !c.c1.Contains(0) {
				t.Errorf("Tb %g s %s: class limits %+v %+v", b.Duration, c.name, c.c1, c.c2)
			}
		}
	}
}

// TestPeakTests checks the shape of IEC 61672-1:2013 Table 5: the one-cycle and half-cycle
// signals at 500 Hz, one cycle at 31.5 Hz and 8 kHz, and that each reference difference lies
// within 0.1 dB of the simulation of the Annex E analog C-weighting listed in the reference
// notes (2.51, 3.53, 3.46, 2.33, 2.33 dB; computed, bilinear sections at 4 MHz).
func TestPeakTests(t *testing.T) {
	sim := []float64{2.51, 3.53, 3.46, 2.33, 2.33}
	pt := reference.PeakTests()
	if len(pt) != len(sim) {
		t.Fatalf("Table 5 has %d rows, got %d", len(sim), len(pt))
	}
	for i, p := range pt {
		if math.Abs(p.PeakMinusLevel-sim[i]) > 0.1 {
			t.Errorf("%v at %g Hz: %.1f dB vs simulated %.2f", p.Signal, p.Frequency, p.PeakMinusLevel, sim[i])
		}
		if !p.Class1.Contains(0) || p.Class2.Upper < p.Class1.Upper {
			t.Errorf("%v at %g Hz: limits %+v %+v", p.Signal, p.Frequency, p.Class1, p.Class2)
		}
	}
	if pt[3].Signal != reference.PositiveHalfCycle || pt[4].Signal != reference.NegativeHalfCycle {
		t.Errorf("half-cycle rows out of place: %v %v", pt[3].Signal, pt[4].Signal)
	}
}

// TestDecayRates checks the theoretical decay rates against 10 lg(e)/τ, computed here from the
// exponential time weighting (IEC 61672-1:2013 clause 3 definition, from memory), and that the
// rounded design goals lie within 0.05 dB/s of them.
func TestDecayRates(t *testing.T) {
	for _, d := range reference.DecayRates() {
		want := 10 * math.Log10(math.E) / d.TimeConstant
		if math.Abs(d.Theoretical-want) > 1e-3 {
			t.Errorf("%s: theoretical %v, computed %v dB/s", d.Weighting, d.Theoretical, want)
		}
		if d.HasLimits && math.Abs(d.DesignGoal-want) > 0.05 {
			t.Errorf("%s: design goal %v vs %v dB/s", d.Weighting, d.DesignGoal, want)
		}
	}
}

func TestToleranceContains(t *testing.T) {
	for _, c := range []struct {
		tol  reference.Tolerance
		d    float64
		want bool
	}{
		{reference.Tolerance{Lower: -0.7, Upper: 0.7}, 0.7, true},
		{reference.Tolerance{Lower: -0.7, Upper: 0.7}, -0.7001, false},
		{reference.Tolerance{Lower: math.Inf(-1), Upper: 3}, -200, true},
		{reference.Tolerance{Lower: math.Inf(-1), Upper: 3}, math.Inf(-1), true},
		{reference.Tolerance{Lower: -1, Upper: 1}, math.NaN(), false},
	} {
		if got := c.tol.Contains(c.d); got != c.want {
			t.Errorf("%+v.Contains(%v) = %v", c.tol, c.d, got)
		}
	}
}

// Example prints two rows of IEC 61672-1:2013 Table 3 and checks a deviation of -1.8 dB at
// 8 kHz against their class 1 limits (-2.5/+1.5 dB): it passes.
func Example() {
	for _, p := range reference.WeightingTable() {
		switch p.Nominal {
		case "6300", "8000":
			fmt.Printf("%s Hz (exact %.2f Hz): A %+.1f dB, C %+.1f dB, class 1 %+.1f/%+.1f dB\n",
				p.Nominal, p.Frequency, p.A, p.C, p.Class1.Upper, p.Class1.Lower)
		}
	}
	fmt.Println(reference.WeightingTable()[29].Class1.Contains(-1.8))
	// Output:
	// 6300 Hz (exact 6309.57 Hz): A -0.1 dB, C -2.0 dB, class 1 +1.5/-2.0 dB
	// 8000 Hz (exact 7943.28 Hz): A -1.1 dB, C -3.0 dB, class 1 +1.5/-2.5 dB
	// true
}
