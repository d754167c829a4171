package scene

import (
	"bytes"
	"math"
	"strings"
	"testing"
	"time"

	"gonum.org/v1/gonum/dsp/fourier"

	"github.com/leqnode/leqnode/node/lib/wav"
)

func mustNew(t testing.TB, c Config) *Scene {
	t.Helper()
	s, err := New(c)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func read(s *Scene, n int) []float32 {
	x := make([]float32, n)
	s.Read(x)
	return x
}

// expectedPeak is the peak of a sine of level L dB SPL seen by a microphone of sensitivity S
// dBFS, written out from AES17 and the sensitivity's definition: 94 dB SPL reads S dBFS, so L
// reads L - 94 + S dBFS, and a full-scale sine (peak 1.0) is 0 dBFS, so a sine at x dBFS has
// peak 10^(x/20) and RMS 10^(x/20)/√2.
func expectedPeak(level, sens float64) float64 { return math.Pow(10, (level-94+sens)/20) }

// levelOf returns 20 lg(rms/rms0) + L0, the level of samples whose RMS is rms, against the
// reference of expectedPeak: a sine of level L has RMS expectedPeak(L, S)/√2.
func levelOf(rms, sens float64) float64 {
	return 94 - sens + 20*math.Log10(rms*math.Sqrt2)
}

func rmsOf(x []float32) float64 {
	var s float64
	for _, v := range x {
		s += float64(v) * float64(v)
	}
	return math.Sqrt(s / float64(len(x)))
}

// aWeight is the A-weighting of IEC 61672-1:2013 Annex E as a power ratio, written out here
// independently of the package: A(f) = 20 lg[f4² f⁴ / ((f²+f1²) √(f²+f2²) √(f²+f3²) (f²+f4²))]
// - A1000, with f1 = 20.598997, f2 = 107.65265, f3 = 737.86223, f4 = 12194.217 Hz and
// A1000 = -2.000 dB (the normalisation at 1 kHz; Annex E, E.6).
func aWeight(f float64) float64 {
	const f1, f2, f3, f4 = 20.598997, 107.65265, 737.86223, 12194.217
	f2s := f * f
	r := f4 * f4 * f2s * f2s / ((f2s + f1*f1) * math.Sqrt(f2s+f2*f2) * math.Sqrt(f2s+f3*f3) * (f2s + f4*f4))
	return r * r / math.Pow(10, -2.0/10)
}

// spectrumMS returns the mean square of x, A-weighted or not, from its discrete Fourier
// transform (Parseval's theorem), and the mean square in each octave band centred on the given
// frequencies (band edges at fc/√2 and fc·√2).
func spectrumMS(x []float32, fs float64, aWeighted bool, octaves []float64) (float64, []float64) {
	n := len(x)
	seq := make([]float64, n)
	for i, v := range x {
		seq[i] = float64(v)
	}
	fft := fourier.NewFFT(n)
	c := fft.Coefficients(nil, seq)
	var total float64
	bands := make([]float64, len(octaves))
	for k, v := range c {
		p := real(v)*real(v) + imag(v)*imag(v)
		if k != 0 && !(n%2 == 0 && k == n/2) {
			p *= 2
		}
		p /= float64(n) * float64(n)
		f := fft.Freq(k) * fs
		for b, fc := range octaves {
			if f >= fc/math.Sqrt2 && f < fc*math.Sqrt2 {
				bands[b] += p
			}
		}
		if aWeighted {
			p *= aWeight(f)
		}
		total += p
	}
	return total, bands
}

func TestDeterminism(t *testing.T) {
	c := Config{SampleRate: 16000, Seed: 7, CalibratorSeconds: 1}
	a := read(mustNew(t, c), 32000)
	b := read(mustNew(t, c), 32000)
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("sample %d differs between two scenes of the same config", i)
		}
	}
	c.Seed = 8
	d := read(mustNew(t, c), 32000)
	same := 0
	for i := 16000; i < len(a); i++ {
		if a[i] == d[i] {
			same++
		}
	}
	if same > 100 {
		t.Errorf("seeds 7 and 8 give %d equal samples of 16000 after the calibrator", same)
	}
}

// TestBlockSizes: the samples do not depend on how Read calls cut them, across the calibrator's
// end and a one-minute planning boundary.
func TestBlockSizes(t *testing.T) {
	for _, c := range []Config{
		{SampleRate: 8000, Seed: 3, CalibratorSeconds: 2, CarsPerMinute: 20, BirdSongsPerMinute: 10},
		{SampleRate: 48000, Seed: 4, CalibratorSeconds: 0.5},
	} {
		n := c.SampleRate * 125 // past the first planning boundary at 60 s and the second at 120 s
		if c.SampleRate == 48000 {
			n = 3 * 48000
		}
		ref := read(mustNew(t, c), n)
		for _, block := range []int{1, 7, 480, 48000} {
			s := mustNew(t, c)
			got := make([]float32, 0, n)
			buf := make([]float32, block)
			for len(got) < n {
				k := min(block, n-len(got))
				if r := s.Read(buf[:k]); r != k {
					t.Fatalf("Read returned %d, want %d", r, k)
				}
				got = append(got, buf[:k]...)
			}
			for i := range ref {
				if got[i] != ref[i] {
					t.Fatalf("%d Hz, blocks of %d: sample %d is %v, in one block %v", c.SampleRate, block, i, got[i], ref[i])
				}
			}
			if s.Position() != int64(n) {
				t.Errorf("Position = %d, want %d", s.Position(), n)
			}
		}
	}
}

// TestCalibrator: the tone's RMS, steadiness, frequency and fade-in.
func TestCalibrator(t *testing.T) {
	tests := []struct {
		fs          int
		sens, level float64
		freq        float64
	}{
		{48000, -26, 94, 1000},
		{48000, -38, 114, 1000}, // a 114 dB calibrator on a less sensitive microphone
		{44100, -26, 94, 1000},
		{16000, -42, 94, 250},
	}
	for _, tc := range tests {
		c := Config{SampleRate: tc.fs, Seed: 1, SensitivityDBFS: tc.sens, CalibratorSeconds: 3,
			CalibratorLevel: tc.level, CalibratorFrequency: tc.freq}
		s := mustNew(t, c)
		x := read(s, 3*tc.fs)
		if s.CalibratorEnd() != int64(3*tc.fs) {
			t.Errorf("CalibratorEnd = %d", s.CalibratorEnd())
		}
		// RMS of the steady part (0.5 s to 2.5 s, a whole number of cycles) against the
		// expected sine: 94 dB SPL at -26 dBFS is a sine of peak 10^(-26/20) = 0.050119 and RMS
		// 0.035439 (computed from AES17 as written in expectedPeak).
		want := expectedPeak(tc.level, tc.sens) / math.Sqrt2
		steady := x[tc.fs/2 : 5*tc.fs/2]
		if got := rmsOf(steady); math.Abs(20*math.Log10(got/want)) > 0.001 {
			t.Errorf("%+v: steady RMS %.6f, want %.6f (%.4f dB off)", tc, got, want, 20*math.Log10(got/want))
		}
		// Steady to 0.01 dB: every 100 ms window holds a whole number of cycles and reads the
		// same level (IEC 60942:2017 Table 2 allows a class LS calibrator 0.03 dB of short-term
		// fluctuation, via the phonometry open-source copy of calibrators.py).
		win := tc.fs / 10
		for i := tc.fs / 4; i+win <= 11*tc.fs/4; i += win {
			if d := 20 * math.Log10(rmsOf(x[i:i+win])/want); math.Abs(d) > 0.01 {
				t.Errorf("%+v: window at %.2f s reads %.4f dB off", tc, float64(i)/float64(tc.fs), d)
				break
			}
		}
		// Frequency from the count of upward zero crossings over the steady 2 s.
		ups := 0
		for i := 1; i < len(steady); i++ {
			if steady[i-1] < 0 && steady[i] >= 0 {
				ups++
			}
		}
		if f := float64(ups) / 2; math.Abs(f-tc.freq) > 1 {
			t.Errorf("%+v: %v Hz from zero crossings", tc, f)
		}
		// Fade-in: starts from silence, quieter in its first 50 ms than the steady tone.
		if x[0] != 0 {
			t.Errorf("first sample %v, want 0", x[0])
		}
		if r := rmsOf(x[:tc.fs/20]); r > want/10 {
			t.Errorf("%+v: first 50 ms RMS %v is not a fade-in (steady %v)", tc, r, want)
		}
		// The peak never exceeds the sine's peak.
		var pk float64
		for _, v := range x {
			pk = max(pk, math.Abs(float64(v)))
		}
		if p := expectedPeak(tc.level, tc.sens); pk > p*1.0001 {
			t.Errorf("%+v: peak %v above the sine's %v", tc, pk, p)
		}
	}
}

// TestBackground: the background alone reads its configured A-weighted level, measured from
// its spectrum with the A-weighting of IEC 61672-1 Annex E; its unweighted level is plausible
// for a quiet street; and it is pink-ish: roughly equal energy in the octaves from 63 Hz to
// 2 kHz (pink noise has equal energy per octave, common practice).
func TestBackground(t *testing.T) {
	for _, tc := range []struct {
		fs    int
		level float64
	}{{48000, 42}, {44100, 45}, {16000, 42}} {
		c := Config{SampleRate: tc.fs, Seed: 11, BackgroundLevel: tc.level, CarsPerMinute: -1, BusInterval: -1, BirdSongsPerMinute: -1}
		s := mustNew(t, c)
		read(s, tc.fs) // let the filters settle
		x := read(s, 10*tc.fs)
		msA, _ := spectrumMS(x, float64(tc.fs), true, nil)
		la := levelOf(math.Sqrt(msA), -26)
		if math.Abs(la-tc.level) > 0.3 {
			t.Errorf("%d Hz: background reads %.2f dB(A), want %.1f", tc.fs, la, tc.level)
		}
		lz := levelOf(rmsOf(x), -26)
		if lz < tc.level || lz > tc.level+12 {
			t.Errorf("%d Hz: unweighted background %.2f dB for %.1f dB(A)", tc.fs, lz, tc.level)
		}
		_, oct := spectrumMS(x, float64(tc.fs), false, []float64{63, 125, 250, 500, 1000, 2000})
		for i, p := range oct {
			if d := 10 * math.Log10(p/oct[4]); math.Abs(d) > 3 {
				t.Errorf("%d Hz: octave %d is %.1f dB from the 1 kHz octave", tc.fs, i, d)
			}
		}
		t.Logf("%d Hz: %.2f dB(A), %.2f dB unweighted", tc.fs, la, lz)
	}
}

// TestVehicleLevel: around a car's closest approach its A-weighted equivalent level over
// ±T matches the moving point source model: power ∝ d²/(d²+v²t²), whose mean over ±T is
// (τ/T)·atan(T/τ) with τ = d/v (integral of 1/(1+u²) is atan u).
func TestVehicleLevel(t *testing.T) {
	const fs = 16000
	c := Config{SampleRate: fs, Seed: 5, BackgroundLevel: 10, BusInterval: -1, BirdSongsPerMinute: -1, CarsPerMinute: 1}
	s := mustNew(t, c)
	evs := s.Events(0, 10*60*fs)
	checked := 0
	const T = 0.5
	var pos int64
	for i, ev := range evs {
		// An isolated car: no other event within its extent.
		if (i > 0 && evs[i-1].End > ev.Start) || (i+1 < len(evs) && evs[i+1].Start < ev.End) {
			continue
		}
		if ev.Kind != Car {
			t.Fatalf("unexpected %v", ev.Kind)
		}
		if ev.Level < 65 || ev.Level > 75 {
			t.Errorf("car level %.1f out of 65 to 75", ev.Level)
		}
		from := ev.Peak - int64(T*fs)
		read(s, int(from-pos))
		x := read(s, int(2*T*fs))
		pos = from + int64(len(x))
		msA, _ := spectrumMS(x, fs, true, nil)
		got := levelOf(math.Sqrt(msA), -26)
		tau := ev.Distance / ev.Speed
		want := ev.Level + 10*math.Log10(tau/T*math.Atan(T/tau))
		if math.Abs(got-want) > 0.5 {
			t.Errorf("car at %.1f s (d %.1f m, v %.1f m/s, %.1f dB): %.2f dB(A) over ±%v s, want %.2f",
				float64(ev.Peak)/fs, ev.Distance, ev.Speed, ev.Level, got, T, want)
		}
		checked++
		if checked == 3 {
			break
		}
	}
	if checked == 0 {
		t.Fatal("no isolated car in ten minutes")
	}
}

// TestEvents checks the plan: levels and durations in their stated ranges, a bus on the
// timetable, order by start, and agreement between Events over a long span and over parts.
func TestEvents(t *testing.T) {
	c := Config{SampleRate: 8000, Seed: 9, CalibratorSeconds: 10}
	s := mustNew(t, c)
	const fs = 8000
	evs := s.Events(0, 40*60*fs)
	count := map[Kind]int{}
	for i, ev := range evs {
		count[ev.Kind]++
		if i > 0 && ev.Start < evs[i-1].Start {
			t.Fatal("events not ordered by start")
		}
		if ev.Kind != Calibrator && ev.Start < s.CalibratorEnd() && ev.Peak < s.CalibratorEnd() {
			t.Errorf("%v at %d plays under the calibrator", ev.Kind, ev.Peak)
		}
		switch ev.Kind {
		case Car:
			if ev.Level < 65 || ev.Level > 75 {
				t.Errorf("car level %.1f", ev.Level)
			}
			// The 10 dB-down width of a pass, 2·3τ (d²/(d²+v²t²) = 1/10 at vt = 3d), is a
			// few seconds.
			if w := 6 * ev.Distance / ev.Speed; w < 2 || w > 10 {
				t.Errorf("car 10 dB-down width %.1f s", w)
			}
		case Bus:
			if ev.Level < 76 || ev.Level > 82 {
				t.Errorf("bus level %.1f", ev.Level)
			}
			if ev.Frequency < 40 || ev.Frequency > 100 {
				t.Errorf("bus engine at %.0f Hz", ev.Frequency)
			}
		case BirdSong:
			if ev.Frequency < 2000 || ev.f1 > 6000 {
				t.Errorf("bird glide %.0f to %.0f Hz", ev.Frequency, ev.f1)
			}
			if d := float64(ev.End-ev.Start) / fs; d > 3 {
				t.Errorf("bird song of %.1f s", d)
			}
		}
	}
	// 40 minutes: about 120 cars, 3 or 4 buses (first at 10 s + 30 s, then every 12 min ±15 %),
	// about 60 songs, one calibrator.
	if count[Car] < 80 || count[Car] > 160 || count[Bus] < 3 || count[Bus] > 4 || count[BirdSong] < 30 || count[Calibrator] != 1 {
		t.Errorf("counts %v", count)
	}
	first := -1
	for i, ev := range evs {
		if ev.Kind == Bus {
			first = i
			break
		}
	}
	if first < 0 || evs[first].Peak != s.CalibratorEnd()+30*fs {
		t.Errorf("first bus not 30 s after the calibrator")
	}
	// Planning is per slot: a part of the span lists the same events.
	part := s.Events(15*60*fs, 16*60*fs)
	n := 0
	for _, ev := range evs {
		if ev.Start < 16*60*fs && ev.End > 15*60*fs {
			if n >= len(part) || part[n].Start != ev.Start || part[n].Level != ev.Level {
				t.Fatalf("Events of minute 15 differ from those of the whole span")
			}
			n++
		}
	}
	if n != len(part) {
		t.Errorf("minute 15 lists %d events, the whole span %d", len(part), n)
	}
}

// TestTimeOfDay: with a start time, nights are quiet and buses do not run from 00:00 to 05:00.
func TestTimeOfDay(t *testing.T) {
	const fs = 8000
	night := mustNew(t, Config{SampleRate: fs, Seed: 2, Start: time.Date(2031, 5, 4, 1, 0, 0, 0, time.UTC)})
	day := mustNew(t, Config{SampleRate: fs, Seed: 2, Start: time.Date(2031, 5, 4, 8, 0, 0, 0, time.UTC)})
	count := func(s *Scene, k Kind) int {
		n := 0
		for _, ev := range s.Events(0, 3*3600*fs) {
			if ev.Kind == k && ev.Peak < 3*3600*fs {
				n++
			}
		}
		return n
	}
	if n := count(night, Bus); n != 0 {
		t.Errorf("%d buses between 01:00 and 04:00", n)
	}
	if n := count(day, Bus); n < 13 || n > 16 {
		t.Errorf("%d buses between 08:00 and 11:00, want about 15", n)
	}
	if cn, cd := count(night, Car), count(day, Car); cn*5 > cd {
		t.Errorf("%d cars at night, %d by day", cn, cd)
	}
}

// TestNoClipping: the default scene stays well inside full scale (a MEMS microphone of
// -26 dBFS sensitivity clips at 120 dB SPL); a calibrator far too loud for the microphone
// clips and is counted.
func TestNoClipping(t *testing.T) {
	s := mustNew(t, Config{SampleRate: 16000, Seed: 1, CalibratorSeconds: 5})
	var pk float64
	buf := make([]float32, 16000)
	for i := 0; i < 5*60; i++ {
		s.Read(buf)
		for _, v := range buf {
			pk = max(pk, math.Abs(float64(v)))
		}
	}
	if s.Clipped() != 0 || pk > 0.5 {
		t.Errorf("default scene: %d clipped, peak %v", s.Clipped(), pk)
	}
	loud := mustNew(t, Config{SampleRate: 16000, CalibratorSeconds: 1, CalibratorLevel: 124})
	read(loud, 16000)
	if loud.Clipped() == 0 {
		t.Error("a 124 dB tone at -26 dBFS sensitivity (peak +4 dBFS) did not clip")
	}
}

func TestReadNoAllocs(t *testing.T) {
	s := mustNew(t, Config{SampleRate: 8000, Seed: 1, CalibratorSeconds: 1})
	buf := make([]float32, 4000)
	s.Read(buf)
	// 140 calls of 0.5 s cross two planning boundaries.
	if a := testing.AllocsPerRun(140, func() { s.Read(buf) }); a != 0 {
		t.Errorf("Read allocates %v times per call", a)
	}
}

func TestConfigErrors(t *testing.T) {
	tests := []struct {
		c    Config
		text string
	}{
		{Config{SampleRate: 4000}, "sample rate 4000 Hz"},
		{Config{SampleRate: 200000}, "sample rate"},
		{Config{SensitivityDBFS: 3}, "sensitivity"},
		{Config{SensitivityDBFS: math.NaN()}, "sensitivity"},
		{Config{CalibratorSeconds: -1}, "calibrator duration"},
		{Config{CalibratorLevel: 150}, "calibrator level"},
		{Config{CalibratorFrequency: 30000}, "calibrator frequency"},
		{Config{SampleRate: 8000, CalibratorFrequency: 4000}, "calibrator frequency"},
		{Config{BackgroundLevel: -3}, "background level"},
		{Config{CarsPerMinute: 1000}, "cars per minute"},
		{Config{BirdSongsPerMinute: math.Inf(1)}, "bird songs"},
		{Config{BusInterval: time.Second}, "bus interval"},
	}
	for _, tc := range tests {
		_, err := New(tc.c)
		if err == nil || !strings.Contains(err.Error(), tc.text) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%+v: error %v, want one line about %q", tc.c, err, tc.text)
		}
	}
}

// TestRender writes a recording with the wav package and reads it back.
func TestRender(t *testing.T) {
	var buf bytes.Buffer
	c := Config{SampleRate: 16000, Seed: 1, CalibratorSeconds: 1}
	if err := Render(&buf, c, 2*time.Second); err != nil {
		t.Fatal(err)
	}
	r, err := wav.NewReader(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if f := r.Format(); f != (wav.Format{SampleRate: 16000, Channels: 1, Encoding: wav.PCM24}) {
		t.Errorf("format %v", f)
	}
	got := make([]float32, 40000)
	n, _ := r.Read(got)
	if n != 32000 {
		t.Fatalf("%d samples, want 32000", n)
	}
	want := read(mustNew(t, c), 32000)
	for i := range want {
		if math.Abs(float64(got[i]-want[i])) > 1.0/8388608 {
			t.Fatalf("sample %d: file %v, scene %v", i, got[i], want[i])
		}
	}
	if err := Render(&buf, Config{CalibratorSeconds: 1, CalibratorLevel: 124}, time.Second); err == nil || !strings.Contains(err.Error(), "clipped") {
		t.Errorf("clipping scene: %v", err)
	}
}
