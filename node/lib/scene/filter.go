package scene

import (
	"math"
	"math/cmplx"
)

// section is a second-order IIR section in transposed direct form II (a first-order section
// has b2 = a2 = 0). Coefficients are normalised so that a0 = 1.
type section struct {
	b0, b1, b2, a1, a2 float64
	z1, z2             float64
}

func (s *section) step(x float64) float64 {
	y := s.b0*x + s.z1
	s.z1 = s.b1*x - s.a1*y + s.z2
	s.z2 = s.b2*x - s.a2*y
	return y
}

// response returns the section's complex frequency response at f Hz.
func (s *section) response(f, fs float64) complex128 {
	z1 := cmplx.Exp(complex(0, -2*math.Pi*f/fs)) // z^-1
	z2 := z1 * z1
	return (complex(s.b0, 0) + complex(s.b1, 0)*z1 + complex(s.b2, 0)*z2) /
		(1 + complex(s.a1, 0)*z1 + complex(s.a2, 0)*z2)
}

// chain is a cascade of sections.
type chain []section

func (c chain) step(x float64) float64 {
	for i := range c {
		x = c[i].step(x)
	}
	return x
}

// power returns |H(f)|² of the cascade.
func (c chain) power(f, fs float64) float64 {
	h := complex(1, 0)
	for i := range c {
		h *= c[i].response(f, fs)
	}
	r := cmplx.Abs(h)
	return r * r
}

// bilinear1 maps the analog first-order section (s + wz)/(s + wp) (corner frequencies in Hz;
// zHz = 0 gives s/(s + wp), a high-pass; zHz < 0 gives wp/(s + wp), a low-pass) to z with the
// bilinear transform, prewarping the pole frequency.
func bilinear1(zHz, pHz, fs float64) section {
	k := 2 * fs
	warp := func(f float64) float64 { return k * math.Tan(math.Pi*f/fs) }
	wp := warp(pHz)
	var n0, n1 float64 // numerator of the analog section: n1·s + n0
	switch {
	case zHz < 0:
		n1, n0 = 0, wp
	case zHz == 0:
		n1, n0 = 1, 0
	default:
		n1, n0 = 1, warp(zHz)
	}
	a0 := k + wp
	return section{
		b0: (n1*k + n0) / a0,
		b1: (n0 - n1*k) / a0,
		a1: (wp - k) / a0,
	}
}

// lowpass2 and bandpass2 are the second-order sections of the "Cookbook formulae for audio EQ
// biquad filter coefficients" (R. Bristow-Johnson), a handbook design.
func lowpass2(f0, q, fs float64) section {
	w := 2 * math.Pi * f0 / fs
	alpha := math.Sin(w) / (2 * q)
	c := math.Cos(w)
	a0 := 1 + alpha
	return section{b0: (1 - c) / 2 / a0, b1: (1 - c) / a0, b2: (1 - c) / 2 / a0, a1: -2 * c / a0, a2: (1 - alpha) / a0}
}

func bandpass2(f0, q, fs float64) section {
	w := 2 * math.Pi * f0 / fs
	alpha := math.Sin(w) / (2 * q)
	c := math.Cos(w)
	a0 := 1 + alpha
	return section{b0: alpha / a0, b2: -alpha / a0, a1: -2 * c / a0, a2: (1 - alpha) / a0}
}

// Constants of the A-weighting of IEC 61672-1:2013, Annex E (E.1, E.6): the pole frequencies
// f1 to f4 in Hz.
const (
	af1 = 20.598997
	af2 = 107.65265
	af3 = 737.86223
	af4 = 12194.217
)

// aPower returns the A-weighting as a power ratio, 10^(A(f)/10), from IEC 61672-1:2013
// Annex E, formula E.6:
//
//	A(f) = 20 lg[ f4² f⁴ / ((f² + f1²) (f² + f2²)^½ (f² + f3²)^½ (f² + f4²)) ] - A1000,
//
// with A1000 the value of the bracket at 1 kHz (-2.000 dB), so that A(1 kHz) = 0.
func aPower(f float64) float64 {
	raw := func(f float64) float64 {
		f2 := f * f
		r := af4 * af4 * f2 * f2 / ((f2 + af1*af1) * math.Sqrt(f2+af2*af2) * math.Sqrt(f2+af3*af3) * (f2 + af4*af4))
		return r * r
	}
	return raw(f) / raw(1000)
}

// weightedPower returns the A-weighted (aWeighted) or unweighted mean square of white noise of
// unit variance passed through c at sample rate fs, integrating |H(f)|² (times the weighting)
// over 0 to fs/2 with the midpoint rule on n bins: the noise's one-sided power spectral density
// is 2/fs per hertz.
func (c chain) weightedPower(fs float64, aWeighted bool) float64 {
	const n = 1 << 14
	df := fs / 2 / n
	var sum float64
	for i := 0; i < n; i++ {
		f := (float64(i) + 0.5) * df
		p := c.power(f, fs)
		if aWeighted {
			p *= aPower(f)
		}
		sum += p
	}
	return sum * df * 2 / fs
}
