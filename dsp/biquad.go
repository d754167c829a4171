package dsp

import (
	"math"
	"math/cmplx"
)

// Section is one second-order IIR section (biquad) with a0 normalised to 1:
//
//	H(z) = (B0 + B1 z⁻¹ + B2 z⁻²) / (1 + A1 z⁻¹ + A2 z⁻²)
//
// A first-order section has B2 = A2 = 0.
type Section struct {
	B0, B1, B2 float64
	A1, A2     float64
}

// Response returns the complex frequency response of s at frequency f (Hz) for sample rate fs.
func (s Section) Response(f, fs float64) complex128 {
	w := 2 * math.Pi * f / fs
	z1 := cmplx.Exp(complex(0, -w))
	z2 := z1 * z1
	num := complex(s.B0, 0) + complex(s.B1, 0)*z1 + complex(s.B2, 0)*z2
	den := complex(1, 0) + complex(s.A1, 0)*z1 + complex(s.A2, 0)*z2
	return num / den
}

// Stable reports whether both poles of s lie strictly inside the unit circle.
func (s Section) Stable() bool {
	// Jury's conditions for 1 + a1 z⁻¹ + a2 z⁻².
	return math.Abs(s.A2) < 1 && math.Abs(s.A1) < 1+s.A2
}

// Cascade is a chain of second-order sections with their state, in transposed direct form II
// with float64 state. The zero value is an empty (pass-through) cascade.
type Cascade struct {
	sec   []Section
	state [][2]float64
	hp    []bool // per section: its numerator is B0·(1 - z⁻¹)², exactly (see highPassNumerator)
}

// NewCascade returns a cascade of copies of the given sections, starting from rest.
func NewCascade(sections ...Section) *Cascade {
	c := &Cascade{
		sec:   append([]Section(nil), sections...),
		state: make([][2]float64, len(sections)),
		hp:    make([]bool, len(sections)),
	}
	for i, s := range sections {
		c.hp[i] = highPassNumerator(s)
	}
	return c
}

// highPassNumerator reports whether s has the numerator B0·(1 - 2z⁻¹ + z⁻²) exactly: B1 = -2·B0
// and B2 = B0 in floating point, as the bilinear transforms of s² or s²/((s + a)(s + b)) give
// (the DC blocker, the C weighting's low-frequency section and the A weighting's extra
// high-passes). Then B1·x = -2·(B0·x) and B2·x = B0·x to the bit, so such a section computes
// B0·x once (highPass2 and highPass1). (Where B0·x is subnormal, below 2.2·10⁻³⁰⁸, doubling it
// after rounding can differ from rounding the doubled product in the last subnormal bit: far
// below any level a meter reports.)
func highPassNumerator(s Section) bool {
	return s.B1 == -2*s.B0 && s.B2 == s.B0 && !math.IsInf(s.B1, 0) && s.B0 != 0
}

// Sections returns a copy of the cascade's sections.
func (c *Cascade) Sections() []Section { return append([]Section(nil), c.sec...) }

// Reset returns the cascade to rest.
func (c *Cascade) Reset() {
	for i := range c.state {
		c.state[i] = [2]float64{}
	}
}

// Step filters one sample.
func (c *Cascade) Step(x float64) float64 {
	for i := range c.sec {
		s := &c.sec[i]
		st := &c.state[i]
		y := s.B0*x + st[0]
		st[0] = s.B1*x - s.A1*y + st[1]
		st[1] = s.B2*x - s.A2*y
		x = y
	}
	return x
}

// Process filters buf in place. It is equivalent to calling Step on each sample in turn, and
// faster, since the sections run two at a time over the whole block with their state in
// registers.
func (c *Cascade) Process(buf []float64) {
	i := 0
	for ; i+1 < len(c.sec); i += 2 {
		if c.hp[i] {
			c.highPass2(i, buf)
		} else {
			c.process2(i, buf)
		}
	}
	if i < len(c.sec) && c.hp[i] {
		c.highPass1(i, buf)
		return
	}
	for ; i < len(c.sec); i++ {
		s := c.sec[i]
		s0, s1 := c.state[i][0], c.state[i][1]
		for n, x := range buf {
			y := s.B0*x + s0
			s0 = s.B1*x - s.A1*y + s1
			s1 = s.B2*x - s.A2*y
			buf[n] = y
		}
		c.state[i] = [2]float64{s0, s1}
	}
}

// process2 runs sections i and i+1 over buf in one loop: the same arithmetic, in the same order
// for each section, as two passes, without storing and loading the samples in between.
func (c *Cascade) process2(i int, buf []float64) {
	s, t := c.sec[i], c.sec[i+1]
	s0, s1 := c.state[i][0], c.state[i][1]
	t0, t1 := c.state[i+1][0], c.state[i+1][1]
	for n, x := range buf {
		y := s.B0*x + s0
		s0 = s.B1*x - s.A1*y + s1
		s1 = s.B2*x - s.A2*y
		z := t.B0*y + t0
		t0 = t.B1*y - t.A1*z + t1
		t1 = t.B2*y - t.A2*z
		buf[n] = z
	}
	c.state[i] = [2]float64{s0, s1}
	c.state[i+1] = [2]float64{t0, t1}
}

// highPass2 is process2 for a section i whose numerator is B0·(1 - z⁻¹)² (highPassNumerator),
// followed by any section. With g = B0·x, the first section's
//
//	s0 ← B1·x - A1·y + s1 = -(2g) - A1·y + s1 = s1 - (2g + A1·y),
//	s1 ← B2·x - A2·y = g - A2·y
//
// are the same bits as the general form (doubling and negation are exact, and rounding is
// symmetric), for one multiplication and one copy less.
func (c *Cascade) highPass2(i int, buf []float64) {
	s, t := &c.sec[i], &c.sec[i+1]
	s0, s1 := c.state[i][0], c.state[i][1]
	t0, t1 := c.state[i+1][0], c.state[i+1][1]
	for n, x := range buf {
		g := s.B0 * x
		y := g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		z := t.B0*y + t0
		t0 = t.B1*y - t.A1*z + t1
		t1 = t.B2*y - t.A2*z
		buf[n] = z
	}
	c.state[i] = [2]float64{s0, s1}
	c.state[i+1] = [2]float64{t0, t1}
}

// processTo filters src into dst (len(dst) ≥ len(src); they may be one slice) and returns
// Σy² of the outputs y, summed in order: the same bits as copying src to dst, Process(dst) and
// summing the squares of dst, without the copy and the second pass for the shapes the meter
// uses (a high-pass section alone, or followed by one other section).
func (c *Cascade) processTo(dst, src []float64) float64 {
	dst = dst[:len(src)]
	if c.hp != nil && c.hp[0] {
		switch len(c.sec) {
		case 1:
			return c.highPass1To(dst, src)
		case 2:
			return c.highPass2To(dst, src)
		}
	}
	if len(src) > 0 && &dst[0] != &src[0] {
		copy(dst, src)
	}
	c.Process(dst)
	var sum float64
	for _, v := range dst {
		sum += v * v
	}
	return sum
}

// highPass2To is highPass2 for sections 0 and 1 from src into dst (of one length), with Σy².
// It takes two samples per turn, which spares the compiler's register shuffles at the loop's
// end; the arithmetic and the order of the sum are those of one sample per turn.
func (c *Cascade) highPass2To(dst, src []float64) (sum float64) {
	s, t := &c.sec[0], &c.sec[1]
	s0, s1 := c.state[0][0], c.state[0][1]
	t0, t1 := c.state[1][0], c.state[1][1]
	dst = dst[:len(src)]
	n := len(src) &^ 1
	x2, y2 := src[:n], dst[:n]
	for i := 1; i < len(x2); i += 2 { // i is the second sample: one bounds check for both
		g := s.B0 * x2[i-1]
		y := g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		z := t.B0*y + t0
		t0 = t.B1*y - t.A1*z + t1
		t1 = t.B2*y - t.A2*z
		y2[i-1] = z
		sum += z * z
		g = s.B0 * x2[i]
		y = g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		z = t.B0*y + t0
		t0 = t.B1*y - t.A1*z + t1
		t1 = t.B2*y - t.A2*z
		y2[i] = z
		sum += z * z
	}
	for i := n; i < len(src); i++ {
		g := s.B0 * src[i]
		y := g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		z := t.B0*y + t0
		t0 = t.B1*y - t.A1*z + t1
		t1 = t.B2*y - t.A2*z
		dst[i] = z
		sum += z * z
	}
	c.state[0] = [2]float64{s0, s1}
	c.state[1] = [2]float64{t0, t1}
	return sum
}

// highPass1To is highPass1 for section 0 from src into dst (of one length), with Σy², two
// samples per turn as highPass2To.
func (c *Cascade) highPass1To(dst, src []float64) (sum float64) {
	s := &c.sec[0]
	s0, s1 := c.state[0][0], c.state[0][1]
	dst = dst[:len(src)]
	n := len(src) &^ 1
	x2, y2 := src[:n], dst[:n]
	for i := 1; i < len(x2); i += 2 {
		g := s.B0 * x2[i-1]
		y := g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		y2[i-1] = y
		sum += y * y
		g = s.B0 * x2[i]
		y = g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		y2[i] = y
		sum += y * y
	}
	for i := n; i < len(src); i++ {
		g := s.B0 * src[i]
		y := g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		dst[i] = y
		sum += y * y
	}
	c.state[0] = [2]float64{s0, s1}
	return sum
}

// highPass1 is highPass2's first section alone.
func (c *Cascade) highPass1(i int, buf []float64) {
	s := &c.sec[i]
	s0, s1 := c.state[i][0], c.state[i][1]
	for n, x := range buf {
		g := s.B0 * x
		y := g + s0
		s0 = s1 - (g + g + s.A1*y)
		s1 = g - s.A2*y
		buf[n] = y
	}
	c.state[i] = [2]float64{s0, s1}
}

// Response returns the complex frequency response of the whole cascade at f for sample rate fs.
func (c *Cascade) Response(f, fs float64) complex128 {
	return CascadeResponse(c.sec, f, fs)
}

// CascadeResponse returns the complex frequency response of the sections in series.
func CascadeResponse(sections []Section, f, fs float64) complex128 {
	h := complex(1, 0)
	for _, s := range sections {
		h *= s.Response(f, fs)
	}
	return h
}

// GainDB returns 20 lg |h|, the gain in decibels of a complex response.
func GainDB(h complex128) float64 { return 20 * math.Log10(cmplx.Abs(h)) }
