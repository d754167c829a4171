package indicator

import (
	"math"
	"sort"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/internal/when"
)

// Coverage counts the seconds of a stretch of time by what the validity rule (package record)
// made of them.
type Coverage struct {
	// Length is the stretch's whole length in seconds: a period or hour that the range cuts
	// counts its coverage against its whole length, so a cut period never reads complete.
	Length float64
	// Valid counts the seconds whose levels are in the stretch's levels (record.Counted);
	// Overload and UnderRange count those of them that make the levels lower and upper bounds.
	Valid, Overload, UnderRange float64
	// LeftOut counts the seconds left out, by reason (indexed by record.Reason).
	LeftOut [record.NumReasons]float64
	Gap     float64 // seconds inside gap records: the node was not measuring
	Missing float64 // seconds with no record, outside the range included: Length - Valid - left out
	Share   float64 // Valid / Length
	Low     bool    // Share below Options.MinCoverage
}

func (c *Coverage) add(o Coverage) {
	c.Length += o.Length
	c.Valid += o.Valid
	c.Overload += o.Overload
	c.UnderRange += o.UnderRange
	for i := range c.LeftOut {
		c.LeftOut[i] += o.LeftOut[i]
	}
	c.Gap += o.Gap
}

// Tally returns the coverage as a record.Tally.
func (c Coverage) Tally() record.Tally {
	return record.Tally{Counted: c.Valid, LeftOut: c.LeftOut, Overload: c.Overload, UnderRange: c.UnderRange}
}

// Bound says which way the stretch's levels may be off (record.Tally.Bound).
func (c Coverage) Bound() record.Bound { return c.Tally().Bound() }

func (c *Coverage) finish(min float64) {
	c.Missing = max(0, c.Length-c.Valid-c.Tally().LeftOutTotal())
	if c.Length > 0 {
		c.Share = c.Valid / c.Length
	}
	c.Low = c.Share < min
}

// Period holds the indicators of one period of one reporting day.
type Period struct {
	Name     string    // the profile's period name
	Day      time.Time // local midnight of the reporting day
	From, To time.Time // the period, [From, To)
	Partial  bool      // the range cuts the period: indicators cover only the part inside
	Hours    float64   // true length of the whole period (7 or 9 h across a DST change)
	Penalty  float64

	// LAeq and LCeq are the equivalent continuous levels over the valid seconds (ISO
	// 1996-1:2016, 3.1.7), NaN without data. LowFrequency is LCeq - LAeq, an indicator of
	// low-frequency content (common practice: above some 15 to 20 dB it calls for a look).
	LAeq, LCeq, LowFrequency float64

	// LAF10 and LAF90 are the A-weighted Fast levels exceeded for 10 and 90 % of the time
	// (ISO 1996-1:2016, "N percent exceedance level"), from the merged histograms of the
	// minute records: the Fast level sampled every 10 ms in 0.1 dB bins, each reported as the
	// centre of its bin. Samples counts the level samples.
	LAF10, LAF90 float64
	Samples      uint64
	LAFmax       float64 // largest Fast level of the valid minutes

	Events        int     // events starting in the period (not flagged)
	EventsFlagged int     // events left out: flagged calibrating, suspect or excluded
	EventMaxLAE   float64 // the largest event's sound exposure level, NaN without events

	// Impulsiveness is the mean over the period's minutes of LAImax - LAFmax (common
	// practice; the Impulse time weighting rises faster than Fast on short sounds). Impulsive
	// says whether it reaches Options.ImpulsiveMargin.
	Impulsiveness float64
	Impulsive     bool
	// Spectrum holds the period's average one-third-octave LZeq, bands FirstBand ...
	FirstBand int
	Spectrum  []float64
	// Tones are the bands the one-third-octave tonality screen picked out (see Tonal).
	Tones []TonalBand

	// Bound says which way LAeq may be off: a lower bound when overloaded seconds were counted
	// (shown "≥"), an upper bound when seconds under the measuring range were (shown "≤").
	Bound record.Bound

	// Limit is the zone's limit for the period, NaN without one. Exceeds says that LAeq,
	// rounded to the reported 0.1 dB, is greater than Limit (record.Exceeds: a level equal to
	// the limit complies); Margin is the rounded LAeq - Limit. A Partial period shows both but
	// is not counted among the periods above their limit (Overall.Exceedances).
	Limit   float64
	Exceeds bool
	Margin  float64
	// Rating is LAeq with the adjustments of Options.Adjust, NaN when adjustments are off.
	Rating float64

	Coverage Coverage
}

// Day holds the indicators of one reporting day.
type Day struct {
	Day      time.Time // local midnight of the reporting day's date
	From, To time.Time
	Periods  []int   // indexes into Result.Periods, in the order of the profile
	LAeq     float64 // equivalent level over the whole reporting day, no penalties
	Bound    record.Bound
	// Composite is the whole-day indicator (Lden, Ldn; see Composite) from the period levels
	// and the periods' true lengths, NaN when a period has no data or the profile has none.
	Composite float64
	Limit     float64 // the zone's limit for the composite, NaN without one
	Exceeds   bool
	Coverage  Coverage
	Complete  bool // every period of the day lies wholly inside the range
}

// Hour holds the indicators of one local clock hour.
type Hour struct {
	From     time.Time
	LAeq     float64
	Coverage Coverage
}

// Overall holds the indicators of one period name over the whole range: the long-term level
// of, say, every night in the range.
type Overall struct {
	Name         string
	LAeq         float64
	LAF10, LAF90 float64
	Events       int
	Exceedances  int // periods of this name above the limit, among those the range does not cut
	Bound        record.Bound
	Limit        float64
	Coverage     Coverage
}

// Result holds every indicator of a range.
type Result struct {
	Profile  *profiles.Profile
	Zone     *profiles.Zone // nil without a zone
	Location *time.Location
	From, To time.Time
	Options  Options

	Periods []Period
	Days    []Day
	Hours   []Hour
	Overall []Overall
	// Composite is the whole-day indicator from the long-term period levels (the Directive's
	// Lden is a yearly average, computed this way), NaN when a period has no data.
	Composite float64

	// Minutes is the LAeq of every minute of the range, from Minute0 on (NaN where none).
	Minute0 time.Time
	Minutes []float64
	// FirstBand and Spectrum: the average one-third-octave LZeq over the range.
	FirstBand int
	Spectrum  []float64
	Tones     []TonalBand

	Coverage     Coverage
	Gaps         []*record.Gap
	Calibrations []*record.Calibration
	Events       []*record.Event
}

// limit returns the zone's limit for key, or NaN.
func (b *Builder) limit(key string) float64 {
	if b.zone == nil {
		return math.NaN()
	}
	if v, ok := b.zone.Limits[key]; ok {
		return v
	}
	return math.NaN()
}

// gapSeconds returns the seconds of [from, to) inside gap records.
func (b *Builder) gapSeconds(from, to time.Time) float64 {
	var s float64
	for _, g := range b.gaps {
		lo, hi := when.Later(g.From, from), when.Earlier(g.To, to)
		if hi.After(lo) {
			s += hi.Sub(lo).Seconds()
		}
	}
	return s
}

// resolve folds the minute-record fallback into bins without second records.
func (m *minuteBin) resolve() {
	if m.seconds == 0 && m.hasMinute {
		m.eA, m.eC = m.mA, m.mC
		m.t = m.mT
	}
	if m.t.Counted > 0 {
		m.minuteLAeq = 10 * math.Log10(m.eA/m.t.Counted)
	}
}

func (m *minuteBin) coverage() Coverage {
	return Coverage{Length: 60, Valid: m.t.Counted, LeftOut: m.t.LeftOut, Overload: m.t.Overload, UnderRange: m.t.UnderRange}
}

func level(e, t float64) float64 {
	if t <= 0 {
		return math.NaN()
	}
	return 10 * math.Log10(e/t)
}

// Result computes the indicators of everything added. It may be called more than once.
func (b *Builder) Result() *Result {
	o := b.opt
	r := &Result{
		Profile: b.prof, Zone: b.zone, Location: b.loc, From: b.from, To: b.to, Options: o,
		Minute0: b.minute0, Minutes: make([]float64, len(b.bins)),
		Gaps: b.gaps, Calibrations: b.cals, Events: b.events,
	}
	sort.Slice(r.Calibrations, func(i, j int) bool { return r.Calibrations[i].At.Before(r.Calibrations[j].At) })
	sort.Slice(r.Events, func(i, j int) bool { return r.Events[i].Start.Before(r.Events[j].Start) })

	// Per period and per hour sums from the minute bins.
	type sums struct{ eA, eC float64 }
	pe := make([]sums, len(b.ivs))
	pc := make([]Coverage, len(b.ivs))
	he := make([]sums, len(b.hours))
	hc := make([]Coverage, len(b.hours))
	var total Coverage
	var totE float64
	for i := range b.bins {
		m := &b.bins[i]
		m.resolve()
		r.Minutes[i] = m.minuteLAeq
		c := m.coverage()
		total.add(c)
		totE += m.eA
		if m.period >= 0 {
			pe[m.period].eA += m.eA
			pe[m.period].eC += m.eC
			pc[m.period].add(c)
		}
		he[m.hour].eA += m.eA
		he[m.hour].eC += m.eC
		hc[m.hour].add(c)
	}
	total.Gap = b.gapSeconds(b.from, b.to)
	total.finish(o.MinCoverage)
	r.Coverage = total

	for h, start := range b.hours {
		c := hc[h]
		end := when.Earlier(start.Add(time.Hour), b.to)
		c.Gap = b.gapSeconds(when.Later(start, b.from), end)
		c.Length = time.Hour.Seconds() // the whole hour, also where the range cuts it
		c.finish(o.MinCoverage)
		r.Hours = append(r.Hours, Hour{From: start, LAeq: level(he[h].eA, c.Valid), Coverage: c})
	}

	// Periods.
	var rangeSpec [bandN]float64
	var rangeSpecN [bandN]float64
	for i, iv := range b.ivs {
		per := b.prof.Periods[iv.Period]
		acc := b.per[i]
		c := pc[i]
		lo, hi := when.Later(iv.From, b.from), when.Earlier(iv.To, b.to)
		c.Gap = b.gapSeconds(lo, hi)
		c.Length = iv.To.Sub(iv.From).Seconds() // the whole period, also where the range cuts it
		c.finish(o.MinCoverage)
		p := Period{
			Name: per.Name, Day: iv.Day, From: iv.From, To: iv.To, Hours: iv.Hours(), Penalty: per.Penalty,
			Partial: iv.From.Before(b.from) || iv.To.After(b.to),
			LAeq:    level(pe[i].eA, c.Valid), LCeq: level(pe[i].eC, c.Valid),
			LAF10: acc.hist.Exceeded(10), LAF90: acc.hist.Exceeded(90), Samples: acc.hist.Count(),
			LAFmax: acc.lafmax, Events: acc.events, EventsFlagged: acc.eventsLeftOut,
			EventMaxLAE: acc.eventMaxLAE, Impulsiveness: math.NaN(), Coverage: c,
			Limit: b.limit(per.Name), Rating: math.NaN(),
		}
		if math.IsInf(p.LAFmax, -1) {
			p.LAFmax = math.NaN()
		}
		if math.IsInf(p.EventMaxLAE, -1) {
			p.EventMaxLAE = math.NaN()
		}
		p.LowFrequency = p.LCeq - p.LAeq
		if acc.impN > 0 {
			p.Impulsiveness = acc.impSum / float64(acc.impN)
			p.Impulsive = p.Impulsiveness >= o.ImpulsiveMargin
		}
		p.FirstBand, p.Spectrum = spectrum(&acc.specE, &acc.specN)
		p.Tones = Tonal(p.FirstBand, p.Spectrum)
		for k := range bandN {
			rangeSpec[k] += acc.specE[k]
			rangeSpecN[k] += acc.specN[k]
		}
		p.Bound = c.Bound()
		if !math.IsNaN(p.Limit) && !math.IsNaN(p.LAeq) {
			p.Margin = record.Round(p.LAeq, 1) - p.Limit
			p.Exceeds = record.Exceeds(p.LAeq, p.Limit)
		}
		if o.Adjust && !math.IsNaN(p.LAeq) {
			p.Rating = p.LAeq
			if len(p.Tones) > 0 {
				p.Rating += o.TonalAdjust
			}
			if p.Impulsive {
				p.Rating += o.ImpulsiveAdjust
			}
			if !math.IsNaN(p.Limit) {
				p.Margin = record.Round(p.Rating, 1) - p.Limit
				p.Exceeds = record.Exceeds(p.Rating, p.Limit)
			}
		}
		r.Periods = append(r.Periods, p)
	}
	r.FirstBand, r.Spectrum = spectrum(&rangeSpec, &rangeSpecN)
	r.Tones = Tonal(r.FirstBand, r.Spectrum)

	// Days: the periods grouped by reporting day.
	compKey := strings.ToLower(b.prof.Composite)
	for i := 0; i < len(r.Periods); {
		j := i
		for j < len(r.Periods) && r.Periods[j].Day.Equal(r.Periods[i].Day) {
			j++
		}
		d := Day{Day: r.Periods[i].Day, From: r.Periods[i].From, To: r.Periods[j-1].To, Composite: math.NaN(), Limit: math.NaN()}
		d.Complete = j-i == len(b.prof.Periods)
		var e float64
		levels, hours, pens := make([]float64, 0, j-i), make([]float64, 0, j-i), make([]float64, 0, j-i)
		for k := i; k < j; k++ {
			p := &r.Periods[k]
			d.Periods = append(d.Periods, k)
			d.Coverage.add(p.Coverage)
			d.Complete = d.Complete && !p.Partial
			e += pe[k].eA
			levels = append(levels, p.LAeq)
			hours = append(hours, p.Hours)
			pens = append(pens, p.Penalty)
		}
		d.Coverage.finish(o.MinCoverage)
		for k := i; k < j; k++ {
			d.Coverage.Low = d.Coverage.Low || r.Periods[k].Coverage.Low
		}
		d.LAeq = level(e, d.Coverage.Valid)
		d.Bound = d.Coverage.Bound()
		if b.prof.Composite != "" && d.Complete {
			d.Composite = Composite(levels, hours, pens)
			d.Limit = b.limit(compKey)
			d.Exceeds = record.Exceeds(d.Composite, d.Limit)
		}
		r.Days = append(r.Days, d)
		i = j
	}

	// Long-term levels per period name.
	r.Composite = math.NaN()
	var levels, hours, pens []float64
	for pi, per := range b.prof.Periods {
		ov := Overall{Name: per.Name, Limit: b.limit(per.Name)}
		var e float64
		var h dsp.Histogram
		var length float64
		for i, iv := range b.ivs {
			if iv.Period != pi {
				continue
			}
			p := &r.Periods[i]
			e += pe[i].eA
			ov.Coverage.add(p.Coverage)
			ov.Events += p.Events
			if p.Exceeds && !p.Partial {
				ov.Exceedances++ // a period the range cuts is never judged
			}
			h.Merge(&b.per[i].hist)
			length += when.Earlier(p.To, b.to).Sub(when.Later(p.From, b.from)).Hours() // the part inside the range
		}
		ov.Coverage.finish(o.MinCoverage)
		ov.LAeq = level(e, ov.Coverage.Valid)
		ov.Bound = ov.Coverage.Bound()
		ov.LAF10, ov.LAF90 = h.Exceeded(10), h.Exceeded(90)
		r.Overall = append(r.Overall, ov)
		levels = append(levels, ov.LAeq)
		hours = append(hours, length)
		pens = append(pens, per.Penalty)
	}
	if b.prof.Composite != "" {
		r.Composite = Composite(levels, hours, pens)
	}
	return r
}

// spectrum returns the energy-mean band levels, trimmed to the bands with data.
func spectrum(e, n *[bandN]float64) (first int, levels []float64) {
	lo, hi := 0, bandN-1
	for lo < bandN && n[lo] == 0 {
		lo++
	}
	for hi >= lo && n[hi] == 0 {
		hi--
	}
	if lo > hi {
		return 0, nil
	}
	for k := lo; k <= hi; k++ {
		if n[k] == 0 {
			levels = append(levels, math.NaN())
		} else {
			levels = append(levels, 10*math.Log10(e[k]/n[k]))
		}
	}
	return lo + bandLo, levels
}
