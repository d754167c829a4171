package reference

import (
	"fmt"
	"math"
	"strconv"
)

// Fractional-octave filters of IEC 61260-1:2014 (octave-band and fractional-octave-band
// filters, class 1 and class 2). b is the bandwidth designator: 1 for octave bands, 3 for
// one-third-octave bands. x is the band number: the band whose exact midband frequency is
// 1000 Hz has x = 0.

const (
	// OctaveRatio is the octave frequency ratio of the base-ten system, G = 10^(3/10)
	// ≈ 1.99526 (IEC 61260-1:2014 Eq. 1, via python-acoustics
	// standards/iec_61260_1_2014.py; value computed).
	OctaveRatio = 1.9952623149688795

	// BandReferenceFrequency is the reference frequency fr of the midband series, 1000 Hz
	// (IEC 61260-1:2014 Eq. 2, via python-acoustics standards/iec_61260_1_2014.py).
	BandReferenceFrequency = 1000.0
)

// MidbandFrequency returns the exact midband frequency in Hz of band x for bandwidth
// designator b (IEC 61260-1:2014 Eq. 2 and 3, via python-acoustics
// standards/iec_61260_1_2014.py):
//
//	fm = fr·G^(x/b)          for odd b
//	fm = fr·G^((2x+1)/(2b))  for even b
func MidbandFrequency(b, x int) float64 {
	if b%2 == 1 {
		return BandReferenceFrequency * math.Pow(OctaveRatio, float64(x)/float64(b))
	}
	return BandReferenceFrequency * math.Pow(OctaveRatio, float64(2*x+1)/float64(2*b))
}

// BandEdges returns the exact lower and upper band-edge frequencies in Hz of band x for
// bandwidth designator b (IEC 61260-1:2014 Eq. 4 and 5, via python-acoustics
// standards/iec_61260_1_2014.py):
//
//	f1 = fm·G^(-1/(2b)),  f2 = fm·G^(+1/(2b))
func BandEdges(b, x int) (lower, upper float64) {
	fm := MidbandFrequency(b, x)
	h := math.Pow(OctaveRatio, 1/(2*float64(b)))
	return fm / h, fm * h
}

// NominalMidband returns the nominal midband frequency of band x as IEC 61260-1:2014 Annex E
// writes it, for octave (b = 1) and one-third-octave (b = 3) bands: the R10 preferred numbers
// 1, 1.25, 1.6, 2, 2.5, 3.15, 4, 5, 6.3, 8 times a power of ten (ISO 266), so "12.5", "31.5",
// "1000", "1250", "12500", "20000". The rule (from memory; the rounding examples of Annex E.3.4
// via phonometry filters.py) is continued past the tabulated range 12.5 Hz to 20 kHz in the
// same way (common practice), so band 14 of b = 3 is "25000". For any other b it returns the
// exact midband frequency rounded to three significant digits.
func NominalMidband(b, x int) string {
	third := x
	switch b {
	case 3:
	case 1:
		third = 3 * x
	default:
		return strconv.FormatFloat(MidbandFrequency(b, x), 'g', 3, 64)
	}
	// R10 mantissas in hundredths; one-third-octave band x = 0 is 1000 Hz = 100·10^1.
	r10 := [10]float64{100, 125, 160, 200, 250, 315, 400, 500, 630, 800}
	i := ((third % 10) + 10) % 10
	exp := (third-i)/10 + 1 // power of ten that multiplies the mantissa in hundredths
	v := r10[i]
	if exp >= 0 {
		v *= math.Pow(10, float64(exp))
	} else {
		v /= math.Pow(10, float64(-exp))
	}
	return strconv.FormatFloat(v, 'f', -1, 64)
}

// NominalThirdOctaveMidbands returns the nominal midband frequencies of the one-third-octave
// bands from 12.5 Hz (x = -19) to 20 kHz (x = 13) as IEC 61260-1:2014 Annex E writes them
// (from memory; the same list heads the columns of IEC 61672-1:2013 Table 3 via
// python-acoustics data/iec_61672_1_2013.csv). Each call returns a fresh slice.
func NominalThirdOctaveMidbands() []string {
	return []string{
		"12.5", "16", "20", "25", "31.5", "40", "50", "63", "80", "100",
		"125", "160", "200", "250", "315", "400", "500", "630", "800", "1000",
		"1250", "1600", "2000", "2500", "3150", "4000", "5000", "6300", "8000", "10000",
		"12500", "16000", "20000",
	}
}

// BreakpointOmega returns the normalised frequency Ω = f/fm on the upper side of the
// pass band at which the octave-band breakpoint G^x of Table 1 falls for a band of bandwidth
// designator b (IEC 61260-1:2014 Formula 9, via phonometry compliance.py):
//
//	Ω = 1 + (G^(1/(2b)) - 1)/(G^(1/2) - 1)·(G^x - 1)
//
// The lower side is the mirror 1/Ω (Formula 10). For b = 1, Ω = G^x.
func BreakpointOmega(b int, x float64) float64 {
	g := OctaveRatio
	return 1 + (math.Pow(g, 1/(2*float64(b)))-1)/(math.Sqrt(g)-1)*(math.Pow(g, x)-1)
}

// BandMaskPoint is one breakpoint of the acceptance limits on the relative attenuation
// ΔA(Ω) = A(Ω) - A(fm) of a band filter, in dB (attenuation positive, so a limit of +70
// means at least 70 dB below the midband response).
type BandMaskPoint struct {
	// X is the breakpoint as a power of the octave ratio: the octave-band breakpoint G^X.
	X float64

	// Omega is the normalised frequency f/fm of the breakpoint on the upper side of the pass
	// band for the band set of the mask (Formula 9); the lower side is 1/Omega (Formula 10).
	Omega float64

	// StopSide is set on the second of the two points at the band edge X = 1/2: the limit
	// that holds just outside the pass band. The first point holds just inside.
	StopSide bool

	// Class1 and Class2 are the acceptance limits on ΔA in dB at the breakpoint.
	Class1, Class2 Tolerance
}

// BandMask returns the breakpoints of IEC 61260-1:2014 Table 1, "Acceptance limits on
// relative attenuation", mapped to bandwidth designator b by Formula 9, lowest Omega first.
// Each call returns a fresh slice. Beyond the last breakpoint (X = 4) the last limits hold.
//
// At the band edge (X = 1/2) the table gives +1.2 … +5.3 dB (class 1); when interpolating
// towards the pass band only the upper limit rises from the X = 3/8 value (the lower limit
// stays -0.4), and towards the stop band only the lower limit falls from X = 1 (the upper
// limit is infinite), so the edge appears twice here, once per side.
//
// Source: IEC 61260-1:2014 Table 1 via phonometry compliance.py (BS EN 61260-1:2014); the
// class limits at X = 0 … 3/8 and 1 … 4 are repeated in IEC 61260-3:2016 Table 1 and C.1 via
// phonometry filters.py, and the b = 3 values of Omega equal Table F.1 (five decimals).
func BandMask(b int) []BandMaskPoint {
	inf := math.Inf(1)
	rows := []struct {
		x                  float64
		stop               bool
		lo1, up1, lo2, up2 float64
	}{
		{0, false, -0.4, 0.4, -0.6, 0.6},
		{1.0 / 8, false, -0.4, 0.5, -0.6, 0.7},
		{1.0 / 4, false, -0.4, 0.7, -0.6, 0.9},
		{3.0 / 8, false, -0.4, 1.4, -0.6, 1.7},
		{1.0 / 2, false, -0.4, 5.3, -0.6, 5.8},
		{1.0 / 2, true, 1.2, inf, 0.8, inf},
		{1, true, 16.6, inf, 15.6, inf},
		{2, true, 40.5, inf, 39.5, inf},
		{3, true, 60.0, inf, 54.0, inf},
		{4, true, 70.0, inf, 60.0, inf},
	}
	m := make([]BandMaskPoint, len(rows))
	for i, r := range rows {
		m[i] = BandMaskPoint{
			X:        r.x,
			Omega:    BreakpointOmega(b, r.x),
			StopSide: r.stop,
			Class1:   Tolerance{Lower: r.lo1, Upper: r.up1},
			Class2:   Tolerance{Lower: r.lo2, Upper: r.up2},
		}
	}
	return m
}

// BandAttenuationLimits returns the acceptance limits of the given class (1 or 2) on the
// relative attenuation ΔA at normalised frequency Ω = f/fm for bandwidth designator b.
// Between breakpoints the limits are interpolated linearly in lg Ω (IEC 61260-1:2014
// Formula 11, via phonometry compliance.py); below the midband the mask is mirrored,
// limits(Ω) = limits(1/Ω) (Formula 10). Exactly at a band edge it returns the edge row of
// Table 1 (+1.2 … +5.3 dB for class 1). It panics if class is not 1 or 2 or Ω ≤ 0.
func BandAttenuationLimits(b, class int, omega float64) Tolerance {
	if class != 1 && class != 2 {
		panic(fmt.Sprintf("reference: filter class %d, want 1 or 2", class))
	}
	if !(omega > 0) {
		panic(fmt.Sprintf("reference: normalised frequency %g, want > 0", omega))
	}
	if omega < 1 {
		omega = 1 / omega
	}
	pick := func(p BandMaskPoint) Tolerance {
		if class == 1 {
			return p.Class1
		}
		return p.Class2
	}
	m := BandMask(b)
	const edge = 4 // index of the pass-side edge point
	if omega == m[edge].Omega {
		return Tolerance{Lower: pick(m[edge+1]).Lower, Upper: pick(m[edge]).Upper}
	}
	last := m[len(m)-1]
	if omega >= last.Omega {
		return pick(last)
	}
	for i := 0; i+1 < len(m); i++ {
		lo, hi := m[i], m[i+1]
		if i == edge { // the two sides of the edge share one Omega
			continue
		}
		if omega < lo.Omega || omega > hi.Omega {
			continue
		}
		t := math.Log10(omega/lo.Omega) / math.Log10(hi.Omega/lo.Omega)
		a, c := pick(lo), pick(hi)
		lerp := func(u, v float64) float64 {
			if math.IsInf(u, 0) || math.IsInf(v, 0) {
				return math.Max(u, v)
			}
			return u + t*(v-u)
		}
		return Tolerance{Lower: lerp(a.Lower, c.Lower), Upper: lerp(a.Upper, c.Upper)}
	}
	panic("reference: unreachable")
}

// ReferenceBandwidth returns the normalised reference bandwidth of bandwidth designator b,
// G^(1/(2b)) - G^(-1/(2b)): 0.70459 for b = 1 and 0.23077 for b = 3 (computed from
// IEC 61260-1:2014 Eq. 4 and 5). It is the width, in units of fm, of the ideal band-pass
// filter against which the effective bandwidth is compared.
func ReferenceBandwidth(b int) float64 {
	h := math.Pow(OctaveRatio, 1/(2*float64(b)))
	return h - 1/h
}

// BandwidthDeviationLimit returns the acceptance limit on the effective-bandwidth deviation
// of the given class: |ΔB| ≤ 0.4 dB for class 1 and 0.6 dB for class 2 (IEC 61260-1:2014
// 5.12.2, via phonometry filters.py), where
//
//	ΔB = 10 lg[ ∫₀^∞ 10^(-ΔA(Ω)/10) dΩ / (G^(1/(2b)) - G^(-1/(2b))) ]
//
// (formula from memory). It panics if class is not 1 or 2.
func BandwidthDeviationLimit(class int) float64 {
	switch class {
	case 1:
		return 0.4
	case 2:
		return 0.6
	}
	panic(fmt.Sprintf("reference: filter class %d, want 1 or 2", class))
}

// AdjacentBandSumLimits returns the acceptance limits on the deviation of the summed
// (energy) output of two adjacent band filters from the input level, for a sine whose
// frequency lies between their midbands: +0.8/-1.8 dB for class 1 and +1.8/-3.8 dB for
// class 2 (IEC 61260-1:2014 5.16, via phonometry filters.py). It panics if class is not 1 or 2.
func AdjacentBandSumLimits(class int) Tolerance {
	switch class {
	case 1:
		return Tolerance{Lower: -1.8, Upper: 0.8}
	case 2:
		return Tolerance{Lower: -3.8, Upper: 1.8}
	}
	panic(fmt.Sprintf("reference: filter class %d, want 1 or 2", class))
}
