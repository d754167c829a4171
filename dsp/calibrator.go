package dsp

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/dsp/fourier"

	"github.com/leqnode/leqnode/dsp/reference"
)

// Calibrator detection defaults. A field check holds a sound calibrator on the microphone: a
// steady sine near 1 kHz at a stated level, usually 94 dB or 114 dB.
const (
	// CalibratorFrequency is the nominal frequency of a sound calibrator, 1 kHz (the
	// reference frequency of IEC 61672-1:2013, from memory; the usual frequency of IEC 60942
	// calibrators).
	CalibratorFrequency = 1000.0

	// CalibratorBlock is the length in seconds of the blocks the detector judges: each gives
	// one short-term level, one spectrum and one phase of the tone.
	CalibratorBlock = 0.25

	// DefaultCalibratorFrequencyTolerance is the relative distance from CalibratorFrequency
	// within which a tone counts as a calibrator's: 2 %. It is wider than the ±0.7 % of an IEC
	// 60942:2017 class 1 calibrator (Table 4) so that a sample clock that runs off does not hide
	// the check; CalibratorTolerances judges the frequency afterwards.
	DefaultCalibratorFrequencyTolerance = 0.02

	// DefaultCalibratorDominance is how far, in dB, the tone's one-third-octave band must lie
	// above every other one-third-octave band: 20 dB.
	DefaultCalibratorDominance = 20.0

	// DefaultCalibratorStability is the largest spread, in dB, of the block levels of a stable
	// tone: 0.1 dB (max - min of the 0.25 s Leqs).
	DefaultCalibratorStability = 0.1

	// DefaultCalibratorMinStable is the shortest stable tone, in seconds, that counts: 5 s.
	DefaultCalibratorMinStable = 5.0
)

// CalibratorConfig sets up a CalibratorDetector. Zero fields take the defaults above.
type CalibratorConfig struct {
	// SampleRate in Hz, 8000 to 192000.
	SampleRate float64

	// FrequencyTolerance is the relative distance from 1 kHz that a tone may have (default
	// 0.02). Wider lets other tones through; narrower may miss a check when the converter's
	// clock runs off.
	FrequencyTolerance float64

	// DominanceDB is the margin by which the tone's one-third-octave band must exceed every
	// other band (default 20 dB). A smaller margin lets a calibrator be found in loud
	// surroundings, and also lets a loud tonal source (an alarm, a whistle) be taken for one.
	DominanceDB float64

	// StabilityDB is the largest spread of block levels in a stable tone (default 0.1 dB).
	// Widening it accepts a calibrator held loosely, at the cost of a less certain level.
	StabilityDB float64

	// MinStable is the shortest stable stretch in seconds that is reported (default 5 s, at
	// least 1 s).
	MinStable float64

	// MaxStable, when positive, reports a stable stretch as soon as it lasts this many seconds
	// and then starts a new one, so that a calibrator left on for minutes gives a result early.
	// Zero reports a stretch only when it ends (or at Flush). It must not be below MinStable.
	MaxStable float64

	// Diagnose analyses the spectrum of every block, not only of those that may hold a 1 kHz
	// tone, so that Candidate can say what was found when no calibrator was: a tone at another
	// frequency, too little above the background, drifting or too short. Trade-off: an FFT per
	// block, about six times the detector's cost in ordinary sound; meant for checking a
	// recording, not for the running node.
	Diagnose bool
}

// ToneCandidate describes the most persistent steady tone a CalibratorDetector saw (with
// CalibratorConfig.Diagnose): the longest run of blocks whose strongest spectral line stayed
// within 1.5 Hz and whose one-third-octave band stood at least CandidateDominance above every
// other band.
type ToneCandidate struct {
	// FrequencyHz is the mean coarse frequency of the run's strongest line.
	FrequencyHz float64
	// LevelDBFS is the Leq of the run, dBFS.
	LevelDBFS float64
	// DominanceDB is the largest margin, over the run's blocks, of the tone's band above the
	// strongest other band.
	DominanceDB float64
	// Seconds is the run's length.
	Seconds float64
	// SteadySeconds is the longest stretch of the run whose block levels stayed within the
	// detector's StabilityDB, by the rule stable stretches follow: a calibrator needs
	// MinStable seconds of it.
	SteadySeconds float64
}

// CandidateDominance is the least margin, in dB, of a band above every other band for the
// block to count toward a ToneCandidate: 3 dB, enough to tell a tone from broadband sound.
const CandidateDominance = 3.0

// Detection is one stable calibrator tone found by a CalibratorDetector. Sample indices count
// the samples fed since the detector was built or reset, from 0.
type Detection struct {
	// Start and End delimit the stable window [Start, End) over which the level and the
	// frequency were measured. They fall on block boundaries (CalibratorBlock).
	Start, End int64

	// ToneStart is the first sample of the run of tonal blocks that holds the window: where
	// the calibrator's tone began, fade-in included. Mark the data from here (with a margin)
	// as calibrating, not only the stable window.
	ToneStart int64

	// MeanSquare is the mean square of the samples (full scale ±1.0) over the window, after
	// the DC blocker of DCBlockSections: the Z-weighted Leq of the window, as a mean square.
	MeanSquare float64

	// LevelDBFS is DBFS(MeanSquare): the level of the window in dBFS (AES17). With the
	// calibrator's stated level Lref, the microphone sensitivity is LevelDBFS + 94 - Lref.
	LevelDBFS float64

	// FrequencyHz is the tone's frequency, from the slope of its phase over the window (see
	// CalibratorDetector).
	FrequencyHz float64

	// StabilityDB is the spread (max - min) of the 0.25 s block levels over the window, dB.
	StabilityDB float64

	// DominanceDB is the smallest margin, over the window's blocks, of the tone's
	// one-third-octave band above the strongest other band, dB.
	DominanceDB float64

	// Stable is the window's length in seconds, (End - Start) / fs.
	Stable float64

	// Clipped counts the window's samples at or beyond ClipThreshold. A clipped tone's level
	// is wrong: the calibrator is too loud for the microphone and converter.
	Clipped int64
}

// CalibratorDetector finds sound calibrator tones in a stream of samples: a steady sine near
// 1 kHz (within FrequencyTolerance, default 2 %), whose one-third-octave band lies at least
// DominanceDB (20 dB) above every other one-third-octave band, at a level that stays within
// StabilityDB (0.1 dB) for at least MinStable (5 s). It measures the tone's level as the Leq
// over the stable window and its frequency to better than 0.01 Hz.
//
// # Method
//
// The samples pass the DC blocker of DCBlockSections and are cut into blocks of
// CalibratorBlock (0.25 s), counted from the first sample, so that results never depend on how
// the caller cuts its input. For each block in which a second-order band-pass at 1 kHz (Q =
// 4.33, the one-third-octave width) passes at least half the energy, the detector computes
//
//   - the block's mean square, whose level is the block level;
//   - the power spectrum of the block's last 2^k samples (the largest power of two that fits)
//     through a Hann window, with gonum.org/v1/gonum/dsp/fourier; the power of the bins
//     between the band edges of IEC 61260-1:2014 (Eq. 4, 5) gives the one-third-octave band
//     powers, from the 20 Hz band up to the last band below fs/2; the strongest bin, refined by
//     a parabola through the logarithms of its neighbours, gives a coarse frequency (within a
//     fraction of a bin: about 0.3 Hz at 48 kHz);
//   - the complex amplitude of the tone, z = Σ x[n] e^(-i 2π fr n / fs), against a reference
//     frequency fr fixed when the stable stretch began (its first block's coarse frequency).
//
// A block is tonal when its strongest bin lies within the frequency tolerance of 1 kHz and in
// the 1 kHz band, and that band is DominanceDB above every other. Consecutive tonal blocks
// whose levels stay within StabilityDB of each other and whose coarse frequencies stay within
// 1.5 Hz of fr form a stable stretch; a block that breaks the spread starts a new stretch.
// The stretch's frequency is fr + s/(2π), where s is the least-squares slope of the unwrapped
// phase of z against the block centre times: since |f - fr| is far below the 2 Hz at which the
// phase would advance by half a turn per block, the phase unwraps without ambiguity, and the
// fit over 20 or more blocks at the signal-to-noise ratio of a calibrator measures the
// frequency to a few thousandths of a hertz. The level is 10 lg of the mean square over the
// stretch, the Leq of the window.
//
// A stretch is reported when it ends (a block that is not tonal or breaks the spread), when it
// reaches MaxStable, or at Flush; stretches shorter than MinStable are dropped.
//
// Cost: a DC blocker and a 1 kHz band-pass per sample; only a block in which the band-pass
// output holds at least half the energy (as it must when the tone dominates) gets the FFT
// (8192 points at 48 kHz) and, when tonal, the complex amplitude: about 0.13 times the work
// of a Meter without bands in ordinary sound, 1.2 times while a calibrator is on (medians of
// BenchmarkCalibratorDetector and BenchmarkMeter in one run). Process allocates nothing. A
// CalibratorDetector is not safe for concurrent use.
type CalibratorDetector struct {
	cfg      CalibratorConfig
	fs       float64
	blockLen int // samples per block
	nfft     int

	dc     *Cascade
	buf    []float64 // the block being filled, DC-blocked
	gate   *Cascade  // band-pass around 1 kHz: the cheap test that spares most FFTs
	gbuf   []float64 // scratch for the band-pass
	gsum   float64   // energy of the band-pass output over the block so far
	gclip  int64     // clipped samples in the block so far
	fill   int
	pos    int64 // samples fed since construction or Reset
	fft    *fourier.FFT
	window []float64
	seq    []float64
	coef   []complex128
	band   []int16 // band slot of each FFT bin, -1 for none
	bandP  []float64
	toneSl int // band slot of the 1 kHz band

	// The run of tonal blocks and the stable stretch inside it.
	toneStart int64 // first sample of the tonal run, -1 when the last block was not tonal
	run       stretch

	// With Diagnose: the run of candidate blocks, the best run so far and the largest
	// dominance seen.
	cand, best candRun
	maxDom     float64
}

// candRun accumulates a run of blocks holding one steady tone (any frequency).
type candRun struct {
	f0, fsum, sumSq, dmax float64
	blocks                int
	smin, smax            float64 // block levels of the steady stretch in progress
	steady, bestSteady    int     // its blocks, and the most of any steady stretch
}

// stretch accumulates one stable stretch.
type stretch struct {
	active     bool
	start, end int64
	fr         float64 // reference frequency of the phase measurement
	sumSq      float64 // Σ x² over the stretch
	lmin, lmax float64 // block levels, dB
	dom        float64 // smallest dominance
	blocks     int
	clipped    int64
	prevPhase  float64
	phase      float64 // unwrapped phase of the last block
	// least-squares sums of (t, phase)
	st, sp, stt, stp float64
}

// NewCalibratorDetector returns a detector at rest for the configuration's sample rate.
func NewCalibratorDetector(cfg CalibratorConfig) (*CalibratorDetector, error) {
	fs := cfg.SampleRate
	if !(fs >= WeightingMinRate && fs <= WeightingMaxRate) {
		return nil, fmt.Errorf("dsp: calibrator detector: sample rate %g Hz out of range: use %d to %d Hz", fs, WeightingMinRate, WeightingMaxRate)
	}
	def := func(v *float64, d float64) {
		if *v == 0 {
			*v = d
		}
	}
	def(&cfg.FrequencyTolerance, DefaultCalibratorFrequencyTolerance)
	def(&cfg.DominanceDB, DefaultCalibratorDominance)
	def(&cfg.StabilityDB, DefaultCalibratorStability)
	def(&cfg.MinStable, DefaultCalibratorMinStable)
	switch {
	case !(cfg.FrequencyTolerance > 0 && cfg.FrequencyTolerance <= 0.1):
		return nil, fmt.Errorf("dsp: calibrator detector: frequency tolerance %g out of range: use 0 to 0.1 (default 0.02)", cfg.FrequencyTolerance)
	case !(cfg.DominanceDB > 0 && cfg.DominanceDB <= 80):
		return nil, fmt.Errorf("dsp: calibrator detector: dominance %g dB out of range: use 0 to 80 dB (default 20)", cfg.DominanceDB)
	case !(cfg.StabilityDB > 0 && cfg.StabilityDB <= 6):
		return nil, fmt.Errorf("dsp: calibrator detector: stability %g dB out of range: use 0 to 6 dB (default 0.1)", cfg.StabilityDB)
	case !(cfg.MinStable >= 1 && cfg.MinStable <= 3600):
		return nil, fmt.Errorf("dsp: calibrator detector: minimum stable time %g s out of range: use 1 to 3600 s (default 5)", cfg.MinStable)
	case cfg.MaxStable != 0 && !(cfg.MaxStable >= cfg.MinStable && cfg.MaxStable <= 86400):
		return nil, errors.New("dsp: calibrator detector: MaxStable must be 0 or between MinStable and 86400 s")
	}
	d := &CalibratorDetector{cfg: cfg, fs: fs, dc: NewCascade(DCBlockSections(fs)...)}
	d.blockLen = int(math.Round(fs * CalibratorBlock))
	d.nfft = 1
	for d.nfft*2 <= d.blockLen {
		d.nfft *= 2
	}
	d.buf = make([]float64, d.blockLen)
	d.gbuf = make([]float64, d.blockLen)
	d.gate = NewCascade(bandPassSection(CalibratorFrequency, 1/reference.ReferenceBandwidth(3), fs))
	d.fft = fourier.NewFFT(d.nfft)
	d.window = make([]float64, d.nfft)
	for i := range d.window {
		d.window[i] = 0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(d.nfft))
	}
	d.seq = make([]float64, d.nfft)
	d.coef = make([]complex128, d.nfft/2+1)
	// One-third-octave bands from 20 Hz (x = -17) to the last whose upper edge is below fs/2.
	d.band = make([]int16, d.nfft/2+1)
	for i := range d.band {
		d.band[i] = -1
	}
	binHz := fs / float64(d.nfft)
	slot := 0
	for x := -17; ; x++ {
		lo, hi := reference.BandEdges(3, x)
		if hi > fs/2 {
			break
		}
		if x == 0 {
			d.toneSl = slot
		}
		for k := int(math.Ceil(lo / binHz)); k < len(d.band) && float64(k)*binHz < hi; k++ {
			if k > 0 {
				d.band[k] = int16(slot)
			}
		}
		slot++
	}
	d.bandP = make([]float64, slot)
	d.Reset()
	return d, nil
}

// SampleRate returns the sample rate in Hz.
func (d *CalibratorDetector) SampleRate() float64 { return d.fs }

// Reset returns the detector to rest: filter state, sample count and any stretch in progress
// are dropped.
func (d *CalibratorDetector) Reset() {
	d.dc.Reset()
	d.gate.Reset()
	d.fill, d.gsum, d.gclip = 0, 0, 0
	d.pos = 0
	d.toneStart = -1
	d.run = stretch{}
	d.cand, d.best, d.maxDom = candRun{}, candRun{}, math.Inf(-1)
}

// Candidate returns the most persistent steady tone seen since construction or Reset, and
// false when no block held one; MaxDominanceDB is the largest margin of any band above every
// other band seen in any block (-Inf when no block was analysed). Only with
// CalibratorConfig.Diagnose.
func (d *CalibratorDetector) Candidate() (c ToneCandidate, maxDominanceDB float64, ok bool) {
	b := d.best
	if d.cand.blocks > b.blocks {
		b = d.cand
	}
	if b.blocks == 0 {
		return ToneCandidate{}, d.maxDom, false
	}
	n := float64(b.blocks)
	block := float64(d.blockLen) / d.fs
	return ToneCandidate{
		FrequencyHz: b.fsum / n, LevelDBFS: DBFS(b.sumSq / (n * float64(d.blockLen))),
		DominanceDB: b.dmax, Seconds: n * block, SteadySeconds: float64(max(b.steady, b.bestSteady)) * block,
	}, d.maxDom, true
}

// diagnose adds a block to the candidate runs: peak frequency fc, the dominance dom of its
// band, the block's sum of squares.
func (d *CalibratorDetector) diagnose(fc, dom, sumSq float64) {
	d.maxDom = math.Max(d.maxDom, dom)
	c := &d.cand
	if dom < CandidateDominance || sumSq == 0 || (c.blocks > 0 && math.Abs(fc-c.f0) > 1.5) {
		if c.blocks > d.best.blocks {
			d.best = *c
		}
		*c = candRun{}
		if dom < CandidateDominance || sumSq == 0 {
			return
		}
	}
	lvl := 10 * math.Log10(sumSq/float64(d.blockLen))
	if c.blocks == 0 {
		*c = candRun{f0: fc, dmax: dom}
	}
	if c.steady > 0 && math.Max(c.smax, lvl)-math.Min(c.smin, lvl) > d.cfg.StabilityDB {
		c.bestSteady = max(c.bestSteady, c.steady)
		c.steady = 0
	}
	if c.steady == 0 {
		c.smin, c.smax = lvl, lvl
	}
	c.steady++
	c.smin, c.smax = math.Min(c.smin, lvl), math.Max(c.smax, lvl)
	c.blocks++
	c.fsum += fc
	c.sumSq += sumSq
	c.dmax = math.Max(c.dmax, dom)
}

// Position returns the number of samples fed since construction or Reset.
func (d *CalibratorDetector) Position() int64 { return d.pos }

// InTone reports whether the last complete block was tonal (a calibrator-like tone is on now)
// and, if so, the first sample of the tonal run. The node can hold back events while it is
// true; whether the tone was a calibrator is known only when a Detection arrives.
func (d *CalibratorDetector) InTone() (start int64, ok bool) {
	return d.toneStart, d.toneStart >= 0
}

// Process feeds samples (full scale ±1.0, one channel) to the detector and calls found, which
// may be nil, for every stable tone that is complete. It allocates nothing.
func (d *CalibratorDetector) Process(x []float32, found func(Detection)) {
	for len(x) > 0 {
		n := min(len(x), d.blockLen-d.fill)
		b := d.buf[d.fill : d.fill+n]
		for i, v := range x[:n] {
			b[i] = float64(v)
			if math.Abs(b[i]) >= ClipThreshold {
				d.gclip++
			}
		}
		d.dc.Process(b)
		g := d.gbuf[:n]
		copy(g, b)
		d.gate.Process(g)
		for _, v := range g {
			d.gsum += v * v
		}
		d.fill += n
		d.pos += int64(n)
		x = x[n:]
		if d.fill == d.blockLen {
			d.block(found)
			d.fill, d.gsum, d.gclip = 0, 0, 0
		}
	}
}

// Flush reports the stable stretch in progress, if it is long enough, as if the tone had
// ended with the last complete block; samples of an incomplete block are not used. Call it at
// the end of a recording.
func (d *CalibratorDetector) Flush(found func(Detection)) {
	d.finish(found)
	d.toneStart = -1
}

// block judges the block in d.buf.
func (d *CalibratorDetector) block(found func(Detection)) {
	start := d.pos - int64(d.blockLen)
	var sumSq float64
	for _, v := range d.buf {
		sumSq += v * v
	}
	tonal, fc, dom := false, 0.0, 0.0
	// A tone whose band is DominanceDB above each of the other bands carries most of the
	// block's energy, so the 1 kHz band-pass (second order, wider than the band) passes at
	// least half of it; blocks that fail this skip the spectrum.
	if sumSq > 0 && (d.gsum >= 0.5*sumSq || d.cfg.Diagnose) {
		var peakDom float64
		fc, dom, peakDom, tonal = d.spectrum()
		if !(d.gsum >= 0.5*sumSq) {
			tonal = false
		}
		if d.cfg.Diagnose {
			d.diagnose(fc, peakDom, sumSq)
		}
	}
	if !tonal {
		d.finish(found)
		d.toneStart = -1
		return
	}
	if d.toneStart < 0 {
		d.toneStart = start
	}
	lvl := 10 * math.Log10(sumSq/float64(d.blockLen))
	r := &d.run
	if r.active {
		if math.Max(r.lmax, lvl)-math.Min(r.lmin, lvl) > d.cfg.StabilityDB || math.Abs(fc-r.fr) > 1.5 {
			d.finish(found)
		}
	}
	if !r.active {
		*r = stretch{active: true, start: start, fr: fc, lmin: lvl, lmax: lvl, dom: dom}
	}
	// Complex amplitude of the tone against fr, phase counted from the stretch's start.
	w := 2 * math.Pi * r.fr / d.fs
	s0, c0 := math.Sincos(-w * float64(start-r.start))
	sw, cw := math.Sincos(-w)
	pr, pi := c0, s0
	var zr, zi float64
	for j, v := range d.buf {
		zr += v * pr
		zi += v * pi
		pr, pi = pr*cw-pi*sw, pr*sw+pi*cw
		if j&1023 == 1023 { // keep the rotator on the unit circle
			g := 1 / math.Hypot(pr, pi)
			pr, pi = pr*g, pi*g
		}
	}
	ph := math.Atan2(zi, zr)
	if r.blocks == 0 {
		r.phase = ph
	} else {
		dp := ph - r.prevPhase
		dp -= 2 * math.Pi * math.Round(dp/(2*math.Pi))
		r.phase += dp
	}
	r.prevPhase = ph
	t := (float64(start-r.start) + float64(d.blockLen-1)/2) / d.fs
	r.st += t
	r.sp += r.phase
	r.stt += t * t
	r.stp += t * r.phase
	r.blocks++
	r.sumSq += sumSq
	r.clipped += d.gclip
	r.end = d.pos
	r.lmin, r.lmax = math.Min(r.lmin, lvl), math.Max(r.lmax, lvl)
	r.dom = math.Min(r.dom, dom)
	if d.cfg.MaxStable > 0 && float64(r.end-r.start) >= d.cfg.MaxStable*d.fs-0.5 {
		d.finish(found)
	}
}

// spectrum analyses the last nfft samples of the block: the coarse frequency of the strongest
// line, the dominance of the 1 kHz band (0 unless the line lies in it and within the
// frequency tolerance), the dominance of the line's own band, and whether the block is tonal.
func (d *CalibratorDetector) spectrum() (fc, dom, peakDom float64, tonal bool) {
	off := d.blockLen - d.nfft
	for i, w := range d.window {
		d.seq[i] = d.buf[off+i] * w
	}
	coef := d.fft.Coefficients(d.coef, d.seq)
	clear(d.bandP)
	peak, peakP := 0, 0.0
	for k := 1; k < len(coef)-1; k++ {
		c := coef[k]
		p := real(c)*real(c) + imag(c)*imag(c)
		if sl := d.band[k]; sl >= 0 {
			d.bandP[sl] += p
		}
		if p > peakP {
			peak, peakP = k, p
		}
	}
	if peak == 0 || d.band[peak] < 0 {
		return 0, 0, 0, false
	}
	sl := int(d.band[peak])
	// Parabola through the log magnitudes around the peak (Hann window).
	lp := func(k int) float64 {
		c := coef[k]
		return math.Log(real(c)*real(c) + imag(c)*imag(c) + 1e-300)
	}
	a, b, c := lp(peak-1), lp(peak), lp(peak+1)
	delta := 0.0
	if den := a - 2*b + c; den < 0 {
		delta = 0.5 * (a - c) / den
	}
	fc = (float64(peak) + delta) * d.fs / float64(d.nfft)
	other := 0.0
	for i, p := range d.bandP {
		if i != sl {
			other = math.Max(other, p)
		}
	}
	peakDom = math.Inf(1)
	if other > 0 {
		peakDom = 10 * math.Log10(d.bandP[sl]/other)
	}
	if sl != d.toneSl || math.Abs(fc-CalibratorFrequency) > d.cfg.FrequencyTolerance*CalibratorFrequency {
		return fc, 0, peakDom, false
	}
	return fc, peakDom, peakDom, peakDom >= d.cfg.DominanceDB
}

// finish closes the stable stretch and reports it when it is long enough.
func (d *CalibratorDetector) finish(found func(Detection)) {
	r := &d.run
	if !r.active {
		return
	}
	r.active = false
	n := r.end - r.start
	if float64(n) < d.cfg.MinStable*d.fs-0.5 || r.blocks < 2 {
		return
	}
	k := float64(r.blocks)
	slope := (k*r.stp - r.st*r.sp) / (k*r.stt - r.st*r.st)
	f := r.fr + slope/(2*math.Pi)
	if math.Abs(f-CalibratorFrequency) > d.cfg.FrequencyTolerance*CalibratorFrequency {
		return
	}
	ms := r.sumSq / float64(n)
	det := Detection{
		Start: r.start, End: r.end, ToneStart: d.toneStart,
		MeanSquare: ms, LevelDBFS: DBFS(ms), FrequencyHz: f,
		StabilityDB: r.lmax - r.lmin, DominanceDB: r.dom, Stable: float64(n) / d.fs,
		Clipped: r.clipped,
	}
	if found != nil {
		found(det)
	}
}

// bandPassSection returns a second-order band-pass of 0 dB peak gain at f0 with quality factor
// q (the audio-EQ cookbook formulas).
func bandPassSection(f0, q, fs float64) Section {
	w := 2 * math.Pi * f0 / fs
	sn, cs := math.Sincos(w)
	alpha := sn / (2 * q)
	a0 := 1 + alpha
	return Section{B0: alpha / a0, B2: -alpha / a0, A1: -2 * cs / a0, A2: (1 - alpha) / a0}
}

// CalibratorClass is a performance class of sound calibrators in IEC 60942:2017: ClassLS
// (laboratory standard), Class1 or Class2.
type CalibratorClass int

// The calibrator classes of IEC 60942:2017.
const (
	CalibratorClassLS CalibratorClass = iota
	CalibratorClass1
	CalibratorClass2
)

// String returns "LS", "1" or "2".
func (c CalibratorClass) String() string {
	switch c {
	case CalibratorClassLS:
		return "LS"
	case CalibratorClass1:
		return "1"
	case CalibratorClass2:
		return "2"
	}
	return fmt.Sprintf("CalibratorClass(%d)", int(c))
}

// CalibratorTolerance holds the acceptance limits of IEC 60942:2017 for a calibrator whose
// frequency lies between 160 Hz and 1250 Hz (so for a 1 kHz calibrator), as read via the
// phonometry open-source copy (tests/reference_data/calibrators.py) of Tables 2, 4, A.1 and A.2.
type CalibratorTolerance struct {
	Class CalibratorClass
	// Level is the limit on the deviation of the generated level from the stated level, dB
	// (Table 2): ±0.10 (LS), ±0.25 (class 1), ±0.40 (class 2), the same at 94 and 114 dB
	// (the latter from memory).
	Level float64
	// Fluctuation is the limit on the short-term level fluctuation (F time weighting, over
	// 60 s), dB (Table 2, 5.3.3): 0.03 (LS), 0.07 (class 1), 0.15 (class 2).
	Fluctuation float64
	// Frequency is the limit on the relative deviation of the frequency from the stated
	// frequency (Table 4): 0.007 (LS and class 1), 0.017 (class 2).
	Frequency float64
	// LevelUncertainty and FrequencyUncertainty are the maximum-permitted expanded
	// uncertainties of a test of the level (dB) and of the frequency (relative) (Tables A.1,
	// A.2): 0.10/0.15/0.35 dB and 0.002. They bound the uncertainty of the measuring chain
	// that judges a calibrator; they do not widen the limits (see FrequencyPlausible).
	LevelUncertainty, FrequencyUncertainty float64
}

// SampleClockTolerance is the relative frequency error assumed for a converter's sample
// clock, ±100 ppm (common practice: audio converters run from crystal oscillators specified
// within tens of ppm). A frequency measured from the sample count is uncertain by this much,
// twenty times less than the 0.2 % maximum-permitted uncertainty of IEC 60942:2017 Table A.2,
// so the node may judge a calibrator's frequency against the Table 4 limits.
const SampleClockTolerance = 100e-6

// CalibratorTolerances returns the IEC 60942:2017 acceptance limits of class c. It panics on
// an unknown class.
func CalibratorTolerances(c CalibratorClass) CalibratorTolerance {
	switch c {
	case CalibratorClassLS:
		return CalibratorTolerance{Class: c, Level: 0.10, Fluctuation: 0.03, Frequency: 0.007, LevelUncertainty: 0.10, FrequencyUncertainty: 0.002}
	case CalibratorClass1:
		return CalibratorTolerance{Class: c, Level: 0.25, Fluctuation: 0.07, Frequency: 0.007, LevelUncertainty: 0.15, FrequencyUncertainty: 0.002}
	case CalibratorClass2:
		return CalibratorTolerance{Class: c, Level: 0.40, Fluctuation: 0.15, Frequency: 0.017, LevelUncertainty: 0.35, FrequencyUncertainty: 0.002}
	}
	panic(fmt.Sprintf("dsp: unknown calibrator class %d", int(c)))
}

// FrequencyPlausible reports whether a measured calibrator frequency f (Hz) lies within the
// class's frequency limit of IEC 60942:2017 Table 4 (±0.7 % for classes LS and 1, ±1.7 % for
// class 2) of the stated frequency (normally CalibratorFrequency).
//
// The model is the 2017 edition's: it states the limits and, apart from them, a maximum
// permitted uncertainty of the measurement that judges them (0.2 %, Table A.2). A calibrator
// conforms when the measured deviation does not exceed the limit and the measurement's
// uncertainty does not exceed the maximum (conformance rule of IEC 60942:2017, clause from
// memory); the uncertainty is not added to the limit, as the 2003 edition's tolerances
// included it. The node's frequency uncertainty is its sample clock's, SampleClockTolerance
// (0.01 %), well inside the maximum. A tone outside the limit comes from a calibrator of a
// lower class, a faulty one, or a converter whose sample clock is off by that much.
func (t CalibratorTolerance) FrequencyPlausible(f, stated float64) bool {
	return math.Abs(f-stated) <= t.Frequency*stated
}

// LevelConsistent reports whether a measured level deviation d (dB, measured minus stated)
// lies within the class's level tolerance (Table 2): what a calibrator of the class, itself
// within its limits, can explain. A larger deviation points at the measuring chain.
func (t CalibratorTolerance) LevelConsistent(d float64) bool {
	return math.Abs(d) <= t.Level
}
