package node

import (
	"errors"
	"fmt"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

// storeState follows a store that cannot write: since when, what it refused, and when the
// node last said so.
type storeState struct {
	failing  bool
	since    time.Time
	lastLog  time.Time
	lost     int       // records the store refused
	lostFrom time.Time // the time they cover, for the gap record
	lostTo   time.Time
	lastErr  error
}

// storeLogEvery bounds the log lines about a failing store.
const storeLogEvery = time.Minute

// lose accounts for a record the store refused.
func (s *storeState) lose(r record.Record) {
	from, to := r.Time(), r.Time()
	switch v := r.(type) {
	case *record.Second:
		to = v.Start.Add(v.Duration)
	case *record.Minute:
		to = v.Start.Add(time.Minute)
	case *record.Event:
		to = v.End
	case *record.Gap:
		to = v.To
	}
	if s.lost == 0 || from.Before(s.lostFrom) {
		s.lostFrom = from
	}
	if s.lost == 0 || to.After(s.lostTo) {
		s.lostTo = to
	}
	s.lost++
}

// storeFailing raises the store-fault flag at once and logs at most once a minute.
func (p *processor) storeFailing(err error) {
	s := &p.store
	now := p.o.Now()
	if !s.failing {
		s.failing, s.since = true, now
		p.health.sticky |= record.StoreFault
		p.n.log.Error("the store cannot write: measuring on, records held in memory; free space on its file system",
			"store", p.o.Store.Path(), "err", err)
		s.lastLog = now
		p.healthNow(now)
	} else if now.Sub(s.lastLog) >= storeLogEvery {
		p.n.log.Error("the store still cannot write", "store", p.o.Store.Path(), "since", s.since.UTC(), "refused", s.lost, "err", err)
		s.lastLog = now
	}
	s.lastErr = err
}

// storeRecovered clears the flag and covers what the store refused with a gap record.
func (p *processor) storeRecovered() error {
	s := &p.store
	lost, from, to := s.lost, s.lostFrom, s.lostTo
	p.n.log.Info("the store writes again", "store", p.o.Store.Path(), "failed_for", p.o.Now().Sub(s.since).Round(time.Second), "refused", lost)
	*s = storeState{}
	p.health.sticky &^= record.StoreFault
	p.healthNow(p.o.Now())
	if lost > 0 {
		return p.gap(from, to, fmt.Sprintf("the store could not write (full disk or I/O error): %d records could not be kept", lost))
	}
	return nil
}

// healthNow stores a health snapshot at once, with the store-fault and device-fault flags as
// they now stand, so that the page and the control socket show a fault without waiting for the
// next second.
func (p *processor) healthNow(now time.Time) {
	h := &p.health
	const faults = record.StoreFault | record.DeviceFault
	h.flags = h.flags&^faults | h.sticky&faults
	rec := p.healthSnapshot(now)
	p.n.lastHealth.Store(rec)
	if err := p.append(rec); err != nil {
		p.n.log.Warn("health snapshot not stored", "err", err)
	}
}

// spaceRoom is the free space on the store's file system, in MB, at which a store that a full
// file system made keep within its file may grow again.
const spaceRoom = 64

// checkSpaceCap keeps store-fault raised while a full file system holds the store within its
// file (it gives up its oldest records to take new ones), and lifts the cap once the file
// system has room again.
func (p *processor) checkSpaceCap(rec *record.Health) {
	capped := p.o.Store.SpaceCapped() > 0
	if capped && rec.DiskFreeMB >= spaceRoom {
		p.o.Store.ResetSpaceCap()
		capped = false
	}
	switch {
	case capped:
		p.health.sticky |= record.StoreFault
		rec.Flags |= record.StoreFault
	case !p.store.failing:
		p.health.sticky &^= record.StoreFault
	}
}

// append stores r. A store that cannot write (a full disk, an I/O error) never stops the
// node: records it holds in memory are written when it can again (buffer.ErrNotCommitted);
// what it refuses is covered by a gap record once it accepts records again
// (buffer.ErrRefused). Meanwhile the store-fault health flag is raised.
func (p *processor) append(r record.Record) error {
	if p.o.Synthetic {
		markSynthetic(r)
	}
	_, err := p.o.Store.Append(r)
	switch {
	case err == nil:
		if p.store.failing {
			return p.storeRecovered()
		}
	case errors.Is(err, buffer.ErrNotCommitted):
		p.storeFailing(err)
	case errors.Is(err, buffer.ErrRefused):
		p.storeFailing(err)
		p.store.lose(r)
		return nil
	default:
		return fmt.Errorf("node: storing a %T: %w", r, err)
	}
	if p.o.Notify != nil {
		p.o.Notify()
	}
	return nil
}

// markSynthetic flags a record made from the synthetic scene, so that no reader takes it for a
// measurement.
func markSynthetic(r record.Record) {
	switch v := r.(type) {
	case *record.Second:
		v.Flags |= record.Synthetic
	case *record.Minute:
		v.Flags |= record.Synthetic
	case *record.Event:
		v.Flags |= record.Synthetic
	case *record.Calibration:
		v.Flags |= record.Synthetic
	case *record.Health:
		v.Flags |= record.Synthetic
	}
}
