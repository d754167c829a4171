package dsp

import (
	"errors"
	"fmt"
	"math"

	"github.com/leqnode/leqnode/dsp/reference"
)

// Time constants of the exponential time weightings.
const (
	// TauFast is the Fast time constant, 0.125 s (IEC 61672-1:2013, 5.8.1).
	TauFast = reference.TimeConstantFast
	// TauSlow is the Slow time constant, 1 s (IEC 61672-1:2013, 5.8.1).
	TauSlow = reference.TimeConstantSlow
	// TauImpulseRise is the Impulse rise time constant, 35 ms (IEC 60651:1979; described
	// in IEC 61672-1:2013 informative Annex C, not a 61672-1 conformance item).
	TauImpulseRise = reference.ImpulseRise
	// TauImpulseDecay is the decay time constant of the Impulse peak detector, 1.5 s
	// (IEC 60651:1979).
	TauImpulseDecay = reference.ImpulseDecay
	// SettleTimeConstants is the number of time constants after which a time-weighted level
	// counts toward a minimum (LAFmin, LASmin): from rest, the detector then reads within
	// 10 lg(1 - e^-5) = -0.03 dB of a steady level (the exponential response of IEC 61672-1:2013,
	// 3.10, to a step): 0.625 s for Fast, 5 s for Slow.
	SettleTimeConstants = 5
	// PercentileStep is the interval at which the Fast level is sampled into the level
	// histogram for percentile levels: 10 ms.
	PercentileStep = 0.010
)

// ClipThreshold is the sample magnitude (full scale ±1.0) at or above which a sample counts as
// clipped: the largest positive 16-bit sample, 32767/32768.
const ClipThreshold = 32767.0 / 32768.0

// chunk is the number of samples the meter filters at a time; its scratch buffers hold one chunk.
const chunk = 256

// MeterConfig sets up a Meter.
type MeterConfig struct {
	// SampleRate in Hz, 8000 to 192000.
	SampleRate float64
	// SensitivityDBFS is the microphone sensitivity: the level in dBFS (AES17) that a 1 kHz
	// sine of 94 dB SPL produces. MEMS data sheets state it; -26 is typical. An error of x dB
	// here shifts every level by x dB: calibrate against a sound calibrator.
	SensitivityDBFS float64
	// Bands selects the band filter bank: 0 for none, Octave or Third. One-third-octave bands
	// cost more than all the other measurements together; leave them off where they are not
	// wanted.
	Bands BandSet
	// Correction, when set, is a filter applied right after the DC blocker, before the band
	// filters and every weighting: a microphone and windscreen correction fitted by
	// CorrectionSections. Danger: a correction that is not 0 dB at 1 kHz moves the calibrator
	// reading too; sections that are not stable ring for ever.
	Correction []Section
	// CSections and ASections, when set, replace the designed C and A-from-C sections. They let
	// the self-verification (package selftest) show that it catches a damaged chain. Danger:
	// any value other than the designed one gives wrong levels; a measuring node leaves them nil.
	CSections, ASections []Section
	// Tap, when set, receives every chunk of filtered samples: z Z-weighted (after the DC
	// blocker and any Correction), c C-weighted, a A-weighted. The slices are the meter's
	// scratch, valid only during the call: EventDetector.ProcessWeighted reads them without
	// filtering the signal again. It runs on the goroutine that calls Process and must not
	// allocate, or the meter does.
	Tap func(z, c, a []float64)
}

// Result holds the measurements of one interval, in dB re 20 µPa. A level that does not exist
// (digital silence, or a Fast level still at rest) is NaN or -Inf; callers report it as null.
type Result struct {
	Samples  int64   // samples in the interval
	Duration float64 // seconds: Samples / sample rate

	LAeq, LCeq, LZeq float64   // equivalent continuous levels (IEC 61672-1:2013, 3.9)
	LAFmax, LAFmin   float64   // A-weighted Fast level, extremes over the interval (see Meter: settling)
	LASmax, LASmin   float64   // A-weighted Slow level, extremes
	LAImax           float64   // A-weighted Impulse level, maximum
	LCpeak, LZpeak   float64   // C- and Z-weighted peak levels, between samples
	LAE              float64   // sound exposure level, LAeq + 10 lg(T / 1 s)
	Bands            []float64 // Z-weighted band levels LZeq, in the order of Meter.Bands (NaN before settling)
	BandSeconds      []float64 // seconds of settled band output behind each of Bands (Duration once settled)
	Histogram        Histogram // A-weighted Fast level sampled every 10 ms
	Silent           bool      // every sample exactly zero
	Stuck            bool      // every sample the same value (a dead converter), zero included
	Clipped          int64     // samples at or beyond ClipThreshold
	MaxAbs           float64   // largest sample magnitude (full scale 1.0)
	DC               float64   // mean of the samples before the DC blocker (full scale 1.0)
}

// Meter is the streaming measurement chain: DC blocker (Z) → C weighting → A weighting, the
// Fast, Slow and Impulse time weightings of the squared A-weighted signal, linear integration of
// A, C and Z, C and Z peaks between samples, the 10 ms Fast-level histogram and, optionally, the
// octave or one-third-octave band filters on the Z-weighted signal.
//
// Feed samples with Process in blocks of any length; close an interval with Take. The results
// depend only on the samples and on where Take is called, never on how blocks were cut. A Meter
// is not safe for concurrent use.
//
// # Settling
//
// Every filter starts from rest (zero state) and is never primed with the signal, so an impulse
// at the very start reads as it is. No level reports the filters' start-up, though: a minimum
// (LAFmin, LASmin) takes only samples from SettleTimeConstants time constants after the first
// sample on (0.625 s for Fast, 5 s for Slow), and is NaN for an interval that ends before that;
// so does the histogram of the Fast level behind the percentile levels (empty before that);
// a band level counts only the samples after its band filter has settled (FilterBank.Settle: the
// time by which the band's impulse response has delivered 99.9 % of its energy, so a steady
// noise reads within 0.005 dB), and is NaN for an interval that ends before that. Energy
// quantities (Leq, LAE) and maxima count from the first sample.
type Meter struct {
	fs     float64
	offset float64 // LevelOffset of the sensitivity

	dc, cw, aw *Cascade
	bank       *FilterBank
	tap        func(z, c, a []float64)
	a          [chunk]float64 // A-weighted chunk (Z and C live in peakZ and peakC's windows)

	// The time weightings: coefficients kF, kS, kI, decI; states f, s, r, d; the interval's
	// maxF, minF, maxS, minS and maxI.
	timeWeighting

	step, tick int // percentile sampling period and countdown, in samples

	age              int64 // samples processed since construction
	settleF, settleS int64 // samples after which the Fast and Slow detectors have settled

	peakC, peakZ peakDetector

	// Interval accumulators (and those of timeWeighting).
	n                int64
	sumA, sumC, sumZ float64
	rawMin, rawMax   float32 // extremes of the raw samples
	rawSum           float64 // sum of the raw samples (DC offset)
	clipped          int64
	hist             Histogram
	bandScratch      []float64
	shareScratch     []float64
}

// NewMeter designs the filters for the configured sample rate and returns a meter at rest.
func NewMeter(cfg MeterConfig) (*Meter, error) {
	fs := cfg.SampleRate
	if !(fs >= 8000 && fs <= 192000) {
		return nil, fmt.Errorf("dsp: sample rate %g Hz out of range: use 8000 to 192000 Hz", fs)
	}
	if math.IsNaN(cfg.SensitivityDBFS) || math.IsInf(cfg.SensitivityDBFS, 0) {
		return nil, errors.New("dsp: microphone sensitivity is not a number: give it in dBFS, e.g. -26")
	}
	cs, as := cfg.CSections, cfg.ASections
	if cs == nil || as == nil {
		c, a, err := WeightingSections(fs)
		if err != nil {
			return nil, err
		}
		if cs == nil {
			cs = c
		}
		if as == nil {
			as = a
		}
	}
	var err error
	for _, s := range cfg.Correction {
		if !s.Stable() {
			return nil, errors.New("dsp: microphone correction has an unstable section: fit it again with CorrectionSections")
		}
	}
	m := &Meter{
		fs:            fs,
		offset:        LevelOffset(cfg.SensitivityDBFS),
		dc:            NewCascade(append(DCBlockSections(fs), cfg.Correction...)...),
		cw:            NewCascade(cs...),
		aw:            NewCascade(as...),
		timeWeighting: newTimeWeighting(fs),
		step:          int(math.Round(fs * PercentileStep)),
		settleF:       int64(math.Ceil(SettleTimeConstants * TauFast * fs)),
		settleS:       int64(math.Ceil(SettleTimeConstants * TauSlow * fs)),
		tap:           cfg.Tap,
		peakC:         newPeakDetector(),
		peakZ:         newPeakDetector(),
	}
	m.tick = m.step
	if cfg.Bands != 0 {
		if m.bank, err = NewFilterBank(cfg.Bands, fs); err != nil {
			return nil, err
		}
		m.bandScratch = make([]float64, len(m.bank.Bands()))
	}
	m.startInterval()
	return m, nil
}

// SetSensitivity changes the microphone sensitivity from now on: the levels of the interval in
// progress, taken at the next Take, use the new one throughout. Filter states are kept, so the
// change needs no settling; take the interval first to keep the old sensitivity's samples apart.
func (m *Meter) SetSensitivity(sensitivityDBFS float64) {
	m.offset = LevelOffset(sensitivityDBFS)
}

// SampleRate returns the sample rate in Hz.
func (m *Meter) SampleRate() float64 { return m.fs }

// Bands returns the bands whose levels Result.Bands holds, or nil without a band filter bank.
func (m *Meter) Bands() []Band {
	if m.bank == nil {
		return nil
	}
	return m.bank.Bands()
}

// FastLevel returns the current A-weighted Fast level LAF in dB (-Inf at rest).
func (m *Meter) FastLevel() float64 { return PowerLevel(m.f, m.offset) }

func (m *Meter) startInterval() {
	m.n = 0
	m.sumA, m.sumC, m.sumZ = 0, 0, 0
	m.maxF, m.minF = math.Inf(-1), math.Inf(1)
	m.maxS, m.minS, m.maxI = math.Inf(-1), math.Inf(1), math.Inf(-1)
	m.rawMin, m.rawMax, m.rawSum = float32(math.Inf(1)), float32(math.Inf(-1)), 0
	m.clipped = 0
	m.hist.Reset()
}

// Process feeds samples (full scale ±1.0, one channel) to the meter. It allocates nothing.
func (m *Meter) Process(x []float32) {
	for len(x) > 0 {
		n := min(len(x), chunk)
		m.processChunk(x[:n])
		x = x[n:]
	}
}

func (m *Meter) processChunk(x []float32) {
	n := len(x)
	// z and c are filtered where the peak detectors read them, a in the meter's scratch.
	z, c, a := m.peakZ.buf(n), m.peakC.buf(n), m.a[:n]
	var sum, sumZ float64
	if len(m.dc.sec) == 1 && m.dc.hp[0] { // the DC blocker alone, in the loop over the raw samples
		m.rawMin, m.rawMax, m.clipped, sum, sumZ = convertHighPass1(m.dc, z, x, m.rawMin, m.rawMax, m.clipped)
	} else {
		m.rawMin, m.rawMax, m.clipped, sum = convertRaw(z, x, m.rawMin, m.rawMax, m.clipped)
		sumZ = m.dc.processTo(z, z)
	}
	m.rawSum += sum
	if m.bank != nil {
		m.bank.Process(z)
	}
	sumC := m.cw.processTo(c, z)
	sumA := m.aw.processTo(a, c)
	if m.tap != nil {
		m.tap(z, c, a)
	}

	// Minima count only from the sample at which their detector has settled: fromF and fromS
	// are the first such indices in this chunk (n when none is). The time weightings run in
	// spans that end where a detector settles or where the Fast level is sampled for the
	// percentiles; a span before a detector has settled tracks no minimum of it.
	fromF := int(min(max(m.settleF-m.age, 0), int64(n)))
	fromS := int(min(max(m.settleS-m.age, 0), int64(n)))
	m.age += int64(n)
	for i := 0; i < n; {
		end := min(n, i+m.tick)
		minF, minS := m.minF, m.minS
		if i < fromF {
			end = min(end, fromF)
			m.minF = math.Inf(-1) // f < -Inf never holds
		}
		if i < fromS {
			end = min(end, fromS)
			m.minS = math.Inf(-1)
		}
		m.timeWeighting.run(a[i:end])
		if i < fromF {
			m.minF = minF
		}
		if i < fromS {
			m.minS = minS
		}
		m.tick -= end - i
		if m.tick == 0 {
			m.tick = m.step
			if i >= fromF { // percentiles, like minima, only from the settled Fast level
				m.hist.Add(PowerLevel(m.f, m.offset))
			}
		}
		i = end
	}
	m.sumA += sumA
	m.sumC += sumC
	m.sumZ += sumZ

	processPeakPair(&m.peakC, &m.peakZ, n) // c and z are in their windows
	m.n += int64(n)
}

// Take writes the results of the interval since the previous Take (or since construction) to
// res and starts a new interval; filter states run on. res.Bands is reused when it has room.
// An interval without samples gives Samples 0 and NaN levels.
func (m *Meter) Take(res *Result) {
	res.Samples = m.n
	res.Duration = float64(m.n) / m.fs
	res.Silent = m.n == 0 || m.rawMin == 0 && m.rawMax == 0
	res.Stuck = m.n > 1 && m.rawMin == m.rawMax
	res.Clipped = m.clipped
	res.MaxAbs = 0
	res.DC = 0
	if m.n > 0 {
		res.MaxAbs = max(math.Abs(float64(m.rawMin)), math.Abs(float64(m.rawMax)))
		res.DC = m.rawSum / float64(m.n)
	}
	res.Histogram = m.hist
	res.Bands, res.BandSeconds = res.Bands[:0], res.BandSeconds[:0]
	if m.bank != nil {
		m.bandScratch, m.shareScratch = m.bank.SettledMeanSquare(m.bandScratch, m.shareScratch)
		for i, ms := range m.bandScratch {
			res.Bands = append(res.Bands, PowerLevel(ms, m.offset))
			res.BandSeconds = append(res.BandSeconds, m.shareScratch[i]*res.Duration)
		}
	}
	if m.n == 0 || res.Silent {
		nan := math.NaN()
		res.LAeq, res.LCeq, res.LZeq = nan, nan, nan
		res.LAFmax, res.LAFmin, res.LASmax, res.LASmin, res.LAImax = nan, nan, nan, nan, nan
		res.LCpeak, res.LZpeak, res.LAE = nan, nan, nan
		for i := range res.Bands {
			res.Bands[i] = nan
		}
		m.peakC.take()
		m.peakZ.take()
		m.startInterval()
		return
	}
	off, inv := m.offset, 1/float64(m.n)
	res.LAeq = PowerLevel(m.sumA*inv, off)
	res.LCeq = PowerLevel(m.sumC*inv, off)
	res.LZeq = PowerLevel(m.sumZ*inv, off)
	res.LAFmax = PowerLevel(m.maxF, off)
	res.LAFmin = settledMin(m.minF, off)
	res.LASmax = PowerLevel(m.maxS, off)
	res.LASmin = settledMin(m.minS, off)
	res.LAImax = PowerLevel(m.maxI, off)
	pc, pz := m.peakC.take(), m.peakZ.take()
	res.LCpeak = PowerLevel(pc*pc, off)
	res.LZpeak = PowerLevel(pz*pz, off)
	res.LAE = ExposureLevel(res.LAeq, res.Duration)
	m.startInterval()
}

// settledMin is the level of a minimum, NaN when no settled sample was seen (ms = +Inf).
func settledMin(ms, offset float64) float64 {
	if math.IsInf(ms, 1) {
		return math.NaN()
	}
	return PowerLevel(ms, offset)
}

// Accumulator merges the results of consecutive intervals into the result of the whole span:
// energy means weighted by duration for Leq and band levels (ISO 1996-1:2016, 3.1.7), extremes
// for maxima, minima and peaks, and the sum of the level histograms for percentiles. It works on
// levels, so results measured with different sensitivities merge correctly. The zero value is an
// empty accumulator.
type Accumulator struct {
	n                      int64
	dur, eA, eC, eZ        float64 // seconds; Σ 10^(L/10)·T
	bandE, bandT           []float64
	fmax, fmin, smax, smin float64
	imax, cpk, zpk         float64
	clipped                int64
	maxAbs                 float64
	nonSilent              bool
	hist                   Histogram
}

// Reset empties the accumulator, keeping its storage.
func (a *Accumulator) Reset() {
	bandE, bandT := a.bandE[:0], a.bandT[:0]
	*a = Accumulator{bandE: bandE, bandT: bandT}
}

// Add merges one interval's result.
func (a *Accumulator) Add(r *Result) {
	if r.Samples == 0 {
		return
	}
	if a.n == 0 {
		ninf, pinf := math.Inf(-1), math.Inf(1)
		a.fmax, a.fmin, a.smax, a.smin = ninf, pinf, ninf, pinf
		a.imax, a.cpk, a.zpk = ninf, ninf, ninf
	}
	a.n += r.Samples
	a.dur += r.Duration
	a.clipped += r.Clipped
	a.maxAbs = max(a.maxAbs, r.MaxAbs)
	a.hist.Merge(&r.Histogram)
	for len(a.bandE) < len(r.Bands) {
		a.bandE = append(a.bandE, 0)
		a.bandT = append(a.bandT, 0)
	}
	for i, l := range r.Bands {
		t := r.Duration
		if i < len(r.BandSeconds) {
			t = r.BandSeconds[i] // the settled part of the interval
		}
		if r.Silent {
			a.bandT[i] += t
		} else if l == l { // a band without output in this interval (NaN) adds no time
			a.bandE[i] += energy(l) * t
			a.bandT[i] += t
		}
	}
	if r.Silent {
		return
	}
	a.nonSilent = true
	a.eA += energy(r.LAeq) * r.Duration
	a.eC += energy(r.LCeq) * r.Duration
	a.eZ += energy(r.LZeq) * r.Duration
	a.fmax = maxNum(a.fmax, r.LAFmax)
	a.fmin = minNum(a.fmin, r.LAFmin)
	a.smax = maxNum(a.smax, r.LASmax)
	a.smin = minNum(a.smin, r.LASmin)
	a.imax = maxNum(a.imax, r.LAImax)
	a.cpk = maxNum(a.cpk, r.LCpeak)
	a.zpk = maxNum(a.zpk, r.LZpeak)
}

// Result writes the merged result to res (res.Bands reused when it has room).
func (a *Accumulator) Result(res *Result) {
	res.Samples, res.Duration = a.n, a.dur
	res.Clipped, res.MaxAbs, res.Silent = a.clipped, a.maxAbs, !a.nonSilent
	res.Histogram = a.hist
	nan := math.NaN()
	res.Bands = res.Bands[:0]
	for i, e := range a.bandE {
		if a.bandT[i] == 0 || !a.nonSilent {
			res.Bands = append(res.Bands, nan)
		} else {
			res.Bands = append(res.Bands, level(e/a.bandT[i]))
		}
	}
	if !a.nonSilent {
		res.LAeq, res.LCeq, res.LZeq = nan, nan, nan
		res.LAFmax, res.LAFmin, res.LASmax, res.LASmin, res.LAImax = nan, nan, nan, nan, nan
		res.LCpeak, res.LZpeak, res.LAE = nan, nan, nan
		return
	}
	res.LAeq, res.LCeq, res.LZeq = level(a.eA/a.dur), level(a.eC/a.dur), level(a.eZ/a.dur)
	res.LAFmax, res.LAFmin, res.LASmax, res.LASmin = a.fmax, a.fmin, a.smax, a.smin
	res.LAImax, res.LCpeak, res.LZpeak = a.imax, a.cpk, a.zpk
	res.LAE = ExposureLevel(res.LAeq, res.Duration)
}

// energy returns 10^(l/10), the relative mean square of a level; NaN and -Inf give 0.
func energy(l float64) float64 {
	if l != l {
		return 0
	}
	return math.Pow(10, l/10)
}

func level(e float64) float64 { return 10 * math.Log10(e) }

func maxNum(a, b float64) float64 {
	if b != b {
		return a
	}
	return max(a, b)
}

func minNum(a, b float64) float64 {
	if b != b {
		return a
	}
	return min(a, b)
}
