package node

import (
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// startupGap starts the outage that explains the time the node was not running: from the end
// of the last stored second to the first sample of this run (see opened and data). On an empty
// store the outage starts now, so that a source missing at start leaves no hole either.
func (p *processor) startupGap() error {
	p.lostAt, p.lostWhy = p.o.Now(), ""
	last, err := p.o.Store.Last(record.KindSecond)
	if err != nil || last == nil {
		return nil
	}
	if s, ok := last.(*record.Second); ok {
		p.lostAt = s.Start.Add(s.Duration)
		p.lostWhy = "node was not running (stopped, restarting, crashed or powered off)"
	}
	return nil
}

// endOutage records the outage in progress as a gap ending at the first sample measured after
// it, so that the gap and the next record meet exactly. A gap shorter than minGap is left out:
// a fresh start's first sample comes a few milliseconds after the node starts.
func (p *processor) endOutage(firstSample time.Time) error {
	from, why := p.lostAt, p.lostWhy
	p.lostAt, p.lostWhy = time.Time{}, ""
	if from.IsZero() || firstSample.Sub(from) < minGap {
		return nil
	}
	if why == "" {
		why = "no audio yet"
	}
	return p.gap(from, firstSample, why)
}

// minGap is the shortest stretch without records that is recorded as a gap.
const minGap = 50 * time.Millisecond

func (p *processor) gap(from, to time.Time, why string) error {
	if to.Before(from) {
		from, to = to, from
	}
	if !to.After(from) {
		return nil
	}
	p.n.Counters.Gaps.Add(1)
	p.n.log.Info("gap in the data", "from", from.UTC(), "to", to.UTC(), "reason", why)
	return p.append(&record.Gap{From: from.UTC(), To: to.UTC(), Reason: why})
}

// lost closes the partial second and remembers when the source went away.
func (p *processor) lost(why string) error {
	if p.meter != nil && p.anchored {
		p.closeSecond()
		p.flushEvents()
	}
	if p.lostAt.IsZero() { // a new outage; one that goes on keeps its start and first reason
		p.lostAt = p.lastEnd
		if p.lostAt.IsZero() {
			p.lostAt = p.o.Now()
		}
		if p.lostWhy != "" { // the watchdog said why first
			why = p.lostWhy + ": " + why
		}
		p.lostWhy = "capture device lost: " + why
	}
	return nil
}

// skip accounts for samples lost before the next block: the sample count (and so time) moves
// on, the seconds they fall in are flagged.
func (p *processor) skip(k int64) {
	p.evSkew += k
	p.calSkew += k
	for k > 0 {
		end := max(p.clock.Sample(p.nextSecond), p.pos)
		take := min(k, end-p.pos)
		p.pos += take
		k -= take
		p.secFlags |= record.Dropped
		p.secDropped += uint64(take)
		if p.pos == end {
			p.closeSecond()
		}
	}
}

// skipLost accounts for samples lost at the end of a stream.
func (p *processor) skipLost(k int64) {
	if k > 0 && p.anchored {
		p.skip(k)
	}
}
