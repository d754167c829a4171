package dsp

import "math"

// Peak detection between samples. A sampled signal's largest sample can miss the true peak of
// the band-limited waveform by up to 20 lg cos(π f/fs): 1.25 dB for an 8 kHz cycle at 48 kHz.
// peakDetector reconstructs the waveform at four points per sample period with a polyphase
// windowed-sinc interpolator (the true-peak method of oversampling, as audio metering practice
// does it) and keeps the largest magnitude.
//
// To stay cheap, the interpolator runs only where the waveform's peak can be: in the two sample
// periods on either side of a sample whose magnitude is a local maximum, and only when that
// sample reaches 1/√2 of the running peak (-3 dB: near its crest a sine below fs/4 never rises
// more than that above its nearest sample, 1/cos(π f/fs)). Content above fs/4 (12 kHz at
// 48 kHz), which the C weighting attenuates by 4 dB and more, can be missed between samples
// when it is the only loud thing in an interval. A tone costs four interpolations per cycle,
// noise far fewer.
//
// An exact bound would not skip more: an interpolated value is at most Σ|h_k|·max|x| over the
// taps' window, and Σ|h_k| is 1.69 (phases 1/4, 3/4) to 1.95 (phase 2/4), so the bound stays
// below the running peak only where every sample of the window is below 0.51 to 0.59 of it,
// which the 1/√2 gate on the centre sample already excludes.
const (
	peakPhases  = 4  // interpolation points per sample period
	peakHalfLen = 8  // taps on each side of the interpolation point
	peakTaps    = 16 // taps per phase (2·peakHalfLen)
)

// peakDetector holds the last peakTaps-1 samples and the interval's peak magnitude.
//
// Samples are examined in pairs (s0, s1) of neighbours; the pair whose s0 is sample i is examined
// when sample i+peakHalfLen arrives, so that the interpolator has its look-ahead. A peak is
// therefore attributed to the interval that holds the sample peakHalfLen periods after it
// (0.17 ms at 48 kHz), whatever the block sizes.
type peakDetector struct {
	coef [peakPhases - 1][peakTaps]float64 // phases 1/4, 2/4, 3/4
	win  [peakTaps - 1 + chunk]float64     // history, then the current chunk
	max  float64                           // largest magnitude found in the current interval
	cand [chunk + 1]int32                  // scratch: positions in win that may start a peak
}

// newPeakDetector designs the interpolator: a Kaiser-windowed sinc (β = 8), each phase
// normalised to unit gain at 0 Hz.
func newPeakDetector() peakDetector {
	var d peakDetector
	const beta = 8.0
	i0b := besselI0(beta)
	for p := 1; p < peakPhases; p++ {
		frac := float64(p) / peakPhases
		var sum float64
		for j := 0; j < peakTaps; j++ {
			// Tap j multiplies sample n-(peakTaps-1)+j, where n is the newest sample; the
			// interpolation point lies frac after sample n-peakHalfLen, so tap j sits t periods
			// from it.
			t := float64(j-(peakTaps-1-peakHalfLen)) - frac
			w := t / float64(peakHalfLen)
			win := 0.0
			if w > -1 && w < 1 {
				win = besselI0(beta*math.Sqrt(1-w*w)) / i0b
			}
			c := sinc(t) * win
			d.coef[p-1][j] = c
			sum += c
		}
		for j := range d.coef[p-1] {
			d.coef[p-1][j] /= sum
		}
	}
	return d
}

// buf returns the part of the detector's window that process reads a chunk of n samples from
// (n ≤ chunk): a caller that writes its samples there spares process a copy.
func (d *peakDetector) buf(n int) []float64 { return d.win[peakTaps-1 : peakTaps-1+n] }

// process examines a chunk of at most chunk samples.
func (d *peakDetector) process(x []float64) {
	const h = peakTaps - 1
	n := len(x)
	if n == 0 {
		return
	}
	w := d.win[:h+n]
	if &x[0] != &w[h] {
		copy(w[h:], x)
	}
	m, g, nc := d.begin()
	for i := peakLo + 1; i <= peakLo+n; i++ {
		i += firstReaching(w[i:peakLo+n+1], g)
		if i > peakLo+n {
			break
		}
		m, g, nc = d.note(i, m, nc)
	}
	d.finish(n, m, nc)
}

// processPeakPair is process for two detectors whose chunks of n samples have been written in
// place (buf): one loop scans both, with the same candidates for each as process finds.
func processPeakPair(a, b *peakDetector, n int) {
	if n == 0 {
		return
	}
	const h = peakTaps - 1
	wa, wb := a.win[:h+n], b.win[:h+n]
	ma, ga, nca := a.begin()
	mb, gb, ncb := b.begin()
	wa, wb = wa[:peakLo+n+1], wb[:peakLo+n+1]
	for i := peakLo + 1; i <= peakLo+n; i++ {
		i = firstReaching2(wa, wb, i, ga, gb)
		if i > peakLo+n {
			break
		}
		if math.Abs(wa[i]) >= ga {
			ma, ga, nca = a.note(i, ma, nca)
		}
		if math.Abs(wb[i]) >= gb {
			mb, gb, ncb = b.note(i, mb, ncb)
		}
	}
	a.finish(n, ma, nca)
	b.finish(n, mb, ncb)
}

// peakLo is the window index of the first sample of the first pair a chunk examines: the pair
// starting at w[j] uses w[j-peakLo : j+peakHalfLen+1], and with peakTaps-1 samples of history, j
// runs from peakLo to peakLo+n-1.
const peakLo = peakTaps - 1 - peakHalfLen

// begin starts the scan of a chunk in the window. The scan finds the running peak of the
// samples and, as candidates, the samples that reach 1/√2 of the running peak so far: a superset
// of those that reach 1/√2 of the chunk's final peak, which are the only ones near which the
// waveform can rise above it. w[peakLo] ends the previous chunk and is already in d.max; it is a
// candidate if it reaches the gate. begin returns the running peak, its gate and the number of
// candidates.
func (d *peakDetector) begin() (m, g float64, nc int) {
	m = d.max
	g = m * math.Sqrt2 / 2
	if math.Abs(d.win[peakLo]) >= g {
		d.cand[0] = peakLo
		nc = 1
	}
	return m, g, nc
}

// note records the sample at window index i, which reaches the gate, as a candidate, and returns
// the running peak, its gate and the number of candidates.
func (d *peakDetector) note(i int, m float64, nc int) (float64, float64, int) {
	d.cand[nc] = int32(i)
	if a := math.Abs(d.win[i]); a > m {
		m = a
	}
	return m, m * math.Sqrt2 / 2, nc + 1
}

// finish examines the candidates of a chunk of n samples whose scan ended with the running peak
// m, keeps the interval's peak and moves the window's history along.
func (d *peakDetector) finish(n int, m float64, nc int) {
	const h = peakTaps - 1
	const lo = peakLo
	w := d.win[:h+n]
	cand := d.cand[:nc]
	// The waveform's peak lies next to a sample whose magnitude is a local maximum: examine
	// the pairs on either side of such samples, when they reach 1/√2 of the peak. The pair
	// (j, j+1) is examined once, in order of j, exactly when one of its samples reaches that.
	gate := m * math.Sqrt2 / 2
	last := lo - 1 // the last pair examined
	for _, c := range cand {
		i := int(c)
		if math.Abs(w[i]) < gate {
			continue
		}
		for j := max(i-1, last+1, lo); j <= i && j < lo+n; j++ {
			last = j
			a0, a1 := math.Abs(w[j]), math.Abs(w[j+1])
			peak0 := a0 >= math.Abs(w[j-1]) && a0 >= a1
			peak1 := a1 >= a0 && a1 >= math.Abs(w[j+2])
			if !peak0 && !peak1 {
				continue
			}
			y1, y2, y3 := d.interpolate((*[peakTaps]float64)(w[j-lo : j-lo+peakTaps]))
			m = max(m, math.Abs(y1))
			m = max(m, math.Abs(y2))
			m = max(m, math.Abs(y3))
		}
	}
	d.max = m
	copy(d.win[:h], w[n:])
}

// firstReaching returns the index of the first sample of x whose magnitude is at least g, or
// len(x): a loop of two comparisons per sample (v ≥ g or v ≤ -g, the same test as |v| ≥ g).
func firstReaching(x []float64, g float64) int {
	ng := -g
	for i, v := range x {
		if v >= g || v <= ng {
			return i
		}
	}
	return len(x)
}

// firstReaching2 is firstReaching for two signals of one length, from index i on: the first
// index at which either reaches its gate, or len(x).
func firstReaching2(x, y []float64, i int, gx, gy float64) int {
	y = y[:len(x)]
	ngx, ngy := -gx, -gy
	for i = max(i, 0); i < len(x); i++ {
		if v, u := x[i], y[i]; v >= gx || v <= ngx || u >= gy || u <= ngy {
			return i
		}
	}
	return len(x)
}

// interpolate returns the waveform at the three interpolation points of the window s (phases
// 1/4, 2/4 and 3/4 after s[peakTaps-1-peakHalfLen]). Each sum runs over the taps in order, as
// a loop would add them; the three share each sample's load.
func (d *peakDetector) interpolate(s *[peakTaps]float64) (y1, y2, y3 float64) {
	c1, c2, c3 := &d.coef[0], &d.coef[1], &d.coef[2]
	v := s[0]
	y1, y2, y3 = c1[0]*v, c2[0]*v, c3[0]*v
	v = s[1]
	y1 += c1[1] * v
	y2 += c2[1] * v
	y3 += c3[1] * v
	v = s[2]
	y1 += c1[2] * v
	y2 += c2[2] * v
	y3 += c3[2] * v
	v = s[3]
	y1 += c1[3] * v
	y2 += c2[3] * v
	y3 += c3[3] * v
	v = s[4]
	y1 += c1[4] * v
	y2 += c2[4] * v
	y3 += c3[4] * v
	v = s[5]
	y1 += c1[5] * v
	y2 += c2[5] * v
	y3 += c3[5] * v
	v = s[6]
	y1 += c1[6] * v
	y2 += c2[6] * v
	y3 += c3[6] * v
	v = s[7]
	y1 += c1[7] * v
	y2 += c2[7] * v
	y3 += c3[7] * v
	v = s[8]
	y1 += c1[8] * v
	y2 += c2[8] * v
	y3 += c3[8] * v
	v = s[9]
	y1 += c1[9] * v
	y2 += c2[9] * v
	y3 += c3[9] * v
	v = s[10]
	y1 += c1[10] * v
	y2 += c2[10] * v
	y3 += c3[10] * v
	v = s[11]
	y1 += c1[11] * v
	y2 += c2[11] * v
	y3 += c3[11] * v
	v = s[12]
	y1 += c1[12] * v
	y2 += c2[12] * v
	y3 += c3[12] * v
	v = s[13]
	y1 += c1[13] * v
	y2 += c2[13] * v
	y3 += c3[13] * v
	v = s[14]
	y1 += c1[14] * v
	y2 += c2[14] * v
	y3 += c3[14] * v
	v = s[15]
	y1 += c1[15] * v
	y2 += c2[15] * v
	y3 += c3[15] * v
	return y1, y2, y3
}

// take returns the interval's peak magnitude and starts a new interval.
func (d *peakDetector) take() float64 {
	m := d.max
	d.max = 0
	return m
}

func sinc(x float64) float64 {
	if x == 0 {
		return 1
	}
	return math.Sin(math.Pi*x) / (math.Pi * x)
}

// besselI0 is the modified Bessel function of the first kind, order 0 (power series).
func besselI0(x float64) float64 {
	sum, term := 1.0, 1.0
	for k := 1; k < 50; k++ {
		term *= (x / (2 * float64(k))) * (x / (2 * float64(k)))
		sum += term
		if term < sum*1e-17 {
			break
		}
	}
	return sum
}
