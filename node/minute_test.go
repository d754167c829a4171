package node

import (
	"math"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// noise returns a deterministic pseudo-random sample, uniform in [-1, 1).
func noise(i int64) float64 {
	x := uint64(i)*6364136223846793005 + 1442695040888963407
	x ^= x >> 33
	x *= 0xff51afd7ed558ccd
	x ^= x >> 33
	return float64(x>>11)/float64(1<<52) - 1
}

// energyMean is the equivalent continuous level of equal-length seconds, written out: ISO
// 1996-1:2016, 3.1.7, LAeq = 10 lg((1/N) Σ 10^(Li/10)).
func energyMean(levels []float64) float64 {
	var e float64
	for _, l := range levels {
		e += math.Pow(10, l/10)
	}
	return 10 * math.Log10(e/float64(len(levels)))
}

// minuteFromSeconds returns the valid seconds' LAeq of the minute starting at m, as read back
// from the store (annotations applied), and the seconds left out by flag.
func minuteFromSeconds(t *testing.T, st *buffer.Store, m time.Time) (counted []float64, overload, leftOut int) {
	t.Helper()
	for _, s := range records[*record.Second](t, st, record.KindSecond) {
		if s.Start.Before(m) || !s.Start.Before(m.Add(time.Minute)) {
			continue
		}
		// The rule, written out (README, "Which seconds count"): calibrating, settling,
		// excluded, suspect, dropped and silent seconds are left out; overloaded seconds stay.
		if s.Flags&(record.Calibrating|record.Settling|record.Excluded|record.Suspect|record.Dropped|record.DigitalSilence) != 0 || math.IsNaN(s.LAeq) {
			leftOut++
			continue
		}
		if s.Flags.Has(record.Overload) {
			overload++
		}
		counted = append(counted, s.LAeq)
	}
	return counted, overload, leftOut
}

func TestMinuteFromValidSeconds(t *testing.T) {
	// One minute of steady noise at about 64 dB holding, in turn, a 94 dB calibrator tone
	// (left out), 5 s of overload at 115 dB (kept: the minute becomes a lower bound) and a
	// 1 kHz machine tone at 80 dB that is not a calibrator (kept, and an event). The minute
	// record's LAeq must equal the energy mean of the seconds a reader of the second records
	// counts, and its counts must say what was left out.
	const fs = 48000
	sig := func(i int64) float32 {
		t := float64(i) / fs
		bg := 0.0027 * noise(i) // uniform, RMS 0.0027/√3: -56 dBFS, 64 dB SPL at -26 dBFS
		switch {
		case t >= 10 && t < 22: // 94 dB calibrator, 1 kHz
			return float32(ampFor(94)*math.Sin(2*math.Pi*1000*t) + bg)
		case t >= 30 && t < 35: // overload: LZpeak far above the 120 dB overload level
			return float32(ampFor(115)*math.Sin(2*math.Pi*500*t) + bg)
		case t >= 40 && t < 52: // a 1 kHz machine at 80 dB
			return float32(ampFor(80)*math.Sin(2*math.Pi*1000*t) + bg)
		}
		return float32(bg)
	}
	src := &fakeSource{fs: fs, signal: sig, total: 60 * fs, t0: t0}
	ev := dsp.DefaultEventConfig(-26)
	r := newRig(t, src, func(o *Options) {
		o.Calibration = &CalibrationOptions{NominalDBFS: -26}
		o.Events = &ev
		o.OverloadLevel = 118
	})
	r.run(t)

	mins := records[*record.Minute](t, r.store, record.KindMinute)
	if len(mins) != 1 {
		t.Fatalf("%d minute records, want 1", len(mins))
	}
	m := mins[0]
	counted, overload, leftOut := minuteFromSeconds(t, r.store, t0)
	want := energyMean(counted)
	if math.Abs(m.LAeq-want) > 0.01 {
		t.Errorf("minute LAeq %.2f, energy mean of its %d valid seconds %.2f", m.LAeq, len(counted), want)
	}
	if m.ValidSeconds != len(counted) || m.OverloadSeconds != overload || m.ValidSeconds+sumInts(m.LeftOut[:]) != 60 || sumInts(m.LeftOut[:]) != leftOut {
		t.Errorf("minute counts valid %d overload %d left out %v; seconds say valid %d overload %d left out %d",
			m.ValidSeconds, m.OverloadSeconds, m.LeftOut, len(counted), overload, leftOut)
	}
	// The minute's spectrum is the energy mean of its counted seconds' spectra, band by band
	// (ISO 1996-1:2016, 3.1.7, per band).
	var specSecs [][]float64
	for _, s := range records[*record.Second](t, r.store, record.KindSecond) {
		if s.Flags&(record.Calibrating|record.Settling|record.Excluded|record.Suspect|record.Dropped) == 0 && len(s.Spectrum) > 0 && s.Duration == time.Second {
			specSecs = append(specSecs, s.Spectrum)
		}
	}
	for b := range m.Spectrum {
		var band []float64
		for _, sp := range specSecs {
			band = append(band, sp[b])
		}
		if want := energyMean(band); math.Abs(m.Spectrum[b]-want) > 0.05 {
			t.Errorf("minute band %d: %.2f dB, energy mean of its seconds %.2f", b, m.Spectrum[b], want)
			break
		}
	}
	// 12 s of tone plus 2 s margins: at least 14 s calibrating; 2 s settling at the start.
	if c := m.LeftOut[record.ReasonCalibrating]; c < 14 || c > 17 {
		t.Errorf("%d seconds left out as calibrating, want 14 to 17", c)
	}
	if m.LeftOut[record.ReasonSettling] != 2 {
		t.Errorf("%d seconds left out as settling, want 2", m.LeftOut[record.ReasonSettling])
	}
	if !m.Flags.Has(record.Overload) || m.OverloadSeconds < 5 {
		t.Errorf("minute flags %v, overload seconds %d: want overload kept (a lower bound)", m.Flags, m.OverloadSeconds)
	}
	if m.Flags&record.LeftOutFlags != 0 {
		t.Errorf("minute carries left-out flags %v: they would leave the whole minute out", m.Flags)
	}
	// The machine tone is sound: its seconds are not calibrating and it makes an event.
	for _, s := range records[*record.Second](t, r.store, record.KindSecond) {
		if sec := s.Start.Sub(t0); sec >= 41*time.Second && sec < 51*time.Second && s.Flags.Has(record.Calibrating) {
			t.Errorf("second %v of the 80 dB machine tone flagged calibrating", sec)
		}
	}
	var machine bool
	for _, e := range records[*record.Event](t, r.store, record.KindEvent) {
		if e.Start.Sub(t0) >= 39*time.Second && e.Start.Sub(t0) < 42*time.Second && math.Abs(e.LAFmax-80) < 1 {
			machine = true
		}
	}
	if !machine {
		t.Error("no event for the 80 dB machine tone")
	}
	// The calibrator's 12 s of Fast levels near 94 dB (1200 samples at 10 ms) are not in the
	// minute's histogram; the overload's decay passes through in a few samples.
	var near94 uint32
	for i, c := range m.Histogram.Counts {
		if k := int(m.Histogram.First) + i; k >= 930 && k <= 950 {
			near94 += c
		}
	}
	if near94 > 20 {
		t.Errorf("%d Fast level samples between 93 and 95 dB: the calibrator tone is in the minute's statistics", near94)
	}
}

func TestMachineToneIsNotCalibrator(t *testing.T) {
	// Steady 1 kHz tones at levels no configured calibrator (94, 114 dB, ±3 dB adjustment)
	// has: every second stays in the data (IEC 60942 calibrators state their level; a tone at
	// another level is sound of the place, common practice).
	for _, level := range []float64{70, 84, 90, 100, 104, 110} {
		sig := func(i int64) float32 {
			t := float64(i) / 48000
			return float32(ampFor(level)*math.Sin(2*math.Pi*1000*t) + 1e-4*noise(i))
		}
		src := &fakeSource{fs: 48000, signal: sig, total: 15 * 48000, t0: t0}
		r := newRig(t, src, func(o *Options) { o.Calibration = &CalibrationOptions{NominalDBFS: -26} })
		r.run(t)
		for _, s := range records[*record.Second](t, r.store, record.KindSecond) {
			if s.Flags.Has(record.Calibrating) {
				t.Errorf("%.0f dB tone: second %v flagged calibrating", level, s.Start.Sub(t0))
				break
			}
		}
		if a := records[*record.Annotation](t, r.store, record.KindAnnotation); len(a) != 0 {
			t.Errorf("%.0f dB tone: annotations %+v", level, a)
		}
	}
}

func sumInts(v []int) int {
	s := 0
	for _, x := range v {
		s += x
	}
	return s
}
