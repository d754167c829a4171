// Package selftest verifies the node's digital measurement chain with synthetic signals, in
// the manner of the periodic electrical tests of IEC 61672-3: frequency weightings, level
// linearity, toneburst responses, C-weighted peaks and one-third-octave band attenuation,
// each compared with the published design goals and class 1 acceptance limits kept in
// package reference (IEC 61672-1:2013 Tables 3, 4, 5 and 5.6; IEC 61260-1:2014 Table 1).
//
// # Model
//
// Every test feeds exactly computed samples (sines, tonebursts, single cycles) to a dsp.Meter
// built as the node builds it, and reads the meter's own results (LAeq, LCeq, LZeq, LAFmax,
// LASmax, LAE, LCpeak, band levels), so what is verified is the code that measures, not a
// model of it. A check passes when the deviation of the measured response from its design
// goal lies within the class 1 acceptance limits; a digital simulation has no measurement
// uncertainty to add (see reference.Tolerance).
//
// What this does not cover: the microphone, its windscreen and its frequency response; the
// analogue front end and the converter (gain, anti-alias filter, clock, self-noise,
// overload); the acoustic environment (reflections, wind, rain, the mounting); and the
// calibration of the sensitivity. Passing shows that the digital chain meets the class 1
// tolerance limits of IEC 61672-1:2013 in these electrical tests; it does not make the node a
// class 1 or type-approved instrument. Legally valid measurements need a type-approved
// class 1 instrument with traceable calibration.
//
// The package is pure computation: no I/O, no goroutines beyond those the weighting design
// uses while it runs. A default run takes about half a second at 48 kHz (BenchmarkRun, on a
// loaded two-core build machine); a full run (Options.Full) about five times as long. The
// daemon runs the default set at start-up and daily.
package selftest

import (
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strconv"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/dsp/reference"
)

// Groups of checks.
const (
	GroupWeighting  = "frequency weighting"
	GroupLinearity  = "level linearity"
	GroupToneburst  = "toneburst response"
	GroupPeak       = "C-weighted peak"
	GroupBands      = "one-third-octave band attenuation"
	GroupSetup      = "setup"
	sensitivityDBFS = -26 // any value works: levels are compared with levels
)

// Check is one test: a measured response, its design goal and the acceptance limits on the
// deviation Measured - Expected.
type Check struct {
	Group     string              // one of the Group constants
	Test      string              // what was measured, e.g. "A weighting at 63 Hz"
	Expected  float64             // design goal, dB
	Measured  float64             // measured response, dB
	Tolerance reference.Tolerance // acceptance limits on Measured - Expected, dB
	Pass      bool
	Source    string // the standard, table or clause of Expected and Tolerance
}

// Deviation returns Measured - Expected.
func (c Check) Deviation() float64 { return c.Measured - c.Expected }

// MarshalJSON writes the check with snake-case keys; a missing limit is null.
func (c Check) MarshalJSON() ([]byte, error) {
	lim := func(v float64) *float64 {
		if math.IsInf(v, 0) || math.IsNaN(v) {
			return nil
		}
		return &v
	}
	return json.Marshal(struct {
		Group    string   `json:"group"`
		Test     string   `json:"test"`
		Expected float64  `json:"expected_dB"`
		Measured *float64 `json:"measured_dB"`
		Lower    *float64 `json:"tolerance_lower_dB"`
		Upper    *float64 `json:"tolerance_upper_dB"`
		Pass     bool     `json:"pass"`
		Source   string   `json:"source"`
	}{c.Group, c.Test, c.Expected, lim(c.Measured), lim(c.Tolerance.Lower), lim(c.Tolerance.Upper), c.Pass, c.Source})
}

// Report is the result of a self-test run.
type Report struct {
	SampleRate float64 `json:"sample_rate_hz"`
	Full       bool    `json:"full"`
	Pass       bool    `json:"pass"`
	Checks     []Check `json:"checks"`
	// Skipped names the test points left out because the sample rate cannot carry them
	// (frequencies at or above 0.45 fs).
	Skipped []string `json:"skipped,omitempty"`
	// Error is set when the chain could not be built; Pass is then false.
	Error string `json:"error,omitempty"`
}

// Failed returns the checks that did not pass.
func (r Report) Failed() []Check {
	var out []Check
	for _, c := range r.Checks {
		if !c.Pass {
			out = append(out, c)
		}
	}
	return out
}

// Options tune a run.
type Options struct {
	// Full runs every nominal frequency of IEC 61672-1:2013 Table 3 below 0.45 fs, every
	// toneburst of Table 4, every peak test of Table 5, 1 dB linearity steps and three
	// one-third-octave bands; otherwise a short set as a periodic test would (63 Hz, 1 kHz and
	// 8 kHz; 200, 2 and 0.25 ms bursts; 8 kHz and 500 Hz peaks; the 1 kHz band).
	Full bool

	// Correction, CSections and ASections are passed to every meter (see dsp.MeterConfig):
	// the node's microphone correction, or, in tests, a deliberately damaged chain.
	Correction, CSections, ASections []dsp.Section
}

// Run verifies the chain the node builds for sample rate fs; full selects the full set of
// tests. It is RunOptions(fs, Options{Full: full}).
func Run(fs float64, full bool) Report { return RunOptions(fs, Options{Full: full}) }

// RunOptions verifies the chain built with the options.
func RunOptions(fs float64, o Options) Report {
	r := &runner{fs: fs, o: o, rep: Report{SampleRate: fs, Full: o.Full}}
	if o.CSections == nil || o.ASections == nil {
		// Design the weighting once, exactly as dsp.NewMeter does, instead of once per meter.
		c, a, err := dsp.WeightingSections(fs)
		if err == nil {
			if r.o.CSections == nil {
				r.o.CSections = c
			}
			if r.o.ASections == nil {
				r.o.ASections = a
			}
		}
	}
	if _, err := r.meter(0); err != nil {
		r.rep.Error = err.Error()
		r.rep.Checks = append(r.rep.Checks, Check{Group: GroupSetup, Test: "build the measurement chain",
			Measured: math.NaN(), Source: err.Error()})
		return r.rep
	}
	r.buf = make([]float32, 4096)
	r.weighting()
	r.linearity()
	r.tonebursts()
	r.peaks()
	r.bands()
	r.rep.Pass = r.err == nil
	for _, c := range r.rep.Checks {
		if !c.Pass {
			r.rep.Pass = false
		}
	}
	if r.err != nil {
		r.rep.Error = r.err.Error()
	}
	return r.rep
}

type runner struct {
	fs  float64
	o   Options
	rep Report
	buf []float32
	err error
}

func (r *runner) meter(bands dsp.BandSet) (*dsp.Meter, error) {
	return dsp.NewMeter(dsp.MeterConfig{SampleRate: r.fs, SensitivityDBFS: sensitivityDBFS, Bands: bands,
		Correction: r.o.Correction, CSections: r.o.CSections, ASections: r.o.ASections})
}

func (r *runner) skip(what string) { r.rep.Skipped = append(r.rep.Skipped, what) }

func (r *runner) add(group, test string, expected, measured float64, tol reference.Tolerance, source string) {
	r.rep.Checks = append(r.rep.Checks, Check{Group: group, Test: test, Expected: expected, Measured: measured,
		Tolerance: tol, Pass: tol.Contains(measured - expected), Source: source})
}

// amplitude returns the peak amplitude of a sine of level l dB at the run's sensitivity
// (AES17: a sine of peak A reads 20 lg A dBFS; SPL = dBFS - S + 94).
func amplitude(l float64) float64 { return math.Pow(10, (l-94+sensitivityDBFS)/20) }

// feed processes n samples of gen(i), i counted from start, through m.
func (r *runner) feed(m *dsp.Meter, start, n int64, gen func(i int64) float64) {
	for n > 0 {
		k := int(min(n, int64(len(r.buf))))
		for j := range k {
			r.buf[j] = float32(gen(start + int64(j)))
		}
		m.Process(r.buf[:k])
		start += int64(k)
		n -= int64(k)
	}
}

// steady measures a steady sine of frequency f and level l (dB) after settling, over a whole
// number of periods lasting about measure seconds.
func (r *runner) steady(bands dsp.BandSet, f, l, settle, measure float64) (dsp.Result, []dsp.Band) {
	var res dsp.Result
	m, err := r.meter(bands)
	if err != nil {
		r.err = err
		return res, nil
	}
	a, w := amplitude(l), 2*math.Pi*f/r.fs
	gen := func(i int64) float64 { return a * math.Sin(w*float64(i)) }
	ns := int64(math.Round(settle * r.fs))
	r.feed(m, 0, ns, gen)
	m.Take(&res)
	cycles := math.Max(1, math.Round(f*measure))
	nm := int64(math.Round(cycles / f * r.fs))
	r.feed(m, ns, nm, gen)
	m.Take(&res)
	return res, m.Bands()
}

func settleFor(f float64) float64 {
	if f < 100 {
		return 2
	}
	return 0.5
}

// weighting checks A, C and Z against IEC 61672-1:2013 Table 3, relative to 1 kHz, and the
// difference of C and Z from A at 1 kHz (5.5.9).
func (r *runner) weighting() {
	const level = 94.0 // the reference level (IEC 61672-1:2013 5.1, from memory)
	ref, _ := r.steady(0, 1000, level, 0.5, 1)
	src := "IEC 61672-1:2013 Table 3 (class 1)"
	for _, p := range reference.WeightingTable() {
		if p.Nominal == "1000" || !r.o.Full && p.Nominal != "63" && p.Nominal != "8000" {
			continue
		}
		if !(p.Frequency < 0.45*r.fs) {
			r.skip("frequency weighting at " + p.Nominal + " Hz")
			continue
		}
		res, _ := r.steady(0, p.Frequency, level, settleFor(p.Frequency), 1)
		r.add(GroupWeighting, "A weighting at "+p.Nominal+" Hz", p.A, res.LAeq-ref.LAeq, p.Class1, src)
		r.add(GroupWeighting, "C weighting at "+p.Nominal+" Hz", p.C, res.LCeq-ref.LCeq, p.Class1, src)
		r.add(GroupWeighting, "Z weighting at "+p.Nominal+" Hz", 0, res.LZeq-ref.LZeq, p.Class1, src)
	}
	d := reference.WeightingDifferenceAt1kHz
	tol := reference.Tolerance{Lower: -d, Upper: d}
	src = "IEC 61672-1:2013 5.5.9"
	for _, p := range reference.WeightingTable() {
		if p.Nominal == "1000" {
			r.add(GroupWeighting, "LA at 1 kHz re the input level", level, ref.LAeq, p.Class1, "IEC 61672-1:2013 Table 3 (class 1), 1 kHz")
		}
	}
	r.add(GroupWeighting, "LC - LA at 1 kHz", 0, ref.LCeq-ref.LAeq, tol, src)
	r.add(GroupWeighting, "LZ - LA at 1 kHz", 0, ref.LZeq-ref.LAeq, tol, src)
}

// linearity checks the level linearity at 8 kHz (the periodic test frequency of IEC 61672-3,
// from memory) from the reference level 94 dB up to 1 dB below full scale and down 70 dB, re
// the reference level (IEC 61672-1:2013 5.6.5), and the 1 dB steps at the top (5.6.6, from
// memory).
func (r *runner) linearity() {
	f, refL := 8000.0, 94.0
	if !(f < 0.45*r.fs) {
		r.skip("level linearity at 8 kHz (run at 1 kHz instead)")
		f = 1000
	}
	kHz := strconv.FormatFloat(f/1000, 'g', -1, 64) + " kHz"
	lim := reference.LevelLinearity()
	top := float64(94 - sensitivityDBFS - 1) // a full-scale sine is 120 dB; stay 1 dB below
	ref, _ := r.steady(0, f, refL, 0.1, 0.5)
	var levels []float64
	step := 5.0
	if r.o.Full {
		step = 1
	}
	for l := refL - 70; l <= top+1e-9; l += step {
		levels = append(levels, l)
	}
	for l := top - 4; l <= top; l++ {
		levels = append(levels, l)
	}
	slices.Sort(levels)
	levels = slices.Compact(levels)
	prev, prevL := math.NaN(), math.NaN()
	for _, l := range levels {
		if l == refL {
			prev, prevL = ref.LAeq, l
			continue
		}
		res, _ := r.steady(0, f, l, 0.1, 0.5)
		r.add(GroupLinearity, fmt.Sprintf("%s at %g dB re 94 dB", kHz, l), l-refL, res.LAeq-ref.LAeq, lim.RangeClass1, "IEC 61672-1:2013 5.6.5 (class 1)")
		if l-prevL == 1 {
			r.add(GroupLinearity, fmt.Sprintf("%s step %g to %g dB", kHz, prevL, l), 1, res.LAeq-prev, lim.StepClass1, "IEC 61672-1:2013 5.6.6 (class 1, from memory)")
		}
		prev, prevL = res.LAeq, l
	}
}

// tonebursts checks LAFmax, LASmax and LAE of 4 kHz tonebursts against IEC 61672-1:2013
// Table 4. Each burst starts and ends at a zero crossing and is cut from a steady sine of
// A-weighted level LA, 10 dB below full scale.
func (r *runner) tonebursts() {
	f := reference.ToneburstFrequency
	if !(f < 0.45*r.fs) {
		r.skip("4 kHz tonebursts")
		return
	}
	const level = 110.0
	steady, _ := r.steady(0, f, level, 0.5, 1)
	la := steady.LAeq
	a, w := amplitude(level), 2*math.Pi*f/r.fs
	src := "IEC 61672-1:2013 Table 4 (class 1)"
	for _, tb := range reference.Tonebursts() {
		if !r.o.Full && tb.Duration != 0.2 && tb.Duration != 0.002 && tb.Duration != 0.00025 {
			continue
		}
		m, err := r.meter(0)
		if err != nil {
			r.err = err
			return
		}
		nb := int64(math.Round(tb.Duration * r.fs))
		r.feed(m, 0, nb, func(i int64) float64 { return a * math.Sin(w*float64(i)) })
		r.feed(m, nb, int64(1.5*r.fs), func(int64) float64 { return 0 })
		var res dsp.Result
		m.Take(&res)
		name := strconv.FormatFloat(tb.Duration*1000, 'g', -1, 64) + " ms"
		r.add(GroupToneburst, "LAFmax - LA, "+name, tb.Fast, res.LAFmax-la, tb.FastClass1, src)
		r.add(GroupToneburst, "LAE - LA, "+name, tb.Exposure, res.LAE-la, tb.FastClass1, src)
		if tb.HasSlow {
			r.add(GroupToneburst, "LASmax - LA, "+name, tb.Slow, res.LASmax-la, tb.SlowClass1, src)
		}
	}
}

// peaks checks LCpeak - LC of single cycles and half cycles against IEC 61672-1:2013 Table 5.
func (r *runner) peaks() {
	const level = 110.0
	a := amplitude(level)
	src := "IEC 61672-1:2013 Table 5 (class 1)"
	for _, pt := range reference.PeakTests() {
		if !r.o.Full && (pt.Frequency == 31.5 || pt.Signal == reference.OneCycle && pt.Frequency == 500) {
			continue
		}
		if !(pt.Frequency < 0.45*r.fs) {
			r.skip(fmt.Sprintf("C-weighted peak of %s of %g Hz", pt.Signal, pt.Frequency))
			continue
		}
		steady, _ := r.steady(0, pt.Frequency, level, settleFor(pt.Frequency), 1)
		m, err := r.meter(0)
		if err != nil {
			r.err = err
			return
		}
		w := 2 * math.Pi * pt.Frequency / r.fs
		period := r.fs / pt.Frequency
		n := int64(math.Round(period))
		sign := 1.0
		switch pt.Signal {
		case reference.PositiveHalfCycle:
			n = int64(math.Round(period / 2))
		case reference.NegativeHalfCycle:
			n, sign = int64(math.Round(period/2)), -1
		}
		pre := int64(0.1 * r.fs)
		r.feed(m, 0, pre, func(int64) float64 { return 0 })
		r.feed(m, pre, n, func(i int64) float64 { return sign * a * math.Sin(w*float64(i-pre)) })
		r.feed(m, pre+n, int64(0.5*r.fs), func(int64) float64 { return 0 })
		var res dsp.Result
		m.Take(&res)
		name := fmt.Sprintf("%s of %g Hz", pt.Signal, pt.Frequency)
		r.add(GroupPeak, "LCpeak - LC, "+name, pt.PeakMinusLevel, res.LCpeak-steady.LCeq, pt.Class1, src)
	}
}

// bands checks the relative attenuation of one-third-octave bands at the breakpoints of
// IEC 61260-1:2014 Table 1 (Formula 9 and 10), on both sides of the midband.
func (r *runner) bands() {
	names := []string{"1000"}
	if r.o.Full {
		names = []string{"63", "1000", "8000"}
	}
	var omegas []float64
	for _, p := range reference.BandMask(3) {
		if !p.StopSide {
			omegas = append(omegas, p.Omega)
		}
	}
	omegas = append(omegas, reference.BreakpointOmega(3, 1), reference.BreakpointOmega(3, 2),
		reference.BreakpointOmega(3, 3), reference.BreakpointOmega(3, 4))
	src := "IEC 61260-1:2014 Table 1 (class 1)"
	for _, nominal := range names {
		var band dsp.Band
		idx := -1
		for i, b := range dsp.Bands(dsp.Third, r.fs) {
			if b.Nominal == nominal {
				band, idx = b, i
			}
		}
		if idx < 0 {
			r.skip("the " + nominal + " Hz band")
			continue
		}
		settle, measure := 0.5, 1.0
		if band.Mid < 200 {
			settle, measure = 2, 2
		}
		level := func(f float64) float64 {
			res, _ := r.steady(dsp.Third, f, 94, settle, measure)
			if idx >= len(res.Bands) {
				return math.NaN()
			}
			return res.Bands[idx]
		}
		mid := level(band.Mid)
		for _, om := range omegas {
			for k, side := range []float64{om, 1 / om} {
				if om == 1 && k == 1 {
					continue
				}
				f := band.Mid * side
				if !(f < 0.45*r.fs) {
					r.skip(fmt.Sprintf("attenuation of the %s Hz band at %.5g fm", nominal, side))
					continue
				}
				tol := reference.BandAttenuationLimits(3, 1, side)
				test := fmt.Sprintf("attenuation of the %s Hz band at %.5g fm (%.4g Hz)", nominal, side, f)
				r.add(GroupBands, test, 0, mid-level(f), tol, src)
			}
		}
	}
}
