package dsp

import (
	"math"
	"testing"
)

// Test signals for the event detector: a 1 kHz sine (A and C weighting 0 dB there, IEC
// 61672-1:2013 Table 3) with a level envelope, at sensitivity -26 dBFS.

// burst returns a signal of total seconds with a 1 kHz sine of level l dB from t0 for tb
// seconds (starting at a zero crossing), digital silence elsewhere.
func burst(total, t0, tb, l float64) []float32 {
	x := make([]float32, int(total*testFS))
	addBurst(x, t0, tb, l)
	return x
}

func addBurst(x []float32, t0, tb, l float64) {
	amp := ampFor(l, -26)
	i0, n := int(t0*testFS), int(tb*testFS)
	for i := range n {
		x[i0+i] = float32(amp * math.Sin(2*math.Pi*1000*float64(i)/testFS))
	}
}

func detect(t *testing.T, cfg EventConfig, x []float32, block int) ([]Event, *EventDetector) {
	t.Helper()
	d, err := NewEventDetector(cfg, testFS)
	if err != nil {
		t.Fatal(err)
	}
	var out []Event
	for len(x) > 0 {
		n := min(block, len(x))
		d.Process(x[:n])
		x = x[n:]
		var e Event
		for d.Next(&e) {
			out = append(out, e)
			e = Event{}
		}
	}
	d.Flush()
	var e Event
	for d.Next(&e) {
		out = append(out, e)
		e = Event{}
	}
	return out, d
}

func testEventConfig() EventConfig {
	return EventConfig{SensitivityDBFS: -26, Threshold: 70, Hysteresis: 5, Hold: 0.5, MinDuration: 0.5, MaxDuration: 60, Bands: Third}
}

// TestEventToneBurst checks a 2 s burst of 80 dB against hand-computed values. The Fast level of
// a burst that starts from silence rises as L + 10 lg(1 - e^(-t/τ)) (IEC 61672-1:2013, Eq. 7)
// and, after it stops, falls as an exponential of time constant τ = 0.125 s (IEC 61672-1:2013,
// 5.8.1): 4.343/τ dB/s. So the event starts t1 = -τ ln(1 - 10^((70-80)/10)) after the burst
// starts, ends τ ln(10^((80-65)/10)) after it stops, and holds the burst's energy from t1 on:
// LAE = 80 + 10 lg(Tb - t1) (ISO 1996-1:2016, 3.1.8).
func TestEventToneBurst(t *testing.T) {
	const (
		l, tb, t0 = 80.0, 2.0, 1.0
		tau       = 0.125
	)
	events, _ := detect(t, testEventConfig(), burst(5, t0, tb, l), 4800)
	if len(events) != 1 {
		t.Fatalf("%d events, want 1: %+v", len(events), events)
	}
	e := events[0]
	t.Logf("event: start %d, %.4f s, LAFmax %.3f, LAeq %.3f, LAE %.3f, LCpeak %.3f", e.Start, e.Duration, e.LAFmax, e.LAeq, e.LAE, e.LCpeak)
	t1 := -tau * math.Log(1-math.Pow(10, (70-l)/10))
	lmax := l + 10*math.Log10(1-math.Exp(-tb/tau))
	t2 := tb + tau*math.Log(math.Pow(10, (lmax-65)/10))
	wantStart, wantDur := t0+t1, t2-t1
	wantLAE := l + 10*math.Log10(tb-t1)
	if got := float64(e.Start) / testFS; math.Abs(got-wantStart) > 0.002 {
		t.Errorf("start %.4f s, want %.4f s", got, wantStart)
	}
	if math.Abs(e.Duration-wantDur) > 0.005 {
		t.Errorf("duration %.4f s, want %.4f s", e.Duration, wantDur)
	}
	if math.Abs(e.LAFmax-lmax) > 0.1 {
		t.Errorf("LAFmax %.2f dB, want %.2f dB", e.LAFmax, lmax)
	}
	if math.Abs(e.LAE-wantLAE) > 0.1 {
		t.Errorf("LAE %.2f dB, want %.2f dB", e.LAE, wantLAE)
	}
	// SEL = LAeq,T + 10 lg(T / 1 s) (ISO 1996-1:2016, 3.1.8), with T the event's duration.
	if got := e.LAeq + 10*math.Log10(e.Duration); math.Abs(got-e.LAE) > 1e-9 {
		t.Errorf("LAeq + 10 lg T = %.4f, LAE = %.4f", got, e.LAE)
	}
	// The peak of a sine is 3.01 dB above its level: 20 lg(√2) (handbook formula); C is 0 dB
	// at 1 kHz (IEC 61672-1:2013 Table 3).
	if math.Abs(e.LCpeak-(l+3.0103)) > 0.1 {
		t.Errorf("LCpeak %.2f dB, want %.2f dB", e.LCpeak, l+3.0103)
	}
	// The event spectrum holds the tone in the 1 kHz band at the event's Leq; the 250 Hz band
	// (two octaves away) is far below (IEC 61260-1:2014 class 1 attenuation, over 60 dB).
	d, _ := NewEventDetector(testEventConfig(), testFS)
	for i, b := range d.Bands() {
		switch b.Nominal {
		case "1000":
			if math.Abs(e.Bands[i]-e.LAeq) > 0.3 {
				t.Errorf("1 kHz band %.2f dB, want the event LAeq %.2f dB", e.Bands[i], e.LAeq)
			}
		case "250":
			if e.Bands[i] > e.LAeq-40 {
				t.Errorf("250 Hz band %.2f dB, want far below %.2f dB", e.Bands[i], e.LAeq)
			}
		}
	}
	if e.Truncated {
		t.Error("event marked truncated")
	}
}

// TestEventPassBy checks a vehicle pass-by: a point source on a straight line at closest
// distance d and speed v gives a mean square ∝ 1/(1 + u²), u = v(t - tc)/d (inverse square
// law, handbook formula), so the exposure between two times is 10^(Lmax/10)·(d/v)·(atan u2 -
// atan u1). LAFmax comes from the definition of the Fast time weighting (IEC 61672-1:2013, 3.7:
// an exponential average of the squared signal with τ = 0.125 s), integrated in the test in 1 ms
// steps of the exact exponential update.
func TestEventPassBy(t *testing.T) {
	const (
		lmax, tc, dv, total = 85.0, 6.0, 1.0, 12.0
		tau                 = 0.125
	)
	x := make([]float32, int(total*testFS))
	amp := ampFor(lmax, -26)
	for i := range x {
		tt := float64(i) / testFS
		u := (tt - tc) / dv
		x[i] = float32(amp / math.Sqrt(1+u*u) * math.Sin(2*math.Pi*1000*tt))
	}
	cfg := testEventConfig()
	cfg.Threshold, cfg.Hysteresis, cfg.Hold = 75, 2, 0
	events, _ := detect(t, cfg, x, 1000)
	if len(events) != 1 {
		t.Fatalf("%d events, want 1", len(events))
	}
	e := events[0]
	t.Logf("event: start %d, %.4f s, LAFmax %.3f, LAeq %.3f, LAE %.3f", e.Start, e.Duration, e.LAFmax, e.LAeq, e.LAE)

	// The Fast level by its definition, and its crossings of 75 and 73 dB.
	const dt = 0.001
	k := math.Exp(-dt / tau)
	var f, maxF float64
	start, end := math.NaN(), math.NaN()
	for i := 0; i < int(total/dt); i++ {
		tt := (float64(i) + 0.5) * dt
		u := (tt - tc) / dv
		ms := math.Pow(10, lmax/10) / (1 + u*u)
		f = ms + (f-ms)*k
		maxF = max(maxF, f)
		lf := 10 * math.Log10(f)
		if math.IsNaN(start) && lf >= 75 {
			start = float64(i+1) * dt
		}
		if !math.IsNaN(start) && math.IsNaN(end) && lf < 73 {
			end = float64(i+1) * dt
		}
	}
	if got := float64(e.Start) / testFS; math.Abs(got-start) > 0.003 {
		t.Errorf("start %.4f s, want %.4f s", got, start)
	}
	if math.Abs(e.Duration-(end-start)) > 0.006 {
		t.Errorf("duration %.4f s, want %.4f s", e.Duration, end-start)
	}
	if want := 10 * math.Log10(maxF); math.Abs(e.LAFmax-want) > 0.1 {
		t.Errorf("LAFmax %.2f dB, want %.2f dB", e.LAFmax, want)
	}
	u1, u2 := (float64(e.Start)/testFS-tc)/dv, (float64(e.End)/testFS-tc)/dv
	wantLAE := lmax + 10*math.Log10(dv*(math.Atan(u2)-math.Atan(u1)))
	if math.Abs(e.LAE-wantLAE) > 0.1 {
		t.Errorf("LAE %.2f dB, want %.2f dB", e.LAE, wantLAE)
	}
	if got := e.LAeq + 10*math.Log10(e.Duration); math.Abs(got-e.LAE) > 1e-9 {
		t.Errorf("LAeq + 10 lg T = %.4f, LAE = %.4f (ISO 1996-1:2016, 3.1.8)", got, e.LAE)
	}
}

// TestEventRules checks hold, minimum and maximum duration with bursts whose Fast level is
// hand-computed: after a burst stops the level falls 34.7 dB/s (IEC 61672-1:2013: 4.343/τ,
// τ = 0.125 s).
func TestEventRules(t *testing.T) {
	twoBursts := burst(6, 1, 1, 80)
	addBurst(twoBursts, 2.3, 1, 80) // 0.3 s gap: the level is under 65 dB for 0.3 - 15/34.7 ≈ 0 s
	wideGap := burst(8, 1, 1, 80)
	addBurst(wideGap, 3, 1, 80) // 1 s gap: under 65 dB for about 1 - 0.43 = 0.57 s
	tests := []struct {
		name  string
		x     []float32
		edit  func(*EventConfig)
		count int
		short int64
		trunc bool
		dur   float64 // of the first event; 0 to skip
	}{
		{"0.3 s gap is no dip below 65 dB", twoBursts, nil, 1, 0, false, 0},
		{"0.57 s dip bridged by a 1 s hold", wideGap, func(c *EventConfig) { c.Hold = 1 }, 1, 0, false,
			3 - 0.0132 + 0.125*math.Log(math.Pow(10, 1.5))},
		{"0.57 s dip ends the event with a 0.2 s hold", wideGap, func(c *EventConfig) { c.Hold = 0.2 }, 2, 0, false,
			1 - 0.0132 + 0.125*math.Log(math.Pow(10, 1.5))},
		{"short burst dropped", burst(3, 1, 0.2, 80), func(c *EventConfig) { c.MinDuration = 1 }, 0, 1, false, 0},
		{"long tone truncated once", burst(12, 1, 10, 80), func(c *EventConfig) { c.MaxDuration = 3 }, 1, 0, true, 3},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			cfg := testEventConfig()
			if tc.edit != nil {
				tc.edit(&cfg)
			}
			events, d := detect(t, cfg, tc.x, 4096)
			if len(events) != tc.count {
				t.Fatalf("%d events, want %d: %+v", len(events), tc.count, events)
			}
			if got := d.Stats().Short; got != tc.short {
				t.Errorf("%d short events, want %d", got, tc.short)
			}
			if tc.count > 0 {
				if events[0].Truncated != tc.trunc {
					t.Errorf("truncated %v, want %v", events[0].Truncated, tc.trunc)
				}
				if tc.dur > 0 && math.Abs(events[0].Duration-tc.dur) > 0.005 {
					t.Errorf("duration %.4f s, want %.4f s", events[0].Duration, tc.dur)
				}
			}
		})
	}
}

// TestEventCalibratorSuppressed: a 94 dB calibrator tone (IEC 60942:2017 nominal level) gives no
// event; an event in progress when the tone is flagged is dropped; after the tone an ordinary
// burst is found again.
func TestEventCalibratorSuppressed(t *testing.T) {
	d, err := NewEventDetector(testEventConfig(), testFS)
	if err != nil {
		t.Fatal(err)
	}
	var e Event
	take := func() int {
		n := 0
		for d.Next(&e) {
			n++
		}
		return n
	}
	// A burst that is in progress when the calibrator is fitted.
	d.Process(burst(1.5, 0.5, 1, 80))
	d.SetSuppressed(true)
	if _, open := d.Open(); open {
		t.Error("event still open after suppression")
	}
	d.Process(burst(5, 0, 5, 94))
	if n := take(); n != 0 {
		t.Errorf("%d events during the calibrator tone, want 0", n)
	}
	d.SetSuppressed(false)
	d.Process(burst(5, 2, 1, 80))
	d.Flush()
	if n := take(); n != 1 {
		t.Errorf("%d events after the tone, want 1", n)
	}
	if got := d.Stats().Suppressed; got != 1 {
		t.Errorf("%d suppressed events, want 1", got)
	}
	// 1.5 + 5 + 2 s of samples before the burst, plus the rise to 70 dB (Eq. 7).
	if got, want := float64(e.Start)/testFS, 8.5+0.0132; math.Abs(got-want) > 0.002 {
		t.Errorf("event after the tone starts at %.4f s, want %.4f s", got, want)
	}
}

// TestEventBlockSizeIndependence: the same samples cut into different blocks give the same
// events, bit for bit.
func TestEventBlockSizeIndependence(t *testing.T) {
	x := burst(8, 1, 1, 80)
	addBurst(x, 3, 2, 77)
	for i := range x {
		x[i] += float32(1e-4 * math.Sin(float64(i)*0.37))
	}
	ref, _ := detect(t, testEventConfig(), x, len(x))
	for _, block := range []int{1, 37, 256, 4801} {
		got, _ := detect(t, testEventConfig(), x, block)
		if len(got) != len(ref) {
			t.Fatalf("block %d: %d events, want %d", block, len(got), len(ref))
		}
		for i := range got {
			a, b := got[i], ref[i]
			if a.Start != b.Start || a.End != b.End || a.LAeq != b.LAeq || a.LAFmax != b.LAFmax || a.LCpeak != b.LCpeak {
				t.Errorf("block %d event %d: %+v, want %+v", block, i, a, b)
			}
			for k := range a.Bands {
				if math.Abs(a.Bands[k]-b.Bands[k]) > 1e-9 && !(math.IsInf(a.Bands[k], -1) && math.IsInf(b.Bands[k], -1)) {
					t.Errorf("block %d event %d band %d: %v, want %v", block, i, k, a.Bands[k], b.Bands[k])
				}
			}
		}
	}
}

func TestEventDetectorAllocations(t *testing.T) {
	d, err := NewEventDetector(testEventConfig(), testFS)
	if err != nil {
		t.Fatal(err)
	}
	x := burst(2, 0.2, 1.2, 80)
	e := Event{Bands: make([]float64, 0, 64)}
	allocs := testing.AllocsPerRun(5, func() {
		d.Process(x[:7777])
		d.Process(x[7777:])
		for d.Next(&e) {
		}
	})
	if allocs != 0 {
		t.Errorf("Process and Next allocate %.1f times per run, want 0", allocs)
	}
}

func TestNewEventDetectorErrors(t *testing.T) {
	good := testEventConfig()
	tests := []func(*EventConfig){
		func(c *EventConfig) { c.Threshold = math.NaN() },
		func(c *EventConfig) { c.Hysteresis = -1 },
		func(c *EventConfig) { c.Hold = -1 },
		func(c *EventConfig) { c.MaxDuration = 0 },
		func(c *EventConfig) { c.MinDuration, c.MaxDuration = 10, 5 },
		func(c *EventConfig) { c.SensitivityDBFS = math.Inf(1) },
	}
	for i, edit := range tests {
		c := good
		edit(&c)
		if _, err := NewEventDetector(c, testFS); err == nil {
			t.Errorf("case %d: %+v accepted", i, c)
		}
	}
	if _, err := NewEventDetector(good, 1000); err == nil {
		t.Error("1 kHz sample rate accepted")
	}
}

// BenchmarkEventDetector measures the detector on one second of 48 kHz noise with bursts.
func BenchmarkEventDetector(b *testing.B) {
	for _, bc := range []struct {
		name  string
		bands BandSet
	}{{"third", Third}, {"nobands", 0}} {
		b.Run(bc.name, func(b *testing.B) {
			cfg := testEventConfig()
			cfg.Bands = bc.bands
			d, err := NewEventDetector(cfg, testFS)
			if err != nil {
				b.Fatal(err)
			}
			x := noisy(48000)
			var e Event
			b.ResetTimer()
			for range b.N {
				d.Process(x)
				for d.Next(&e) {
				}
			}
			ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N*len(x))
			b.ReportMetric(ns, "ns/sample")
		})
	}
}

// TestEventSlow detects on LAS: the Slow level of a 2 s burst of 80 dB rises as
// 80 + 10 lg(1 - e^(-t/τ)) with τ = 1 s (IEC 61672-1:2013, Eq. 7 and 5.8.1), reaching 70 dB after
// -ln(0.9) s and LASmax = 80 + 10 lg(1 - e^(-2)) at the end of the burst; it then falls
// 4.343 dB/s to the 65 dB end level.
func TestEventSlow(t *testing.T) {
	const l, tb, tau = 80.0, 2.0, 1.0
	cfg := testEventConfig()
	cfg.Slow = true
	events, _ := detect(t, cfg, burst(10, 1, tb, l), 4800)
	if len(events) != 1 {
		t.Fatalf("%d events, want 1", len(events))
	}
	e := events[0]
	t1 := -tau * math.Log(1-math.Pow(10, (70-l)/10))
	lmax := l + 10*math.Log10(1-math.Exp(-tb/tau))
	t2 := tb + tau*math.Log(math.Pow(10, (lmax-65)/10))
	if got := float64(e.Start) / testFS; math.Abs(got-(1+t1)) > 0.002 {
		t.Errorf("start %.4f s, want %.4f s", got, 1+t1)
	}
	if math.Abs(e.Duration-(t2-t1)) > 0.005 {
		t.Errorf("duration %.4f s, want %.4f s", e.Duration, t2-t1)
	}
	if math.Abs(e.LASmax-lmax) > 0.1 {
		t.Errorf("LASmax %.2f dB, want %.2f dB", e.LASmax, lmax)
	}
	// The Fast level reaches the burst's level: LAFmax 80 dB (Eq. 7 with τ = 0.125 s).
	if math.Abs(e.LAFmax-l) > 0.1 {
		t.Errorf("LAFmax %.2f dB, want %.2f dB", e.LAFmax, l)
	}
	if want := l + 10*math.Log10(tb-t1); math.Abs(e.LAE-want) > 0.1 {
		t.Errorf("LAE %.2f dB, want %.2f dB", e.LAE, want)
	}
}
