package dsp

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"github.com/leqnode/leqnode/dsp/reference"
)

// bankG is the octave ratio written out for the tests, 10^(3/10) (IEC 61260-1:2014 Eq. 1).
var bankG = math.Pow(10, 0.3)

// TestBandsList checks the band lists against the exact midband and band-edge frequencies of
// IEC 61260-1:2014 Eq. 1–5 (tabulated to five significant digits in the project's check
// values, computed from those equations) and the nominal names of Annex E.
func TestBandsList(t *testing.T) {
	// Nominal one-third-octave midband frequencies, IEC 61260-1:2014 Annex E (from memory; the
	// same names head IEC 61672-1:2013 Table 3 via python-acoustics data/iec_61672_1_2013.csv),
	// with the exact midband fm and lower edge f1 in Hz computed from IEC 61260-1:2014 Eq. 2
	// and 4 (b = 3, x = -19 … 13).
	thirds := []struct {
		nominal string
		x       int
		fm, f1  float64
	}{
		{"12.5", -19, 12.589, 11.220}, {"16", -18, 15.849, 14.125}, {"20", -17, 19.953, 17.783},
		{"25", -16, 25.119, 22.387}, {"31.5", -15, 31.623, 28.184}, {"40", -14, 39.811, 35.481},
		{"50", -13, 50.119, 44.668}, {"63", -12, 63.096, 56.234}, {"80", -11, 79.433, 70.795},
		{"100", -10, 100.00, 89.125}, {"125", -9, 125.89, 112.20}, {"160", -8, 158.49, 141.25},
		{"200", -7, 199.53, 177.83}, {"250", -6, 251.19, 223.87}, {"315", -5, 316.23, 281.84},
		{"400", -4, 398.11, 354.81}, {"500", -3, 501.19, 446.68}, {"630", -2, 630.96, 562.34},
		{"800", -1, 794.33, 707.95}, {"1000", 0, 1000.00, 891.25}, {"1250", 1, 1258.93, 1122.02},
		{"1600", 2, 1584.89, 1412.54}, {"2000", 3, 1995.26, 1778.28}, {"2500", 4, 2511.89, 2238.72},
		{"3150", 5, 3162.28, 2818.38}, {"4000", 6, 3981.07, 3548.13}, {"5000", 7, 5011.87, 4466.84},
		{"6300", 8, 6309.57, 5623.41}, {"8000", 9, 7943.28, 7079.46}, {"10000", 10, 10000.0, 8912.51},
		{"12500", 11, 12589.3, 11220.2}, {"16000", 12, 15848.9, 14125.4}, {"20000", 13, 19952.6, 17782.8},
	}
	// Octave bands, same sources (b = 1, x = -6 … 4).
	octaves := []struct {
		nominal    string
		x          int
		fm, f1, f2 float64
	}{
		{"16", -6, 15.849, 11.220, 22.387}, {"31.5", -5, 31.623, 22.387, 44.668},
		{"63", -4, 63.096, 44.668, 89.125}, {"125", -3, 125.89, 89.125, 177.83},
		{"250", -2, 251.19, 177.83, 354.81}, {"500", -1, 501.19, 354.81, 707.95},
		{"1000", 0, 1000.00, 707.95, 1412.54}, {"2000", 1, 1995.26, 1412.54, 2818.38},
		{"4000", 2, 3981.07, 2818.38, 5623.41}, {"8000", 3, 7943.28, 5623.41, 11220.2},
		{"16000", 4, 15848.9, 11220.2, 22387.2},
	}
	near := func(got, want float64) bool { return math.Abs(got-want) <= 6e-5*want }

	got := Bands(Third, 48000)
	if len(got) != len(thirds) {
		t.Fatalf("Bands(Third, 48000): %d bands, want %d (12.5 Hz to 20 kHz)", len(got), len(thirds))
	}
	for i, w := range thirds {
		g := got[i]
		f2 := 22387.2 // upper edge of the 20 kHz band; the others are the next band's lower edge
		if i+1 < len(thirds) {
			f2 = thirds[i+1].f1
		}
		if g.Nominal != w.nominal || g.X != w.x || !near(g.Mid, w.fm) || !near(g.Lower, w.f1) || !near(g.Upper, f2) {
			t.Errorf("third-octave band %d = %+v, want %s x=%d fm %.5g f1 %.5g f2 %.5g", i, g, w.nominal, w.x, w.fm, w.f1, f2)
		}
		// Exact to rounding: computed from IEC 61260-1:2014 Eq. 2, 4, 5 written out here.
		fm := 1000 * math.Pow(bankG, float64(w.x)/3)
		if math.Abs(g.Mid-fm) > 1e-12*fm || math.Abs(g.Lower-fm*math.Pow(bankG, -1.0/6)) > 1e-12*fm ||
			math.Abs(g.Upper-fm*math.Pow(bankG, 1.0/6)) > 1e-12*fm {
			t.Errorf("third-octave band %s: mid/edges %v %v %v not exact", w.nominal, g.Mid, g.Lower, g.Upper)
		}
	}
	if names := reference.NominalThirdOctaveMidbands(); len(names) != len(thirds) {
		t.Errorf("reference.NominalThirdOctaveMidbands has %d names, want %d", len(names), len(thirds))
	} else {
		for i, n := range names {
			if n != thirds[i].nominal {
				t.Errorf("reference.NominalThirdOctaveMidbands()[%d] = %q, want %q", i, n, thirds[i].nominal)
			}
		}
	}
	gotOct := Bands(Octave, 48000)
	if len(gotOct) != len(octaves) {
		t.Fatalf("Bands(Octave, 48000): %d bands, want %d (16 Hz to 16 kHz)", len(gotOct), len(octaves))
	}
	for i, w := range octaves {
		g := gotOct[i]
		if g.Nominal != w.nominal || g.X != w.x || !near(g.Mid, w.fm) || !near(g.Lower, w.f1) || !near(g.Upper, w.f2) {
			t.Errorf("octave band %d = %+v, want %s x=%d fm %.5g f1 %.5g f2 %.5g", i, g, w.nominal, w.x, w.fm, w.f1, w.f2)
		}
	}

	// The highest band is the last whose upper edge is below 0.47 fs (project decision,
	// common practice for a converter's flat pass band): the 20 kHz band (f2 = 22387 Hz) fits
	// at 48 kHz (22560 Hz) but not at 44.1 kHz (20727 Hz). Names above 20 kHz continue the R10
	// series of ISO 266 (common practice).
	tops := []struct {
		set          BandSet
		fs           float64
		first, last  string
		wantNumBands int
	}{
		{Third, 8000, "12.5", "3150", 25},
		{Third, 44100, "12.5", "16000", 32},
		{Third, 48000, "12.5", "20000", 33},
		{Third, 96000, "12.5", "40000", 36},
		{Third, 192000, "12.5", "80000", 39},
		{Octave, 8000, "16", "2000", 8},
		{Octave, 44100, "16", "8000", 10},
		{Octave, 48000, "16", "16000", 11},
		{Octave, 96000, "16", "31500", 12},
		{Octave, 192000, "16", "63000", 13},
	}
	for _, c := range tops {
		bs := Bands(c.set, c.fs)
		if len(bs) != c.wantNumBands || bs[0].Nominal != c.first || bs[len(bs)-1].Nominal != c.last {
			t.Errorf("Bands(%v, %g): %d bands %s … %s, want %d bands %s … %s", c.set, c.fs, len(bs),
				bs[0].Nominal, bs[len(bs)-1].Nominal, c.wantNumBands, c.first, c.last)
		}
		if top := bs[len(bs)-1]; !(top.Upper < 0.47*c.fs) {
			t.Errorf("Bands(%v, %g): top band %s reaches %g Hz, not below 0.47 fs", c.set, c.fs, top.Nominal, top.Upper)
		}
	}
	if Bands(BandSet(2), 48000) != nil {
		t.Errorf("Bands(BandSet(2), 48000) != nil")
	}
}

// TestBandMaskOmega checks the breakpoint frequencies of the mask: IEC 61260-1:2014 Table F.1
// for b = 3 (via phonometry filters.py) and G^x for b = 1 (Formula 9 with b = 1).
func TestBandMaskOmega(t *testing.T) {
	third := []float64{1, 1.02667, 1.05575, 1.08746, 1.12202, 1.12202, 1.29437, 1.88173, 3.05365, 5.39195}
	octave := []float64{1, 1.09018, 1.18850, 1.29569, 1.41254, 1.41254, 1.99526, 3.98107, 7.94328, 15.84893}
	for _, c := range []struct {
		b    int
		want []float64
	}{{3, third}, {1, octave}} {
		m := reference.BandMask(c.b)
		if len(m) != len(c.want) {
			t.Fatalf("BandMask(%d): %d points, want %d", c.b, len(m), len(c.want))
		}
		for i, p := range m {
			if math.Abs(p.Omega-c.want[i]) > 6e-6 {
				t.Errorf("BandMask(%d)[%d].Omega = %.6f, want %.5f", c.b, i, p.Omega, c.want[i])
			}
		}
	}
	// Formula 11: halfway (in lg Ω) between x = 1 and x = 2 the class 1 lower limit is
	// (16.6 + 40.5)/2 = 28.55 dB, on both sides (Formula 10).
	om := math.Sqrt(1.29437 * 1.88173)
	for _, o := range []float64{om, 1 / om} {
		if l := reference.BandAttenuationLimits(3, 1, o); math.Abs(l.Lower-28.55) > 1e-3 || !math.IsInf(l.Upper, 1) {
			t.Errorf("BandAttenuationLimits(3, 1, %.5f) = %+v, want 28.55 … +Inf", o, l)
		}
	}
	// At the band edge the row of Table 1 holds: +1.2 … +5.3 dB (class 1).
	if l := reference.BandAttenuationLimits(3, 1, reference.BreakpointOmega(3, 0.5)); l.Lower != 1.2 || l.Upper != 5.3 {
		t.Errorf("limits at the band edge = %+v, want 1.2 … 5.3", l)
	}
}

// TestBandLimitsByClass checks the single-number limits of IEC 61260-1:2014 for both classes:
// effective bandwidth ±0.4/±0.6 dB (5.12.2) and adjacent-band sums +0.8/-1.8 and +1.8/-3.8 dB
// (5.16), via phonometry filters.py; and the Table 1 edge row for class 2, +0.8 … +5.8 dB (via
// phonometry compliance.py).
func TestBandLimitsByClass(t *testing.T) {
	if reference.BandwidthDeviationLimit(1) != 0.4 || reference.BandwidthDeviationLimit(2) != 0.6 {
		t.Errorf("BandwidthDeviationLimit: %v, %v", reference.BandwidthDeviationLimit(1), reference.BandwidthDeviationLimit(2))
	}
	if l := reference.AdjacentBandSumLimits(1); l.Lower != -1.8 || l.Upper != 0.8 {
		t.Errorf("AdjacentBandSumLimits(1) = %+v", l)
	}
	if l := reference.AdjacentBandSumLimits(2); l.Lower != -3.8 || l.Upper != 1.8 {
		t.Errorf("AdjacentBandSumLimits(2) = %+v", l)
	}
	if l := reference.BandAttenuationLimits(1, 2, 1/math.Sqrt(bankG)); l.Lower != 0.8 || l.Upper != 5.8 {
		t.Errorf("class 2 limits at the octave band edge = %+v, want 0.8 … 5.8", l)
	}
	// Computed from IEC 61260-1:2014 Eq. 4, 5: G^(1/6) - G^(-1/6) and G^(1/2) - G^(-1/2).
	if d := reference.ReferenceBandwidth(3) - 0.23077; math.Abs(d) > 5e-6 {
		t.Errorf("ReferenceBandwidth(3) off by %g", d)
	}
	if d := reference.ReferenceBandwidth(1) - 0.70459; math.Abs(d) > 5e-6 {
		t.Errorf("ReferenceBandwidth(1) off by %g", d)
	}
	for _, f := range []func(){
		func() { reference.BandwidthDeviationLimit(0) },
		func() { reference.AdjacentBandSumLimits(3) },
		func() { reference.BandAttenuationLimits(3, 1, 0) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("no panic on a bad class or frequency")
				}
			}()
			f()
		}()
	}
}

// bankRelAtten returns ΔA = A(f) - A(fm) of band i from the bank's analytic response, in dB.
func bankRelAtten(fb *FilterBank, i int, f float64) float64 {
	return GainDB(fb.Response(i, fb.bands[i].Mid)) - GainDB(fb.Response(i, f))
}

// bankMargin returns how far d lies inside tolerance l (negative if outside).
func bankMargin(d float64, l reference.Tolerance) float64 {
	return math.Min(d-l.Lower, l.Upper-d)
}

// TestBandRelativeAttenuation checks the relative attenuation of every band from its
// analytic response (which includes what the decimators fold into the band) against the
// class 1 acceptance limits of IEC 61260-1:2014 Table 1 (via phonometry compliance.py), at the
// breakpoints on both sides (Formula 9 and 10) and on a dense grid between them (Formula 11),
// from fm/40 up to fs/2.
func TestBandRelativeAttenuation(t *testing.T) {
	for _, c := range []struct {
		set   BandSet
		fs    float64
		bands []string // nil: all
	}{
		{Third, 48000, nil},
		{Octave, 48000, nil},
		{Third, 44100, nil},
		{Octave, 44100, []string{"16", "1000", "16000"}},
		{Third, 8000, nil},
		{Octave, 8000, nil},
		{Third, 96000, []string{"12.5", "1000", "20000", "40000"}},
		{Third, 192000, []string{"12.5", "80000"}},
		{Third, 11025, nil},
		{Third, 22050, nil},
		{Octave, 32000, nil},
		{Third, 88200, []string{"12.5", "1000", "16000", "31500", "40000"}},
		{Octave, 176400, nil},
	} {
		fb, err := NewFilterBank(c.set, c.fs)
		if err != nil {
			t.Fatal(err)
		}
		b := int(c.set)
		mask := reference.BandMask(b)
		worst := make([]float64, len(mask)) // by breakpoint, for the log
		for k := range worst {
			worst[k] = math.Inf(1)
		}
		for i, bd := range fb.Bands() {
			if c.bands != nil && !bankContains(c.bands, bd.Nominal) {
				continue
			}
			for k, p := range mask {
				for _, om := range []float64{p.Omega, 1 / p.Omega} {
					f := om * bd.Mid
					if f >= c.fs/2 {
						continue
					}
					lim := p.Class1
					if p.X == 0.5 { // exactly at the edge the table row holds (+1.2 … +5.3 dB)
						lim = reference.BandAttenuationLimits(b, 1, om)
					}
					d := bankRelAtten(fb, i, f)
					m := bankMargin(d, lim)
					if m < 0 {
						t.Errorf("%v %g Hz band %s: ΔA(Ω=%.5f) = %.3f dB, class 1 limits %+v", c.set, c.fs, bd.Nominal, om, d, lim)
					}
					worst[k] = math.Min(worst[k], m)
				}
			}
			// Dense grid, 200 points per decade.
			for lf := math.Log10(bd.Mid / 40); lf < math.Log10(c.fs/2); lf += 0.005 {
				f := math.Pow(10, lf)
				d := bankRelAtten(fb, i, f)
				lim := reference.BandAttenuationLimits(b, 1, f/bd.Mid)
				if bankMargin(d, lim) < 0 {
					t.Errorf("%v %g Hz band %s: ΔA(%.1f Hz) = %.3f dB, class 1 limits %+v", c.set, c.fs, bd.Nominal, f, d, lim)
				}
			}
		}
		msg := ""
		for k, p := range mask {
			if p.StopSide && p.X == 0.5 {
				continue // the edge itself is checked once, against the edge row
			}
			msg += fmt.Sprintf(" x=%.3g:%.2f", p.X, worst[k])
		}
		t.Logf("%v at %g Hz: smallest margin to the class 1 limits by breakpoint (dB):%s", c.set, c.fs, msg)
	}
}

func bankContains(s []string, v string) bool {
	for _, x := range s {
		if x == v {
			return true
		}
	}
	return false
}

// sine returns n samples of a sine of amplitude 1 and frequency f at rate fs.
func bankSine(n int, f, fs float64) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = math.Sin(2 * math.Pi * math.Mod(f*float64(i)/fs, 1))
	}
	return x
}

// bankMeasureSine drives a steady sine of amplitude 1 at f through a fresh bank and returns the
// mean square of every band after the filters have settled.
func bankMeasureSine(fb *FilterBank, f, settle float64) []float64 {
	fs := fb.SampleRate()
	fb.Reset()
	cycles := math.Max(40, math.Ceil(0.25*f))
	nMeasure := int(math.Round(cycles * fs / f))
	nSettle := int(settle * fs)
	x := bankSine(nSettle+nMeasure, f, fs)
	fb.Process(x[:nSettle])
	fb.MeanSquare(nil)
	fb.Process(x[nSettle:])
	return fb.MeanSquare(nil)
}

// bankSettleTime is a generous settling time for band i: 14 time constants of the slowest pole
// pair of a third-order Butterworth band-pass, 2/(π·bandwidth) each (from the pole positions
// of the design, common practice), plus the decimators' delay.
func bankSettleTime(fb *FilterBank, i int) float64 {
	bd := fb.bands[i]
	return 14*2/(math.Pi*(bd.Upper-bd.Lower)) + 11/fb.BandRate(i) + 0.02
}

func bankIndex(t *testing.T, fb *FilterBank, nominal string) int {
	t.Helper()
	for i, bd := range fb.bands {
		if bd.Nominal == nominal {
			return i
		}
	}
	t.Fatalf("no band %s in %v bank at %g Hz", nominal, fb.set, fb.fs)
	return -1
}

// TestBandSinesThroughProcess drives sines through Process for a few bands in different
// decimation stages, at the breakpoints of IEC 61260-1:2014 Table 1 (Formula 9, 10; limits
// via phonometry compliance.py) and at the frequencies that each decimation folds onto the
// midband, and checks the measured ΔA against the class 1 limits. Where the response is less
// than 60 dB down it must also agree with Response within 0.05 dB (common practice), which
// shows that Process computes what Response describes, aliasing included.
func TestBandSinesThroughProcess(t *testing.T) {
	for _, c := range []struct {
		set     BandSet
		fs      float64
		nominal string
	}{
		{Third, 48000, "20000"}, // upper branch
		{Third, 48000, "16000"}, // upper branch, lower edge 0.294 fs
		{Third, 48000, "12500"}, // stage 0, across fs/4
		{Third, 48000, "5000"},  // stage 1
		{Third, 48000, "4000"},  // stage 2
		{Third, 48000, "1000"},  // stage 4
		{Third, 48000, "100"},   // stage 7
		{Third, 44100, "16000"}, // upper branch
		{Third, 44100, "2000"},  // stage 2
		{Octave, 48000, "63"},   // stage 7
		{Octave, 48000, "16000"},
		{Third, 8000, "3150"}, // upper branch
		{Third, 8000, "250"},
	} {
		fb, err := NewFilterBank(c.set, c.fs)
		if err != nil {
			t.Fatal(err)
		}
		i := bankIndex(t, fb, c.nominal)
		bd := fb.bands[i]
		b := int(c.set)
		settle := bankSettleTime(fb, i)
		ref := bankMeasureSine(fb, bd.Mid, settle)[i]
		// At the midband a sine of amplitude 1 has mean square 1/2; the band passes it at 0 dB.
		if d := 10 * math.Log10(ref/0.5); math.Abs(d) > 0.02 {
			t.Errorf("%v %g Hz band %s: level at the midband %.3f dB, want 0", c.set, c.fs, c.nominal, d)
		}
		var freqs []float64
		for _, p := range reference.BandMask(b) {
			if p.StopSide {
				continue
			}
			freqs = append(freqs, p.Omega*bd.Mid, bd.Mid/p.Omega)
		}
		for _, x := range []float64{1, 2, 3, 4} {
			om := reference.BreakpointOmega(b, x)
			freqs = append(freqs, om*bd.Mid, bd.Mid/om)
		}
		// The frequencies that land on the midband after each decimation.
		for r := fb.BandRate(i); r < c.fs; r *= 2 {
			freqs = append(freqs, r-bd.Mid)
			if r+bd.Mid < c.fs/2 {
				freqs = append(freqs, r+bd.Mid)
			}
		}
		for _, f := range freqs {
			if f >= c.fs/2 || f <= 0 || f == bd.Mid {
				continue
			}
			ms := bankMeasureSine(fb, f, settle)[i]
			d := 10 * math.Log10(ref/ms)
			lim := reference.BandAttenuationLimits(b, 1, f/bd.Mid)
			if bankMargin(d, lim) < 0 {
				t.Errorf("%v %g Hz band %s: measured ΔA(%.1f Hz) = %.2f dB, class 1 limits %+v", c.set, c.fs, c.nominal, f, d, lim)
			}
			if want := bankRelAtten(fb, i, f); want < 60 && math.Abs(d-want) > 0.05 {
				t.Errorf("%v %g Hz band %s: measured ΔA(%.1f Hz) = %.3f dB, Response says %.3f dB", c.set, c.fs, c.nominal, f, d, want)
			}
		}
	}
}

// TestBandEffectiveBandwidth checks the effective-bandwidth deviation of every band against the
// class 1 limit |ΔB| ≤ 0.4 dB of IEC 61260-1:2014 5.12.2 (via phonometry filters.py), with
// ΔB = 10 lg[∫ 10^(-ΔA(Ω)/10) dΩ / (G^(1/(2b)) - G^(-1/(2b)))] (formula from memory),
// integrated from the analytic response over 0 < f < fs/2.
func TestBandEffectiveBandwidth(t *testing.T) {
	for _, c := range []struct {
		set BandSet
		fs  float64
	}{{Third, 48000}, {Octave, 48000}, {Third, 44100}, {Octave, 8000}, {Third, 8000}} {
		fb, err := NewFilterBank(c.set, c.fs)
		if err != nil {
			t.Fatal(err)
		}
		b := float64(c.set)
		refBW := math.Pow(bankG, 1/(2*b)) - math.Pow(bankG, -1/(2*b))
		worst := 0.0
		for i, bd := range fb.Bands() {
			h0 := cmplx.Abs(fb.Response(i, bd.Mid))
			// Trapezoid rule in u = ln Ω: ∫ |H|² dΩ = ∫ |H|² Ω du.
			const du = 0.002
			lo, hi := math.Log(1.0/100), math.Log(c.fs/2/bd.Mid)
			sum := 0.0
			prev := math.NaN()
			for u := lo; u <= hi; u += du {
				om := math.Exp(u)
				g := cmplx.Abs(fb.Response(i, om*bd.Mid)) / h0
				v := g * g * om
				if !math.IsNaN(prev) {
					sum += (prev + v) / 2 * du
				}
				prev = v
			}
			db := 10 * math.Log10(sum/refBW)
			if math.Abs(db) > math.Abs(worst) {
				worst = db
			}
			if lim := reference.BandwidthDeviationLimit(1); math.Abs(db) > lim {
				t.Errorf("%v %g Hz band %s: ΔB = %.3f dB, class 1 limit ±%.1f dB", c.set, c.fs, bd.Nominal, db, lim)
			}
		}
		t.Logf("%v at %g Hz: largest effective-bandwidth deviation %.3f dB", c.set, c.fs, worst)
	}
}

// TestBandAdjacentSum sweeps a sine across the boundary between two adjacent bands computed in
// different decimation stages and checks the energy sum of their outputs against the class 1
// limits +0.8/-1.8 dB of IEC 61260-1:2014 5.16 (via phonometry filters.py).
func TestBandAdjacentSum(t *testing.T) {
	for _, c := range []struct {
		set    BandSet
		fs     float64
		lo, hi string
	}{
		{Third, 48000, "12500", "16000"}, // stage 0 and the upper branch
		{Third, 44100, "12500", "16000"}, // stage 0 and the upper branch
		{Third, 48000, "4000", "5000"},   // stages 2 and 1
		{Third, 48000, "2000", "2500"},   // stages 3 and 2
		{Third, 48000, "125", "160"},     // stages 7 and 6
		{Third, 44100, "3150", "4000"},   // stages 2 and 1
		{Octave, 48000, "1000", "2000"},  // stages 3 and 2
		{Octave, 48000, "2000", "4000"},  // stages 2 and 1
		{Octave, 8000, "500", "1000"},    // stages 2 and 1
	} {
		fb, err := NewFilterBank(c.set, c.fs)
		if err != nil {
			t.Fatal(err)
		}
		i, j := bankIndex(t, fb, c.lo), bankIndex(t, fb, c.hi)
		if fb.BandRate(i) == fb.BandRate(j) {
			t.Errorf("%v %g Hz: bands %s and %s are in the same stage", c.set, c.fs, c.lo, c.hi)
		}
		settle := math.Max(bankSettleTime(fb, i), bankSettleTime(fb, j))
		lim := reference.AdjacentBandSumLimits(1)
		f1, f2 := fb.bands[i].Mid, fb.bands[j].Mid
		const steps = 12
		for s := 0; s <= steps; s++ {
			f := f1 * math.Pow(f2/f1, float64(s)/steps)
			ms := bankMeasureSine(fb, f, settle)
			d := 10 * math.Log10((ms[i]+ms[j])/0.5)
			if !lim.Contains(d) {
				t.Errorf("%v %g Hz bands %s+%s at %.1f Hz: sum %.3f dB, class 1 limits %+v", c.set, c.fs, c.lo, c.hi, f, d, lim)
			}
		}
		// Densely, from the analytic responses.
		for s := 0; s <= 400; s++ {
			f := f1 * math.Pow(f2/f1, float64(s)/400)
			hi, hj := cmplx.Abs(fb.Response(i, f)), cmplx.Abs(fb.Response(j, f))
			if d := 10 * math.Log10(hi*hi+hj*hj); !lim.Contains(d) {
				t.Errorf("%v %g Hz bands %s+%s at %.1f Hz: analytic sum %.3f dB, class 1 limits %+v", c.set, c.fs, c.lo, c.hi, f, d, lim)
			}
		}
	}
}

// bankTestSignal returns n samples of a deterministic mixture of white noise and two sines.
func bankTestSignal(n int, fs float64) []float64 {
	r := rand.New(rand.NewPCG(1, 2))
	x := make([]float64, n)
	for i := range x {
		t := float64(i) / fs
		x[i] = 0.1*r.NormFloat64() + 0.3*math.Sin(2*math.Pi*997*t) + 0.2*math.Sin(2*math.Pi*31.7*t)
	}
	return x
}

// TestBandLevelLinearity checks the level linearity of the bands over 140 dB: a sine at the
// midband of the 1 kHz and the 31.5 Hz one-third-octave bands, from full scale down to
// -140 dBFS, reads its level within the class 1 limit of ±0.5 dB of IEC 61260-1:2014 5.13.3
// (via phonometry filters.py); the float64 filters in fact hold 0.001 dB (common practice).
func TestBandLevelLinearity(t *testing.T) {
	const fs = 48000
	fb, err := NewFilterBank(Third, fs)
	if err != nil {
		t.Fatal(err)
	}
	for _, nominal := range []string{"1000", "31.5"} {
		i := bankIndex(t, fb, nominal)
		x := bankSine(int(3*fs), fb.bands[i].Mid, fs)
		y := make([]float64, len(x))
		ref := 0.0
		for drop := 0.0; drop <= 140; drop += 20 {
			a := math.Pow(10, -drop/20)
			for k, v := range x {
				y[k] = a * v
			}
			fb.Reset()
			fb.Process(y[:2*fs])
			fb.MeanSquare(nil)
			fb.Process(y[2*fs:])
			l := 10 * math.Log10(fb.MeanSquare(nil)[i])
			if drop == 0 {
				ref = l
				continue
			}
			if d := l - ref + drop; math.Abs(d) > 0.001 {
				t.Errorf("band %s at -%g dBFS: level off by %.4f dB", nominal, drop, d)
			}
		}
	}
}

// TestBandTimeInvariance drives a logarithmic sweep of one octave per second through bands in
// different decimation stages and compares the energy each band collects with the energy
// expected from its analytic response along the sweep: a multirate bank that aliased or
// depended on the decimation phase would differ. Limit: ±0.4 dB, the class 1 time-invariance
// limit of IEC 61260-1:2014 5.14.3 (via phonometry filters.py; the sweep method as
// remembered: from memory).
func TestBandTimeInvariance(t *testing.T) {
	const fs = 48000
	fb, err := NewFilterBank(Third, fs)
	if err != nil {
		t.Fatal(err)
	}
	for _, nominal := range []string{"20000", "16000", "4000", "5000", "1000", "100"} {
		i := bankIndex(t, fb, nominal)
		fm := fb.bands[i].Mid
		f0, f1 := fm/8, math.Min(fm*8, 0.49*fs)
		dur := math.Log2(f1 / f0) // seconds, at one octave per second
		n := int(dur * fs)
		x := make([]float64, n)
		k := dur / math.Log(f1/f0)
		expect := 0.0
		for j := range x {
			tt := float64(j) / fs
			// Phase of the sweep f(t) = f0·(f1/f0)^(t/dur): 2π f0 k (e^(t/k) - 1).
			x[j] = math.Sin(2 * math.Pi * f0 * k * (math.Exp(tt/k) - 1))
			if j%8 == 0 {
				h := cmplx.Abs(fb.Response(i, f0*math.Exp(tt/k)))
				expect += 8 * h * h / 2
			}
		}
		fb.Reset()
		fb.Process(x)
		// Let the band ring out after the sweep.
		fb.Process(make([]float64, fs))
		got := fb.MeanSquare(nil)[i] * float64(n+fs) // energy in units of input samples
		d := 10 * math.Log10(got/expect)
		// The class 1 limit is ±0.4 dB; a multirate bank without aliasing holds 0.01 dB
		// (common practice), which is what this checks.
		if math.Abs(d) > 0.01 {
			t.Errorf("band %s: swept energy %.3f dB from the analytic response, want within 0.01 dB", nominal, d)
		}
		t.Logf("band %s (rate %g Hz): swept energy %+.4f dB from the analytic response", nominal, fb.BandRate(i), d)
	}
}

// TestBandBlockSizeIndependence feeds the same samples in blocks of 1, 7, 256 (the meter's),
// 480, 1500 (more than the bank's chunk) and 48000 and requires bit-identical mean squares at
// the same sample positions (project requirement), also where the decimated stages still hold
// samples they have gathered (bankBatch) when MeanSquare is called.
func TestBandBlockSizeIndependence(t *testing.T) {
	const fs = 48000
	x := bankTestSignal(2*48000+1234, fs)
	spans := []int{48000, 1, 48000 + 1233} // SettledMeanSquare, MeanSquare, SettledMeanSquare after each
	for _, set := range []BandSet{Third, Octave} {
		var want [][]float64
		for _, block := range []int{48000, 1, 7, 256, 480, 1500} {
			fb, err := NewFilterBank(set, fs)
			if err != nil {
				t.Fatal(err)
			}
			var got [][]float64
			pos := 0
			for _, span := range spans {
				end := pos + span
				for pos < end {
					n := min(block, end-pos)
					fb.Process(x[pos : pos+n])
					pos += n
				}
				if span == 1 {
					got = append(got, fb.MeanSquare(nil))
				} else {
					// The low bands are still settling: SettledMeanSquare's split of
					// each sum must not depend on the blocks either.
					ms, share := fb.SettledMeanSquare(nil, nil)
					got = append(got, ms, share)
				}
			}
			if want == nil {
				want = got
				continue
			}
			for s := range got {
				for k := range got[s] {
					g, w := got[s][k], want[s][k]
					if g != w && !(math.IsNaN(g) && math.IsNaN(w)) {
						t.Errorf("%v block %d span %d band %s: %g, block 48000 gives %g", set, block, s, fb.bands[k].Nominal, g, w)
					}
				}
			}
		}
		// After the one-sample span only stage 0 (and stages whose decimators kept that
		// sample) have a result; the 12.5 Hz or 16 Hz band's stage kept none.
		if !math.IsNaN(want[2][0]) || math.IsNaN(want[2][len(want[2])-1]) {
			t.Errorf("%v: after one sample, lowest band %g (want NaN), highest %g (want a number)", set, want[2][0], want[2][len(want[2])-1])
		}
	}
}

// TestBandNoAllocation checks that Process and MeanSquare with a reused dst do not allocate
// (project requirement).
func TestBandNoAllocation(t *testing.T) {
	fb, err := NewFilterBank(Third, 48000)
	if err != nil {
		t.Fatal(err)
	}
	x := bankTestSignal(4801, 48000)
	dst := make([]float64, len(fb.Bands()))
	if n := testing.AllocsPerRun(20, func() { fb.Process(x) }); n != 0 {
		t.Errorf("Process allocates %v times per call", n)
	}
	if n := testing.AllocsPerRun(20, func() { dst = fb.MeanSquare(dst) }); n != 0 {
		t.Errorf("MeanSquare allocates %v times per call", n)
	}
}

// TestBandKernels checks that the unrolled kernels for four and five sections and for the
// shared numerator compute the same bits as the general loops, whatever the block cut.
func TestBandKernels(t *testing.T) {
	x := bankTestSignal(3001, 48000)
	cuts := [][2]int{{0, 1}, {1, 4}, {4, 7}, {7, 1000}, {1000, 3001}}
	for _, n := range []int{4, 5} {
		sec, gain := bankBandPass(n, 8913, 11220, 10000, 48000)
		f := newBankFilter(0, sec, gain, 4, 0)
		g := newBankFilter(0, sec, gain, 4, 0)
		for _, c := range cuts {
			f.run(x[c[0]:c[1]])
		}
		g.runAny(x)
		if f.sum != g.sum || f.w != g.w || f.num != g.num {
			t.Errorf("%d sections: unrolled sum %g state %v, general %g %v", n, f.sum, f.w[n-1], g.sum, g.w[n-1])
		}
	}
	// The shared numerator (1 - z⁻²)⁴ against four differences in turn, whatever the block cut.
	st := make([][2]float64, 4)
	buf := make([]float64, bankNumeratorLen+len(x))
	u, u4 := make([]float64, len(x)), make([]float64, len(x))
	for j, v := range x {
		for i := range st {
			e := &st[i]
			v, e[0], e[1] = v-e[1], v, e[0]
		}
		u[j] = v
	}
	for _, c := range cuts {
		bankNumerator4(buf, x[c[0]:c[1]], u4[c[0]:c[1]], 4, 6)
	}
	for i := range u {
		if math.Abs(u[i]-u4[i]) > 1e-14 {
			t.Fatalf("numerator, sample %d: %g, four differences give %g", i, u4[i], u[i])
		}
	}
}

// TestBandReset checks that Reset returns the bank to its state after construction.
func TestBandReset(t *testing.T) {
	x := bankTestSignal(30001, 44100)
	fresh, _ := NewFilterBank(Third, 44100)
	fresh.Process(x)
	want := fresh.MeanSquare(nil)
	used, _ := NewFilterBank(Third, 44100)
	used.Process(x[:777])
	used.Reset()
	used.Process(x)
	got := used.MeanSquare(nil)
	for k := range want {
		if got[k] != want[k] {
			t.Errorf("band %s after Reset: %g, fresh bank %g", used.bands[k].Nominal, got[k], want[k])
		}
	}
}

// TestBandBroadbandSum checks that the bands of white noise add up to the part of the noise's
// mean square that lies between the lowest and the highest band edge, within 0.1 dB: the
// filters' effective bandwidths equal the nominal ones (energy conservation, common practice;
// the IEC 61260-1:2014 5.12.2 class 1 limit would allow 0.4 dB).
func TestBandBroadbandSum(t *testing.T) {
	const fs = 48000
	r := rand.New(rand.NewPCG(3, 4))
	x := make([]float64, 4*fs)
	for i := range x {
		x[i] = r.NormFloat64()
	}
	fb, _ := NewFilterBank(Third, fs)
	fb.Process(x[:fs])
	fb.MeanSquare(nil)
	fb.Process(x[fs:])
	ms := fb.MeanSquare(nil)
	sum := 0.0
	for _, v := range ms {
		sum += v
	}
	// White noise of variance 1 has the mean square 1 spread evenly up to fs/2; the bands
	// cover 11.22 Hz to 22387 Hz of the 24000 Hz.
	want := (22387.2 - 11.220) / (fs / 2)
	if d := 10 * math.Log10(sum/want); math.Abs(d) > 0.1 {
		t.Errorf("sum of band mean squares of white noise = %.4f, want %.4f (%.2f dB off)", sum, want, d)
	}
}

func TestNewFilterBankErrors(t *testing.T) {
	for _, c := range []struct {
		set BandSet
		fs  float64
	}{
		{BandSet(2), 48000},
		{BandSet(0), 48000},
		{Third, 7999},
		{Third, 192001},
		{Octave, math.NaN()},
		{Octave, math.Inf(1)},
		{Third, 0},
	} {
		if fb, err := NewFilterBank(c.set, c.fs); err == nil || fb != nil {
			t.Errorf("NewFilterBank(%v, %g) = %v, %v; want an error", c.set, c.fs, fb, err)
		}
	}
}

func ExampleBands() {
	for _, fs := range []float64{44100, 48000} {
		b := Bands(Third, fs)
		top := b[len(b)-1]
		fmt.Printf("%g Hz: %d bands, %s Hz to %s Hz (top band %.1f to %.1f Hz)\n",
			fs, len(b), b[0].Nominal, top.Nominal, top.Lower, top.Upper)
	}
	// Output:
	// 44100 Hz: 32 bands, 12.5 Hz to 16000 Hz (top band 14125.4 to 17782.8 Hz)
	// 48000 Hz: 33 bands, 12.5 Hz to 20000 Hz (top band 17782.8 to 22387.2 Hz)
}

func ExampleFilterBank() {
	const fs = 48000
	fb, err := NewFilterBank(Third, fs)
	if err != nil {
		fmt.Println(err)
		return
	}
	// One second of a 1 kHz sine at full scale, after one second for the filters to settle.
	x := make([]float64, fs)
	for i := range x {
		x[i] = math.Sin(2 * math.Pi * 1000 * float64(i) / fs)
	}
	fb.Process(x)
	ms := fb.MeanSquare(nil) // discard the settling second
	fb.Process(x)
	ms = fb.MeanSquare(ms)
	// A microphone of sensitivity -26 dBFS (94 dB SPL reads -26 dBFS, AES17 full scale being
	// the mean square 1/2) puts a full-scale sine at 120 dB SPL.
	const sensitivity = -26.0
	for i, b := range fb.Bands() {
		if b.Nominal == "800" || b.Nominal == "1000" || b.Nominal == "1250" {
			dBFS := 10 * math.Log10(ms[i]/0.5)
			fmt.Printf("%4s Hz: %6.2f dB\n", b.Nominal, dBFS-sensitivity+94)
		}
	}
	// Output:
	//  800 Hz:  90.23 dB
	// 1000 Hz: 120.00 dB
	// 1250 Hz:  97.00 dB
}

// BenchmarkFilterBank measures Process on one second of noise at 48 kHz (one block of 48000
// samples per iteration) and reports the cost per input sample.
func BenchmarkFilterBank(b *testing.B) {
	for _, set := range []BandSet{Third, Octave} {
		b.Run(set.String(), func(b *testing.B) {
			const fs = 48000
			fb, err := NewFilterBank(set, fs)
			if err != nil {
				b.Fatal(err)
			}
			x := bankTestSignal(fs, fs)
			dst := make([]float64, len(fb.Bands()))
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				fb.Process(x)
				dst = fb.MeanSquare(dst)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/fs, "ns/sample")
		})
	}
}

// TestBandEdgeCrossing: adjacent bands cross at -3.0 dB (within 0.25 dB; the design goal of
// issue 18, so that a sine on the edge reads half its energy in each band) at the exact band
// edge fm·G^(1/(2b)) = f(m+1)·G^(-1/(2b)) with fm = 1000·G^(x/b), G = 10^(3/10) (IEC
// 61260-1:2014 Eq. 1, 2, 4, 5), written out here, for every pair at the common rates from 8 to
// 192 kHz. The IEC 61260-1:2014 Table 1 class 1 limits at the edge are 1.2 to 5.3 dB (via
// phonometry filters.py). The bank crosses at -3.1 dB (see bankEdgeDB). Before issue 18, a sine
// on the 1000/1250 Hz edge read 3.64 dB down in each band.
func TestBandEdgeCrossing(t *testing.T) {
	for _, set := range []BandSet{Third, Octave} {
		b := float64(set)
		for _, fs := range []float64{8000, 11025, 16000, 22050, 32000, 44100, 48000, 88200, 96000, 176400, 192000} {
			fb, err := NewFilterBank(set, fs)
			if err != nil {
				t.Fatal(err)
			}
			worst := 0.0
			bands := fb.Bands()
			for i := 0; i+1 < len(bands); i++ {
				edge := 1000 * math.Pow(bankG, float64(bands[i].X)/b) * math.Pow(bankG, 1/(2*b))
				if next := 1000 * math.Pow(bankG, float64(bands[i+1].X)/b) * math.Pow(bankG, -1/(2*b)); math.Abs(next/edge-1) > 1e-12 {
					t.Fatalf("edges %g and %g differ", edge, next)
				}
				for _, j := range []int{i, i + 1} {
					h := cmplx.Abs(fb.Response(j, edge)) / cmplx.Abs(fb.Response(j, 1000*math.Pow(bankG, float64(bands[j].X)/b)))
					d := 20 * math.Log10(h)
					if math.Abs(d+3) > 0.25 {
						t.Errorf("%v at %g Hz: band %s at the edge %.1f Hz reads %.3f dB, want -3.0 ± 0.25", set, fs, bands[j].Nominal, edge, d)
					}
					worst = max(worst, math.Abs(d+3))
				}
			}
			t.Logf("%v at %g Hz: crossing within %.3f dB of -3.0", set, fs, worst)
		}
	}
	// Through Process: a sine of amplitude 1 on the 1000/1250 Hz edge (1122.02 Hz) reads
	// -3.0 ± 0.25 dB in both bands, and the two together hold its mean square, 1/2, within the
	// same 0.25 dB.
	fb, _ := NewFilterBank(Third, 48000)
	i, j := bankIndex(t, fb, "1000"), bankIndex(t, fb, "1250")
	edge := 1000 * math.Pow(bankG, 1.0/6)
	ms := bankMeasureSine(fb, edge, math.Max(bankSettleTime(fb, i), bankSettleTime(fb, j)))
	for _, k := range []int{i, j} {
		if d := 10 * math.Log10(ms[k]/0.5); math.Abs(d+3) > 0.25 {
			t.Errorf("sine on the 1000/1250 Hz edge: band %s reads %.3f dB", fb.bands[k].Nominal, d)
		}
	}
	if d := 10 * math.Log10((ms[i]+ms[j])/0.5); math.Abs(d) > 0.25 {
		t.Errorf("sine on the 1000/1250 Hz edge: the two bands sum to %.3f dB of the sine", d)
	}
}

// TestBandSineEnergySum: for sines across every band, the energies of all bands sum to the
// sine's within -0.86/+0.72 dB, inside the class 1 limits of IEC 61260-1:2014 5.16 for the sum
// of adjacent bands, +0.8/-1.8 dB (via phonometry filters.py). The design goal of issue 18 is a
// sum of 0 dB (power-complementary bands); this bank does not reach it, and the bound is the
// honest one for its design, 0.02 dB outside the worst figures (computed at the rates below:
// one-third octaves -0.33/+0.49 dB, at 48 kHz too, where the bank of issue 18's start reached
// -0.50/+0.59 dB; octaves -0.84/+0.70 dB at 8, 16 and 32 kHz, where each stage holds one octave
// band whose edges lie at 0.18 and 0.36 of its rate). Bands of Butterworth band-pass filters are not power complementary: a sine a little
// inside a band still reads 7 to 9 dB down in its neighbour (fourth order, analog: up to
// +0.2 dB), and the warping of the bilinear transform near each stage's Nyquist frequency adds
// to it. The sum uses the analytic responses at 16 frequencies per band from its lower to its
// upper edge, at rates from 8 to 192 kHz, and Process for a sine at each of 5 frequencies
// across the 1 kHz band at 48 kHz.
func TestBandSineEnergySum(t *testing.T) {
	for _, set := range []BandSet{Third, Octave} {
		for _, fs := range []float64{8000, 11025, 16000, 22050, 32000, 44100, 48000, 88200, 96000, 176400, 192000} {
			fb, err := NewFilterBank(set, fs)
			if err != nil {
				t.Fatal(err)
			}
			bands := fb.Bands()
			lo, hi := 0.0, 0.0
			for i, bd := range bands {
				for s := 0; s <= 16; s++ {
					f := bd.Lower * math.Pow(bd.Upper/bd.Lower, float64(s)/16)
					if i == 0 && s < 8 || i == len(bands)-1 && s > 8 {
						continue // outside the bank's range, there is no neighbour to share with
					}
					sum := 0.0
					for j := range bands {
						h := cmplx.Abs(fb.Response(j, f))
						sum += h * h
					}
					d := 10 * math.Log10(sum)
					lo, hi = min(lo, d), max(hi, d)
					if d < -0.86 || d > 0.72 {
						t.Errorf("%v at %g Hz: a sine at %.1f Hz (band %s) sums to %.3f dB over all bands", set, fs, f, bd.Nominal, d)
					}
				}
			}
			t.Logf("%v at %g Hz: sums of all bands for sines across the bands: %.3f to %+.3f dB", set, fs, lo, hi)
		}
	}
	fb, _ := NewFilterBank(Third, 48000)
	i := bankIndex(t, fb, "1000")
	bd := fb.bands[i]
	for s := 0; s <= 4; s++ {
		f := bd.Lower * math.Pow(bd.Upper/bd.Lower, float64(s)/4)
		ms := bankMeasureSine(fb, f, bankSettleTime(fb, 0))
		sum := 0.0
		for _, v := range ms {
			sum += v
		}
		if d := 10 * math.Log10(sum/0.5); d < -0.86 || d > 0.72 {
			t.Errorf("sine of amplitude 1 at %.1f Hz through Process: the bands sum to %.3f dB of its mean square", f, d)
		}
	}
}

// TestBandDecimatorKernel checks that the unrolled four-coefficient decimator computes the same
// bits as the general loop, with and without the high-pass output, whatever the phase and the
// block cut.
func TestBandDecimatorKernel(t *testing.T) {
	coef := bankHalfBand(bankHalfCoefs, bankHalfPass)
	x := bankTestSignal(1001, 48000)
	a, b := newBankDecimator(coef), newBankDecimator(coef)
	c, d := newBankDecimator(coef), newBankDecimator(coef)
	ya, yb := make([]float64, len(x)), make([]float64, len(x))
	yc, yd := make([]float64, len(x)), make([]float64, len(x))
	hc, hd := make([]float64, len(x)), make([]float64, len(x))
	na, nb, nc, nd := 0, 0, 0, 0
	for _, cut := range [][2]int{{0, 1}, {1, 4}, {4, 7}, {7, 500}, {500, 1001}} {
		na += a.decimate4(x[cut[0]:cut[1]], ya[na:])
		nb += b.decimateAny(x[cut[0]:cut[1]], yb[nb:])
		m := c.decimate4Both(x[cut[0]:cut[1]], yc[nc:], hc[nc:])
		nc += m
		nd += d.decimateBothAny(x[cut[0]:cut[1]], yd[nd:], hd[nd:])
	}
	if na != nb || na != 501 || nc != 501 || nd != 501 {
		t.Fatalf("kept %d, %d, %d and %d samples, want 501", na, nb, nc, nd)
	}
	for i := range na {
		if ya[i] != yb[i] || yc[i] != yb[i] || yd[i] != yb[i] || hc[i] != hd[i] {
			t.Fatalf("sample %d: unrolled %g, general %g; with the high-pass %g %g, %g %g", i, ya[i], yb[i], yc[i], hc[i], yd[i], hd[i])
		}
	}
	// The low-pass is flat within 5e-7 dB up to 0.2 of its input rate and at least 70 dB down
	// from 0.3 of it: the design's own figures (measured 4.3e-7 dB and 70.04 dB), which
	// bankHalfCoefs' comment and the bank's class 1 margins rest on; the class 1 limits of
	// IEC 61260-1:2014 Table 1 themselves are checked band by band, folding included, in
	// TestBandRelativeAttenuation.
	for f := 0.0; f <= 0.5; f += 0.0005 {
		g := 20 * math.Log10(cmplx.Abs(a.response(f, 1)))
		if f <= bankHalfPass && math.Abs(g) > 5e-7 || f >= 0.5-bankHalfPass && g > -70 {
			t.Errorf("half-band low-pass at %g of its rate: %g dB", f, g)
		}
	}
	// The two outputs are power complementary: |H_lo|² + |H_hi|² = 1 (the allpass sum and
	// difference, common practice for such half-band pairs).
	for _, f := range []float64{100, 9000, 12000, 15000, 23000} {
		lo, hi := cmplx.Abs(a.response(f, 48000)), cmplx.Abs(a.responseHigh(f, 48000))
		if e := lo*lo + hi*hi - 1; math.Abs(e) > 1e-12 {
			t.Errorf("at %g Hz: |H_lo|² + |H_hi|² - 1 = %g", f, e)
		}
	}
}
