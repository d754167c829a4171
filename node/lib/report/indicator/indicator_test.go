package indicator

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/testrig"
)

func profile(t *testing.T, name string) *profiles.Profile {
	t.Helper()
	p, err := profiles.Load(name)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if !(math.Abs(got-want) <= tol) {
		t.Errorf("%s = %.4f, want %.4f (±%g)", what, got, want, tol)
	}
}

// TestCompositeCheckValues: Lden and Ldn from given period levels.
func TestCompositeCheckValues(t *testing.T) {
	lg := math.Log10
	p := func(l float64) float64 { return math.Pow(10, l/10) }
	// Directive 2002/49/EC Annex I §1, written out:
	// Lden = 10 lg{(1/24)[12·10^(Lday/10) + 4·10^((Levening+5)/10) + 8·10^((Lnight+10)/10)]}.
	lden := func(d, e, n float64) float64 { return 10 * lg((12*p(d)+4*p(e+5)+8*p(n+10))/24) }
	// Ldn = 10 lg{(1/24)[15·10^(Ld/10) + 9·10^((Ln+10)/10)]} (US EPA 1974, from memory).
	ldn := func(d, n float64) float64 { return 10 * lg((15*p(d)+9*p(n+10))/24) }
	tests := []struct {
		name    string
		levels  []float64
		want    float64 // check value computed from the formula (acoustics check values, [CALC])
		formula float64
	}{
		{"Lden(60,60,60)", []float64{60, 60, 60}, 66.40, lden(60, 60, 60)},
		{"Lden(70,65,60)", []float64{70, 65, 60}, 70.00, lden(70, 65, 60)},
		{"Lden(65,62,58)", []float64{65, 62, 58}, 66.55, lden(65, 62, 58)},
		{"Ldn(70,50)", []float64{70, 50}, 68.21, ldn(70, 50)},
		{"Ldn(60,60)", []float64{60, 60}, 66.41, ldn(60, 60)},
	}
	for _, tc := range tests {
		hours, pens := []float64{12, 4, 8}, []float64{0, 5, 10}
		if len(tc.levels) == 2 {
			hours, pens = []float64{15, 9}, []float64{0, 10}
		}
		got := Composite(tc.levels, hours, pens)
		near(t, tc.name, got, tc.want, 0.005)
		near(t, tc.name+" vs formula", got, tc.formula, 1e-9)
	}
	if !math.IsNaN(Composite([]float64{60, math.NaN(), 50}, []float64{12, 4, 8}, []float64{0, 5, 10})) {
		t.Error("Composite with a missing period is not NaN")
	}
}

// seconds adds second records from start for n seconds at the level lv(i) (LCeq = LAeq + 3).
func seconds(b *Builder, start time.Time, n int, flags record.Flags, lv func(i int) float64) {
	for i := range n {
		l := lv(i)
		b.AddSecond(&record.Second{Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: l, LCeq: l + 3, Flags: flags})
	}
}

// TestDailyFromHourly: hourly levels 50 + h dB (h = 0 ... 23, UTC) give per-hour LAeq exactly,
// period levels as the energy mean of their hours (ISO 1996-1:2016, 3.1.7, written out) and
// Lden from the Directive's formula.
func TestDailyFromHourly(t *testing.T) {
	day := time.Date(2026, 6, 10, 0, 0, 0, 0, time.UTC)
	prof := profile(t, "eu-lden")
	b := NewBuilder(prof, nil, time.UTC, day.Add(7*time.Hour), day.Add(31*time.Hour), Options{})
	seconds(b, day.Add(7*time.Hour), 24*3600, 0, func(i int) float64 { return 50 + float64((7+i/3600)%24) })
	r := b.Result()
	if len(r.Hours) != 24 {
		t.Fatalf("%d hours", len(r.Hours))
	}
	for _, h := range r.Hours {
		near(t, "hour "+h.From.Format("15"), h.LAeq, 50+float64(h.From.Hour()), 1e-9)
	}
	mean := func(hours ...int) float64 {
		var s float64
		for _, h := range hours {
			s += math.Pow(10, (50+float64(h))/10)
		}
		return 10 * math.Log10(s/float64(len(hours)))
	}
	ld := mean(7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18)
	le := mean(19, 20, 21, 22)
	ln := mean(23, 0, 1, 2, 3, 4, 5, 6)
	if len(r.Days) != 1 || len(r.Periods) != 3 {
		t.Fatalf("%d days, %d periods", len(r.Days), len(r.Periods))
	}
	near(t, "Lday", r.Periods[0].LAeq, ld, 1e-9)
	near(t, "Levening", r.Periods[1].LAeq, le, 1e-9)
	near(t, "Lnight", r.Periods[2].LAeq, ln, 1e-9)
	near(t, "LCeq - LAeq", r.Periods[0].LowFrequency, 3, 1e-9)
	wantLden := 10 * math.Log10((12*math.Pow(10, ld/10)+4*math.Pow(10, (le+5)/10)+8*math.Pow(10, (ln+10)/10))/24)
	near(t, "Lden", r.Days[0].Composite, wantLden, 1e-9)
	near(t, "daily LAeq", r.Days[0].LAeq, mean(0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 22, 23), 1e-9)
	if !r.Days[0].Complete || r.Days[0].Coverage.Share != 1 {
		t.Errorf("day complete %v coverage %v", r.Days[0].Complete, r.Days[0].Coverage)
	}
	// 1 h at 60 dB + 1 h at 70 dB → LAeq,2h 67.40 (acoustics check values, [CALC]).
	b2 := NewBuilder(profile(t, "india-2000"), nil, time.UTC, day.Add(8*time.Hour), day.Add(10*time.Hour), Options{})
	seconds(b2, day.Add(8*time.Hour), 7200, 0, func(i int) float64 { return 60 + 10*float64(i/3600) })
	near(t, "LAeq,2h", b2.Result().Periods[0].LAeq, 67.40, 0.005)
}

// TestIndiaResidentialNight: a night at 47 dB in a residential area exceeds the 45 dB(A) night
// limit by 2 dB; a day at 54 dB stays under 55 dB(A) (Noise Pollution (Regulation and Control)
// Rules, 2000, Schedule, area C).
func TestIndiaResidentialNight(t *testing.T) {
	prof := profile(t, "india-2000")
	zone, err := prof.Zone("residential")
	if err != nil {
		t.Fatal(err)
	}
	ist, err := time.LoadLocation("Asia/Kolkata")
	if err != nil {
		testrig.Missing(t, "no time zone data (install the Debian package tzdata): "+err.Error())
	}
	day := time.Date(2026, 2, 3, 0, 0, 0, 0, ist)
	b := NewBuilder(prof, zone, ist, day.Add(6*time.Hour), day.Add(30*time.Hour), Options{})
	seconds(b, day.Add(6*time.Hour), 16*3600, 0, func(int) float64 { return 54 })
	seconds(b, day.Add(22*time.Hour), 8*3600, 0, func(int) float64 { return 47 })
	r := b.Result()
	if len(r.Periods) != 2 {
		t.Fatalf("%d periods", len(r.Periods))
	}
	d, n := r.Periods[0], r.Periods[1]
	if d.Exceeds || d.Limit != 55 {
		t.Errorf("day: limit %g exceeds %v", d.Limit, d.Exceeds)
	}
	if !n.Exceeds || n.Limit != 45 {
		t.Errorf("night: limit %g exceeds %v", n.Limit, n.Exceeds)
	}
	near(t, "night margin", n.Margin, 2, 1e-9)
	if r.Overall[1].Exceedances != 1 {
		t.Errorf("%d night exceedances over the range, want 1", r.Overall[1].Exceedances)
	}
	// 22:00 IST is 16:30 UTC: the periods follow the local clock.
	if got := n.From.UTC().Format("15:04"); got != "16:30" {
		t.Errorf("night starts %s UTC, want 16:30", got)
	}
}

// TestDSTDays: in Europe/Berlin the night before the last Sunday of March 2026 lasts 7 h and the
// one before the last Sunday of October 9 h (Directive 2000/84/EC: clocks change at 01:00 UTC).
// A constant 50 dB day, 55 dB evening and 45 dB night then give Lden with weights 12, 4 and the
// night's true length, over the true length of the reporting day (the Annex I formula with the
// lengths as weights, written out).
func TestDSTDays(t *testing.T) {
	berlin, err := time.LoadLocation("Europe/Berlin")
	if err != nil {
		testrig.Missing(t, "no time zone data (install the Debian package tzdata): "+err.Error())
	}
	prof := profile(t, "eu-lden")
	for _, tc := range []struct {
		day   time.Time
		night float64
	}{
		{time.Date(2026, 3, 28, 0, 0, 0, 0, berlin), 7},
		{time.Date(2026, 10, 24, 0, 0, 0, 0, berlin), 9},
	} {
		ivs := prof.Day(tc.day, berlin)
		b := NewBuilder(prof, nil, berlin, ivs[0].From, ivs[2].To, Options{})
		for k, l := range []float64{50, 55, 45} {
			n := int(ivs[k].To.Sub(ivs[k].From) / time.Second)
			seconds(b, ivs[k].From, n, 0, func(int) float64 { return l })
		}
		r := b.Result()
		night := r.Periods[2]
		if night.Hours != tc.night || night.Coverage.Length != tc.night*3600 || night.Coverage.Share != 1 {
			t.Errorf("%s: night %g h, coverage %+v", tc.day.Format(time.DateOnly), night.Hours, night.Coverage)
		}
		p := func(l float64) float64 { return math.Pow(10, l/10) }
		want := 10 * math.Log10((12*p(50)+4*p(55+5)+tc.night*p(45+10))/(16+tc.night))
		near(t, "Lden "+tc.day.Format(time.DateOnly), r.Days[0].Composite, want, 1e-9)
		if got := len(r.Hours); got != int(16+tc.night) {
			t.Errorf("%s: %d clock hours, want %g", tc.day.Format(time.DateOnly), got, 16+tc.night)
		}
	}
}

// TestPercentilesFromMergedHistograms: LAF10 and LAF90 of a day from the merged minute
// histograms equal those of the raw 10 ms levels, to the 0.1 dB bin: the level of rank
// ⌈N·n/100⌉ from the loudest (ISO 1996-1:2016, "N percent exceedance level"), reported as the
// centre of its bin (decision of the project on percentile reporting).
func TestPercentilesFromMergedHistograms(t *testing.T) {
	prof := profile(t, "ldn")
	day := time.Date(2026, 6, 10, 7, 0, 0, 0, time.UTC)
	b := NewBuilder(prof, nil, time.UTC, day, day.Add(24*time.Hour), Options{})
	rng := rand.New(rand.NewPCG(1, 2))
	// A day of minutes, each with 600 level samples (a tenth of the node's 6000, to keep the
	// test fast; merging does not care how many).
	raw := [2][]float64{}
	for m := range 24 * 60 {
		var h dsp.Histogram
		base := 45 + 15*math.Sin(float64(m)/100)
		per := 0
		if m >= 15*60 {
			per = 1 // the night, 22:00 to 07:00
		}
		for range 600 {
			l := base + 8*rng.NormFloat64()
			raw[per] = append(raw[per], l)
			h.Add(l)
		}
		first, counts := h.Span()
		b.AddMinute(&record.Minute{Start: day.Add(time.Duration(m) * time.Minute), LAeq: base, LAFmax: base + 20, LAImax: base + 21,
			ValidSeconds: 60, Histogram: record.LevelHistogram{First: first, Counts: append([]uint32(nil), counts...)}})
	}
	r := b.Result()
	for per, lv := range raw {
		slices.Sort(lv)
		exceeded := func(n float64) float64 {
			l := lv[len(lv)-int(math.Ceil(n/100*float64(len(lv))))]
			return math.Floor(l*10+0.5) / 10 // bins centred on the 0.1 dB grid
		}
		p := r.Periods[per]
		near(t, p.Name+" LAF10", p.LAF10, exceeded(10), 1e-9)
		near(t, p.Name+" LAF90", p.LAF90, exceeded(90), 1e-9)
		if p.Samples != uint64(len(lv)) {
			t.Errorf("%d samples, want %d", p.Samples, len(lv))
		}
	}
	p := r.Periods[0]
	near(t, "impulsiveness", p.Impulsiveness, 1, 1e-9)
	// Check value: 30 % at 70 dB and 70 % at 50 dB → L10 = 70, L90 = 50 (acoustics check values,
	// [CALC]), here the centres of the bins [69.95, 70.05) and [49.95, 50.05).
	var h dsp.Histogram
	for i := range 1000 {
		h.Add(map[bool]float64{true: 70, false: 50}[i < 300])
	}
	first, counts := h.Span()
	b2 := NewBuilder(prof, nil, time.UTC, day, day.Add(time.Hour), Options{})
	b2.AddMinute(&record.Minute{Start: day, LAeq: 60, ValidSeconds: 60, Histogram: record.LevelHistogram{First: first, Counts: counts}})
	p2 := b2.Result().Periods[0]
	near(t, "L10 check value", p2.LAF10, 70, 1e-9)
	near(t, "L90 check value", p2.LAF90, 50, 1e-9)
}

// TestCoverage: one hour with a 10-minute gap, 5 minutes calibrating, 5 minutes suspect: 40
// minutes valid is 67 %, under the default 75 % (common practice), so the hour and the period
// are marked; the levels come from the valid seconds only.
func TestCoverage(t *testing.T) {
	prof := profile(t, "ldn")
	h := time.Date(2026, 6, 10, 12, 0, 0, 0, time.UTC)
	b := NewBuilder(prof, nil, time.UTC, h, h.Add(time.Hour), Options{})
	b.AddGap(&record.Gap{From: h, To: h.Add(10 * time.Minute), Reason: "power cut"})
	seconds(b, h.Add(10*time.Minute), 300, record.Calibrating, func(int) float64 { return 94 })
	seconds(b, h.Add(15*time.Minute), 300, record.Suspect, func(int) float64 { return 90 })
	seconds(b, h.Add(20*time.Minute), 2400, 0, func(int) float64 { return 55 })
	r := b.Result()
	c := r.Hours[0].Coverage
	want := Coverage{Length: 3600, Valid: 2400, Gap: 600, Missing: 600, Share: 2400.0 / 3600, Low: true}
	want.LeftOut[record.ReasonCalibrating], want.LeftOut[record.ReasonSuspect] = 300, 300
	if c != want {
		t.Errorf("coverage %+v, want %+v", c, want)
	}
	if !r.Hours[0].Coverage.Low || !r.Periods[0].Coverage.Low {
		t.Error("hour or period not marked low")
	}
	// The range cuts the 15 h day period: its coverage counts against the whole period.
	if p := r.Periods[0]; !p.Partial || p.Coverage.Length != 15*3600 || math.Abs(p.Coverage.Share-2400.0/(15*3600)) > 1e-12 {
		t.Errorf("cut day period: partial %v, coverage %+v", p.Partial, p.Coverage)
	}
	near(t, "LAeq of the valid seconds", r.Periods[0].LAeq, 55, 1e-9)
	// With a 60 % floor the same period passes.
	b.opt.MinCoverage = 0.6
	if b.Result().Hours[0].Coverage.Low {
		t.Error("67 % marked low with a 60 % floor")
	}
	// Annotated minute records are left out of percentiles; a minute without seconds falls
	// back to its minute record.
	b3 := NewBuilder(prof, nil, time.UTC, h, h.Add(2*time.Minute), Options{})
	b3.AddMinute(&record.Minute{Start: h, LAeq: 60, ValidSeconds: 45})
	b3.AddMinute(&record.Minute{Start: h.Add(time.Minute), LAeq: 80, ValidSeconds: 60, Flags: record.Excluded})
	r3 := b3.Result()
	c3 := r3.Hours[0].Coverage
	if c3.Valid != 45 || c3.LeftOut[record.ReasonExcluded] != 60 || c3.Missing != 3600-105 {
		t.Errorf("fallback coverage %+v", c3)
	}
	near(t, "fallback LAeq", r3.Periods[0].LAeq, 60, 1e-9)
}

// TestTonalScreen: a band standing out from both neighbours by more than the margin is
// picked, by less is not (ISO 1996-2:2007 Annex K (from memory): 15 dB from 25 to 125 Hz, 8 dB
// from 160 to 400 Hz, 5 dB from 500 Hz to 10 kHz).
func TestTonalScreen(t *testing.T) {
	first := -16 // 25 Hz
	flat := func() []float64 {
		s := make([]float64, 27) // 25 Hz to 10 kHz
		for i := range s {
			s[i] = 50
		}
		return s
	}
	tests := []struct {
		name  string
		band  int // band number
		above float64
		tonal bool
	}{
		{"63 Hz by 16 dB", -12, 16, true},
		{"63 Hz by 14 dB", -12, 14, false},
		{"200 Hz by 9 dB", -7, 9, true},
		{"200 Hz by 7 dB", -7, 7, false},
		{"1 kHz by 6 dB", 0, 6, true},
		{"1 kHz by 4 dB", 0, 4, false},
		{"8 kHz by 5.5 dB", 9, 5.5, true},
	}
	for _, tc := range tests {
		s := flat()
		s[tc.band-first] += tc.above
		got := Tonal(first, s)
		if (len(got) == 1) != tc.tonal {
			t.Errorf("%s: %+v, want tonal %v", tc.name, got, tc.tonal)
			continue
		}
		if tc.tonal && (got[0].X != tc.band || math.Abs(got[0].Above-tc.above) > 1e-9) {
			t.Errorf("%s: %+v", tc.name, got[0])
		}
	}
	// One neighbour as loud: no tone.
	s := flat()
	s[0-first] += 10
	s[1-first] += 10
	if got := Tonal(first, s); len(got) != 0 {
		t.Errorf("two loud neighbours: %+v", got)
	}
}

// TestTonalScreenOnMeasuredSpectrum runs the screen on one-third-octave levels measured by the
// node's own chain: white noise (band levels rising 1 dB per band, 10 lg of the bandwidth ratio
// G^(1/3), IEC 61260-1:2014 Eq. 4 and 5) plus a 1 kHz sine. A sine 10 dB above the 1 kHz band's
// noise stands out by about 8.5 dB (> 5 dB), one 2 dB above stands out by about 3 dB (< 5 dB).
func TestTonalScreenOnMeasuredSpectrum(t *testing.T) {
	const fs = 48000.0
	for _, tc := range []struct {
		toneAbove float64
		tonal     bool
	}{{10, true}, {2, false}} {
		m, err := dsp.NewMeter(dsp.MeterConfig{SampleRate: fs, SensitivityDBFS: -26, Bands: dsp.Third})
		if err != nil {
			t.Fatal(err)
		}
		rng := rand.New(rand.NewPCG(3, 4))
		x := make([]float32, int(2*fs))
		const sigma = 0.01
		// White noise of variance σ² has a mean square of σ²·B/(fs/2) in a band of width B;
		// the 1 kHz band is 231.6 Hz wide (IEC 61260-1:2014 Eq. 4, 5).
		band := sigma * sigma * 231.6 / (fs / 2)
		amp := math.Sqrt(2 * band * math.Pow(10, tc.toneAbove/10))
		for i := range x {
			x[i] = float32(sigma*rng.NormFloat64() + amp*math.Sin(2*math.Pi*1000*float64(i)/fs))
		}
		m.Process(x)
		var res dsp.Result
		m.Take(&res)
		tones := Tonal(m.Bands()[0].X, res.Bands)
		found := false
		for _, tb := range tones {
			if tb.X == 0 {
				found = true
			}
		}
		if found != tc.tonal {
			t.Errorf("tone %g dB above the band noise: tones %+v, want 1 kHz tonal %v", tc.toneAbove, tones, tc.tonal)
		}
	}
}

func TestEventsPerPeriod(t *testing.T) {
	prof := profile(t, "eu-lden")
	day := time.Date(2026, 6, 10, 0, 0, 0, 0, time.UTC)
	b := NewBuilder(prof, nil, time.UTC, day.Add(7*time.Hour), day.Add(31*time.Hour), Options{})
	for _, ev := range []struct {
		at    float64 // hours after midnight
		lae   float64
		flags record.Flags
	}{{8, 80, 0}, {12, 85, 0}, {20, 78, 0}, {23.5, 90, 0}, {26, 70, record.Calibrating}} {
		s := day.Add(time.Duration(ev.at * float64(time.Hour)))
		b.AddEvent(&record.Event{Start: s, End: s.Add(5 * time.Second), LAE: ev.lae, LAFmax: ev.lae - 5, Flags: ev.flags})
	}
	r := b.Result()
	got := []int{r.Periods[0].Events, r.Periods[1].Events, r.Periods[2].Events}
	if got[0] != 2 || got[1] != 1 || got[2] != 1 || r.Periods[2].EventsFlagged != 1 {
		t.Errorf("events per period %v, flagged at night %d", got, r.Periods[2].EventsFlagged)
	}
	near(t, "largest day event LAE", r.Periods[0].EventMaxLAE, 85, 0)
}
