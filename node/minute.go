package node

import (
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// minuteLag is how long a closed second waits before it enters its minute. A calibrator is
// recognised a moment after its tone starts (the detector judges 0.25 s blocks, the level must
// settle onto a configured calibrator's), and the seconds from calMargin before the tone are
// calibrating too: they must still be waiting when the tone is recognised, so that the minute
// record leaves out exactly the seconds a reader of the second records leaves out.
const minuteLag = calMargin + 8*time.Second

// calMargin widens the seconds marked calibrating on each side of a calibrator's tone: the
// handling before and after the tone (fitting, removing the calibrator) is not sound of the
// place.
const calMargin = 2 * time.Second

// pendingSecond is a closed second waiting to enter its minute.
type pendingSecond struct {
	start       time.Time
	dur         time.Duration
	flags       record.Flags
	res         dsp.Result
	bands       []float64 // storage for res.Bands
	bandSeconds []float64 // storage for res.BandSeconds
}

// minuteBuilder builds minute records from the seconds that the validity rule counts, so that
// a minute's levels, histogram and spectrum equal those computed from its second records
// (ISO 1996-1:2016, 3.1.7: the energy mean over the counted seconds).
type minuteBuilder struct {
	queue []pendingSecond // ring of seconds waiting out minuteLag
	head  int
	n     int

	start   time.Time // start of the minute being built; zero before the first second
	acc     dsp.Accumulator
	seconds int // second records of the minute, counted or not
	rec     record.Minute
}

func newMinuteBuilder() *minuteBuilder {
	// One second a slot, plus room for the short seconds a sensitivity change makes.
	return &minuteBuilder{queue: make([]pendingSecond, int(minuteLag/time.Second)+4)}
}

// push queues a closed second; emit receives each minute record that completes as seconds
// leave the queue.
func (m *minuteBuilder) push(start time.Time, dur time.Duration, f record.Flags, r *dsp.Result, emit func(*record.Minute) error) error {
	if m.n == len(m.queue) {
		if err := m.release(emit); err != nil {
			return err
		}
	}
	q := &m.queue[(m.head+m.n)%len(m.queue)]
	m.n++
	// The meter reuses its result's slices: keep copies in the slot's own storage.
	bands := append(q.bands[:0], r.Bands...)
	secs := append(q.bandSeconds[:0], r.BandSeconds...)
	q.start, q.dur, q.flags, q.res = start, dur, f, *r
	q.res.Bands, q.bands = bands, bands
	q.res.BandSeconds, q.bandSeconds = secs, secs
	for m.n > 0 && start.Sub(m.queue[m.head].start) >= minuteLag {
		if err := m.release(emit); err != nil {
			return err
		}
	}
	return nil
}

// mark ORs f into the flags of the waiting seconds that overlap [from, to).
func (m *minuteBuilder) mark(from, to time.Time, f record.Flags) {
	for i := range m.n {
		q := &m.queue[(m.head+i)%len(m.queue)]
		if q.start.Before(to) && from.Before(q.start.Add(q.dur)) {
			q.flags |= f
		}
	}
}

// release moves the oldest waiting second into its minute.
func (m *minuteBuilder) release(emit func(*record.Minute) error) error {
	q := &m.queue[m.head]
	m.head = (m.head + 1) % len(m.queue)
	m.n--
	if !m.start.IsZero() && !q.start.Before(m.start.Add(time.Minute)) {
		if err := m.close(emit); err != nil {
			return err
		}
	}
	if m.start.IsZero() {
		m.start = q.start.Truncate(time.Minute)
	}
	m.seconds++
	switch why := record.Judge(q.flags, q.res.LAeq); why {
	case record.Counted:
		m.acc.Add(&q.res)
		m.rec.ValidSeconds++
		m.rec.ValidDuration += q.dur
		if q.flags&record.Overload != 0 {
			m.rec.OverloadSeconds++
		}
		if q.flags&record.UnderRange != 0 {
			m.rec.UnderRangeSeconds++
		}
		m.rec.Flags |= q.flags & (record.BoundFlags | record.Clipped)
	default:
		m.rec.LeftOut[why]++
	}
	m.rec.Flags |= q.flags & record.ClockUnsynced
	return nil
}

// flush moves every waiting second into its minute and closes the minute: the stream ended,
// or the clock stepped.
func (m *minuteBuilder) flush(emit func(*record.Minute) error) error {
	for m.n > 0 {
		if err := m.release(emit); err != nil {
			return err
		}
	}
	return m.close(emit)
}

// close emits the minute being built, if it holds any second.
func (m *minuteBuilder) close(emit func(*record.Minute) error) error {
	if m.seconds == 0 {
		m.start = time.Time{}
		return nil
	}
	var r dsp.Result
	m.acc.Result(&r)
	rec := m.rec
	rec.Start = m.start.UTC()
	rec.LAeq, rec.LCeq, rec.LZeq, rec.LAFmax, rec.LAFmin = r.LAeq, r.LCeq, r.LZeq, r.LAFmax, r.LAFmin
	rec.LAE, rec.LCpeak, rec.LAImax = r.LAE, r.LCpeak, r.LAImax
	rec.LAF1, rec.LAF5, rec.LAF10 = r.Histogram.Exceeded(1), r.Histogram.Exceeded(5), r.Histogram.Exceeded(10)
	rec.LAF50, rec.LAF90, rec.LAF95, rec.LAF99 = r.Histogram.Exceeded(50), r.Histogram.Exceeded(90), r.Histogram.Exceeded(95), r.Histogram.Exceeded(99)
	first, counts := r.Histogram.Span()
	rec.Histogram = record.LevelHistogram{First: first, Counts: append([]uint32(nil), counts...)}
	if len(r.Bands) > 0 {
		rec.Spectrum = append([]float64(nil), r.Bands...)
	}
	m.acc.Reset()
	m.rec = record.Minute{}
	m.seconds = 0
	m.start = time.Time{}
	return emit(&rec)
}
