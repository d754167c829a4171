// Package indicator computes the indicators regulators ask for from stored measurement records:
// Leq per period and per hour, whole-day indicators (Lden, Ldn), percentile levels per period,
// event counts, exceedances of zone limits, a low-frequency indicator, a tonality screen, an
// impulsiveness indicator and the data coverage of every period.
//
// # Model
//
// A Builder covers a half-open time range [from, to) cut into the periods of a profile (see
// package profiles). Records are fed in any order; the Builder keeps one small bin per minute
// of the range (about 4 MB for 30 days) and one accumulator per period, and Result computes
// everything at the end. It is pure computation: it reads no files.
//
// Sources. Leq values come from second records: each valid second adds its energy
// 10^(LAeq/10)·T (ISO 1996-1:2016, 3.1.7). A minute that has no second records (they expire
// after 30 days) falls back to its minute record, counting the minute's valid seconds.
// Percentile levels, spectra and the impulsiveness indicator come from minute records, which
// carry the histogram of the A-weighted Fast level sampled every 10 ms, the minute's
// one-third-octave spectrum and LAImax.
//
// Validity. Every second is judged by the one validity rule of package record: seconds flagged
// calibrating, settling, excluded, suspect or dropped, and digital silence, are left out and
// counted by reason; overloaded seconds are kept and make the level a lower bound (Bound),
// seconds under the measuring range an upper bound. Minute records are built by the node from
// the same seconds, so a period's level from minutes equals its level from seconds. A gap
// record is missing data. The coverage of a period is the share of its whole length covered
// by valid seconds, also where the range cuts the period (a cut period is Partial and never
// reads complete); a period under Options.MinCoverage (default 75 %) is marked Low, never
// hidden. A minute record flagged calibrating, suspect or excluded (by an annotation covering
// the whole minute) adds nothing to percentiles, spectra or impulsiveness.
package indicator

import (
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/dsp"
)

// Options tune the indicators.
type Options struct {
	// MinCoverage is the share of valid seconds (0 to 1) below which a period, hour or day is
	// marked LowCoverage. 0 means the default, 0.75 (common practice). A lower value lets
	// periods with much missing data pass as representative.
	MinCoverage float64

	// Adjust turns on rating levels in the manner of ISO 1996-1:2016 Annex A: LAr = LAeq + KT
	// when the tonality screen finds a tone in the period, + KI when the period is impulsive.
	// Off by default: the screen and the impulsiveness indicator are indications, and an
	// adjustment applied on them without a listening check can overstate the rating level.
	Adjust bool
	// TonalAdjust is KT in dB; 0 means 5 dB (ISO 1996-1:2016 Annex A gives 3 to 6 dB (from
	// memory)).
	TonalAdjust float64
	// ImpulsiveAdjust is KI in dB; 0 means 5 dB (ISO 1996-1:2016 Annex A, regular impulsive
	// sound (from memory)).
	ImpulsiveAdjust float64
	// ImpulsiveMargin is the mean LAImax - LAFmax, in dB, at or above which a period counts as
	// impulsive; 0 means 3 dB (common practice).
	ImpulsiveMargin float64
}

func (o Options) resolved() Options {
	if o.MinCoverage == 0 {
		o.MinCoverage = 0.75
	}
	if o.TonalAdjust == 0 {
		o.TonalAdjust = 5
	}
	if o.ImpulsiveAdjust == 0 {
		o.ImpulsiveAdjust = 5
	}
	if o.ImpulsiveMargin == 0 {
		o.ImpulsiveMargin = 3
	}
	return o
}

// wholeMinute are the flags that, on a minute record, leave the whole minute out: they come
// from an annotation covering the whole minute (or from a minute record of format 1).
const wholeMinute = record.Calibrating | record.Suspect | record.Excluded

// Band numbers kept in spectra: one-third octaves -20 (10 Hz) to 13 (20 kHz).
const (
	bandLo = -20
	bandN  = 34
)

// minuteBin holds what is known of one minute of the range.
type minuteBin struct {
	eA, eC                  float64      // Σ 10^(L/10)·T over the counted seconds
	t                       record.Tally // the second records, judged by the validity rule
	seconds                 int32        // second records seen
	hasMinute               bool
	mA, mC                  float64      // the minute record's energies, for the fallback
	mT                      record.Tally // the minute record's counts, for the fallback
	period                  int32        // index of the interval holding the minute, -1 outside
	hour                    int32        // index of the local hour holding the minute
	minuteLAeq, minuteLAmax float64
}

// periodAcc accumulates the minute-record quantities of one interval.
type periodAcc struct {
	hist          dsp.Histogram
	specE         [bandN]float64
	specN         [bandN]float64
	impSum        float64
	impN          int
	lafmax        float64
	events        int
	eventsLeftOut int
	eventMaxLAE   float64
	eventMaxLAF   float64
}

// Builder accumulates records over [from, to) and computes the indicators. It is not safe for
// concurrent use.
type Builder struct {
	prof    *profiles.Profile
	zone    *profiles.Zone
	loc     *time.Location
	from    time.Time
	to      time.Time
	opt     Options
	ivs     []profiles.Interval
	minute0 time.Time
	bins    []minuteBin
	hours   []time.Time // local hour starts
	per     []*periodAcc
	gaps    []*record.Gap
	cals    []*record.Calibration
	events  []*record.Event
	etab    []float64 // energies of centi-decibel levels, made on first use
}

// NewBuilder returns a builder for [from, to) (whole minutes; from is rounded down, to up) with
// the periods of prof in zone loc. zone may be nil (no limits).
func NewBuilder(prof *profiles.Profile, zone *profiles.Zone, loc *time.Location, from, to time.Time, opt Options) *Builder {
	from = from.Truncate(time.Minute)
	if t := to.Truncate(time.Minute); t.Before(to) {
		to = t.Add(time.Minute)
	}
	b := &Builder{prof: prof, zone: zone, loc: loc, from: from, to: to, opt: opt.resolved(), minute0: from}
	b.ivs = prof.Intervals(from, to, loc)
	n := int(to.Sub(from) / time.Minute)
	b.bins = make([]minuteBin, max(n, 0))
	b.per = make([]*periodAcc, len(b.ivs))
	for i := range b.per {
		b.per[i] = &periodAcc{lafmax: math.Inf(-1), eventMaxLAE: math.Inf(-1), eventMaxLAF: math.Inf(-1)}
	}
	p, h := 0, -1
	var hourEnd time.Time
	for i := range b.bins {
		t := from.Add(time.Duration(i) * time.Minute)
		for p < len(b.ivs) && !t.Before(b.ivs[p].To) {
			p++
		}
		b.bins[i].period = -1
		if p < len(b.ivs) && !t.Before(b.ivs[p].From) {
			b.bins[i].period = int32(p)
		}
		if !t.Before(hourEnd) {
			// The local hour holding t starts lt.Minute() minutes earlier: unambiguous even in
			// the hour that repeats when clocks go back.
			lt := t.In(loc)
			start := t.Add(-time.Duration(lt.Minute()) * time.Minute)
			b.hours = append(b.hours, start)
			h++
			hourEnd = start.Add(time.Hour)
		}
		b.bins[i].hour = int32(h)
		b.bins[i].minuteLAeq, b.bins[i].minuteLAmax = math.NaN(), math.NaN()
	}
	return b
}

// bin returns the minute bin holding t, or nil outside the range.
func (b *Builder) bin(t time.Time) *minuteBin {
	if t.Before(b.from) || !t.Before(b.to) {
		return nil
	}
	return &b.bins[int(t.Sub(b.from)/time.Minute)]
}

func energy(l float64) float64 { return math.Pow(10, l/10) }

// Stored levels have 0.01 dB steps (buffer keeps int16 centi-decibels), so the energies of the
// levels that occur are tabulated once per Builder: 10^(k/1000) for k = -32768 ... 32767.
const energySteps = 1 << 16

// energy returns 10^(l/10), from the table when l is a whole number of centi-decibels.
func (b *Builder) energy(l float64) float64 {
	c := l * 100
	k := math.Round(c)
	if math.Abs(c-k) < 1e-6 && k >= -energySteps/2 && k < energySteps/2 {
		if b.etab == nil {
			b.etab = make([]float64, energySteps)
			for i := range b.etab {
				b.etab[i] = math.Exp(float64(i-energySteps/2) * (math.Ln10 / 1000))
			}
		}
		return b.etab[int(k)+energySteps/2]
	}
	return energy(l)
}

// AddSecond adds a second record.
func (b *Builder) AddSecond(s *record.Second) {
	m := b.bin(s.Start)
	if m == nil {
		return
	}
	m.seconds++
	d := s.Duration.Seconds()
	if m.t.Add(s.Flags, s.LAeq, d) == record.Counted {
		m.eA += b.energy(s.LAeq) * d
		if !math.IsNaN(s.LCeq) {
			m.eC += b.energy(s.LCeq) * d
		}
	}
}

// AddMinute adds a minute record.
func (b *Builder) AddMinute(r *record.Minute) {
	m := b.bin(r.Start)
	if m == nil {
		return
	}
	m.hasMinute = true
	m.minuteLAmax = r.LAFmax
	if r.Flags&wholeMinute != 0 {
		m.mT = record.Tally{}
		m.mT.LeftOut[record.Judge(r.Flags, r.LAeq)] = 60
		return
	}
	m.mT = r.Tally()
	valid := m.mT.Counted // the valid seconds' length: the minute's energy is 10^(LAeq/10) times it
	if !math.IsNaN(r.LAeq) {
		m.mA = b.energy(r.LAeq) * valid
	}
	if !math.IsNaN(r.LCeq) {
		m.mC = b.energy(r.LCeq) * valid
	}
	if m.period < 0 {
		return
	}
	p := b.per[m.period]
	p.hist.AddSpan(r.Histogram.First, r.Histogram.Counts)
	if !math.IsNaN(r.LAFmax) {
		p.lafmax = max(p.lafmax, r.LAFmax)
	}
	if !math.IsNaN(r.LAImax) && !math.IsNaN(r.LAFmax) {
		p.impSum += r.LAImax - r.LAFmax
		p.impN++
	}
	for i, l := range r.Spectrum {
		k := r.FirstBand + i - bandLo
		if k >= 0 && k < bandN && !math.IsNaN(l) && !math.IsInf(l, 0) {
			p.specE[k] += b.energy(l)
			p.specN[k]++
		}
	}
}

// AddEvent adds an event record; it counts in the period holding its start.
func (b *Builder) AddEvent(e *record.Event) {
	m := b.bin(e.Start)
	if m == nil || m.period < 0 {
		return
	}
	p := b.per[m.period]
	if e.Flags&wholeMinute != 0 {
		p.eventsLeftOut++
		return
	}
	p.events++
	p.eventMaxLAE = max(p.eventMaxLAE, e.LAE)
	p.eventMaxLAF = max(p.eventMaxLAF, e.LAFmax)
	cp := *e
	b.events = append(b.events, &cp)
}

// AddGap adds a gap record.
func (b *Builder) AddGap(g *record.Gap) {
	if g.To.After(b.from) && g.From.Before(b.to) {
		cp := *g
		b.gaps = append(b.gaps, &cp)
	}
}

// AddCalibration adds a calibration record.
func (b *Builder) AddCalibration(c *record.Calibration) {
	cp := *c
	b.cals = append(b.cals, &cp)
}
