package indicator

import (
	"math"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// TestOverloadKeptAsLowerBound: an hour at 63.3 dB holding 60 s at 95 dB flagged overload.
// Overloaded seconds are kept and mark the level a lower bound (IEC 61672-1:2013 asks for
// overload to be indicated, clause 5.11 (from memory); dropping them biases the level low):
// the energy mean written out (ISO 1996-1:2016, 3.1.7) is 77.4 dB, not the 63.3 dB of the
// other seconds alone.
func TestOverloadKeptAsLowerBound(t *testing.T) {
	h := time.Date(2026, 6, 10, 12, 0, 0, 0, time.UTC)
	b := NewBuilder(profile(t, "ldn"), nil, time.UTC, h, h.Add(time.Hour), Options{})
	seconds(b, h, 60, record.Overload, func(int) float64 { return 95 })
	seconds(b, h.Add(time.Minute), 3540, 0, func(int) float64 { return 63.3 })
	r := b.Result()
	want := 10 * math.Log10((60*math.Pow(10, 9.5)+3540*math.Pow(10, 6.33))/3600)
	near(t, "hour LAeq with the overloaded seconds", r.Hours[0].LAeq, want, 1e-9)
	if math.Abs(want-77.4) > 0.05 {
		t.Fatalf("check value %.2f, want 77.4", want)
	}
	c := r.Hours[0].Coverage
	if c.Valid != 3600 || c.Overload != 60 || c.Bound() != record.Lower {
		t.Errorf("hour coverage %+v bound %v: want all 3600 s valid, 60 overloaded, a lower bound", c, c.Bound())
	}
	if p := r.Periods[0]; p.Bound != record.Lower || math.Abs(p.LAeq-want) > 1e-9 {
		t.Errorf("period LAeq %.2f bound %v, want %.2f as a lower bound", p.LAeq, p.Bound, want)
	}
	// Under the measuring range: kept, an upper bound.
	b2 := NewBuilder(profile(t, "ldn"), nil, time.UTC, h, h.Add(time.Hour), Options{})
	seconds(b2, h, 3600, record.UnderRange, func(int) float64 { return 25 })
	if r2 := b2.Result(); r2.Periods[0].Bound != record.Upper || math.Abs(r2.Hours[0].LAeq-25) > 1e-9 {
		t.Errorf("under-range hour: LAeq %.2f bound %v", r2.Hours[0].LAeq, r2.Periods[0].Bound)
	}
}

// TestLimitAtTheLimit: a night level equal to its limit complies; a level whose 0.1 dB
// rounding is above it exceeds (common practice: the reported value is compared). Limits from
// the Noise Pollution (Regulation and Control) Rules, 2000, Schedule, residential area (C):
// night 45 dB(A), day 55 dB(A).
func TestLimitAtTheLimit(t *testing.T) {
	prof := profile(t, "india-2000")
	zone, err := prof.Zone("residential")
	if err != nil {
		t.Fatal(err)
	}
	ist := time.FixedZone("IST", 5*3600+1800)
	for _, tc := range []struct {
		night, day float64
		nightOver  bool
		dayOver    bool
	}{
		{45.00, 55.00, false, false},
		{45.04, 55.04, false, false}, // prints 45.0 and 55.0
		{45.06, 55.06, true, true},   // prints 45.1 and 55.1
		{44.96, 54.96, false, false},
	} {
		// One whole reporting day: day 06:00-22:00, night 22:00-06:00 (local).
		from := time.Date(2026, 6, 10, 6, 0, 0, 0, ist)
		b := NewBuilder(prof, zone, ist, from, from.Add(24*time.Hour), Options{})
		seconds(b, from, 16*3600, 0, func(int) float64 { return tc.day })
		seconds(b, from.Add(16*time.Hour), 8*3600, 0, func(int) float64 { return tc.night })
		r := b.Result()
		for _, p := range r.Periods {
			if p.Partial {
				continue
			}
			want := map[string]bool{"night": tc.nightOver, "day": tc.dayOver}[p.Name]
			if p.Exceeds != want {
				t.Errorf("%s at %.2f dB against %.0f: exceeds %v, want %v (margin %+.1f)", p.Name, p.LAeq, p.Limit, p.Exceeds, want, p.Margin)
			}
			if !p.Exceeds && p.Margin > 0 {
				t.Errorf("%s: margin %+.1f shown without an exceedance", p.Name, p.Margin)
			}
		}
	}
}

// TestPartialPeriod: a range that holds one hour of an 8 h night (22:00-06:00) with data at
// 50 dB, above the 45 dB limit: the night is partial, its coverage is 1/8 of the whole night,
// not 100 %, and it is not counted among the periods above their limit (common practice: a
// period is judged only whole).
func TestPartialPeriod(t *testing.T) {
	prof := profile(t, "india-2000")
	zone, err := prof.Zone("residential")
	if err != nil {
		t.Fatal(err)
	}
	ist := time.FixedZone("IST", 5*3600+1800)
	from := time.Date(2026, 6, 10, 22, 0, 0, 0, ist)
	b := NewBuilder(prof, zone, ist, from, from.Add(time.Hour), Options{})
	seconds(b, from, 3600, 0, func(int) float64 { return 50 })
	r := b.Result()
	var night *Period
	for i := range r.Periods {
		if r.Periods[i].Name == "night" {
			night = &r.Periods[i]
		}
	}
	if night == nil {
		t.Fatal("no night period")
	}
	if !night.Partial || math.Abs(night.Coverage.Share-1.0/8) > 1e-12 || !night.Coverage.Low {
		t.Errorf("night partial %v coverage %.3f low %v: want partial, 0.125, low", night.Partial, night.Coverage.Share, night.Coverage.Low)
	}
	for _, o := range r.Overall {
		if o.Name == "night" && o.Exceedances != 0 {
			t.Errorf("a cut night counted as %d exceedances", o.Exceedances)
		}
	}
	for _, d := range r.Days {
		if d.Complete {
			t.Errorf("day %v of a one-hour range reads complete", d.Day)
		}
	}
}

// TestMinutesEqualSeconds: the same hour read from second records and from minute records
// built by the validity rule (calibrating and settling seconds left out, overloaded ones kept)
// gives the same LAeq and coverage, so a report after the seconds have expired equals one
// from the full store. The minute records are written out here from the rule as the node
// builds them: energy mean of the counted seconds (ISO 1996-1:2016, 3.1.7).
func TestMinutesEqualSeconds(t *testing.T) {
	h := time.Date(2026, 6, 10, 12, 0, 0, 0, time.UTC)
	level := func(i int) float64 { return 50 + float64(i%7) }
	flags := func(i int) record.Flags {
		switch {
		case i < 3:
			return record.Settling
		case i >= 600 && i < 620:
			return record.Calibrating
		case i >= 1000 && i < 1005:
			return record.Overload
		}
		return 0
	}
	fromSeconds := NewBuilder(profile(t, "ldn"), nil, time.UTC, h, h.Add(time.Hour), Options{})
	fromMinutes := NewBuilder(profile(t, "ldn"), nil, time.UTC, h, h.Add(time.Hour), Options{})
	for m := range 60 {
		var e float64
		mr := &record.Minute{Start: h.Add(time.Duration(m) * time.Minute)}
		for s := range 60 {
			i := m*60 + s
			l := level(i)
			fromSeconds.AddSecond(&record.Second{Start: h.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: l, LCeq: l, Flags: flags(i)})
			switch f := flags(i); {
			case f&(record.Settling|record.Calibrating) != 0:
				mr.LeftOut[map[bool]record.Reason{true: record.ReasonSettling, false: record.ReasonCalibrating}[f == record.Settling]]++
			default:
				e += math.Pow(10, l/10)
				mr.ValidSeconds++
				if f == record.Overload {
					mr.OverloadSeconds++
					mr.Flags |= record.Overload
				}
			}
		}
		mr.LAeq = 10 * math.Log10(e/float64(mr.ValidSeconds))
		mr.LCeq = mr.LAeq
		fromMinutes.AddMinute(mr)
	}
	a, b := fromSeconds.Result(), fromMinutes.Result()
	near(t, "hour LAeq from minutes vs seconds", b.Hours[0].LAeq, a.Hours[0].LAeq, 1e-9)
	if a.Hours[0].Coverage != b.Hours[0].Coverage {
		t.Errorf("coverage from seconds %+v, from minutes %+v", a.Hours[0].Coverage, b.Hours[0].Coverage)
	}
	if a.Periods[0].Bound != record.Lower || b.Periods[0].Bound != record.Lower {
		t.Errorf("bounds %v and %v, want lower", a.Periods[0].Bound, b.Periods[0].Bound)
	}
}
