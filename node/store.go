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

// recorder appends the processing goroutine's records to the store. A store that cannot write
// (a full disk, an I/O error) never stops the node: records the store holds in memory are
// written when it can again (buffer.ErrNotCommitted); what it refuses is counted and covered by
// a gap record once it accepts records again (buffer.ErrRefused). Meanwhile the store-fault
// health flag is raised. Any other store error is returned, and stops the node.
type recorder struct {
	n      *Node
	o      *Options
	health *healthChain
	state  storeState
}

// failing raises the store-fault flag at once and logs at most once a minute.
func (w *recorder) failing(err error) {
	s := &w.state
	now := w.o.Now()
	if !s.failing {
		s.failing, s.since = true, now
		w.health.raise(record.StoreFault)
		w.n.log.Error("the store cannot write: measuring on, records held in memory; free space on its file system",
			"store", w.o.Store.Path(), "err", err)
		s.lastLog = now
		w.health.now(now)
	} else if now.Sub(s.lastLog) >= storeLogEvery {
		w.n.log.Error("the store still cannot write", "store", w.o.Store.Path(), "since", s.since.UTC(), "refused", s.lost, "err", err)
		s.lastLog = now
	}
	s.lastErr = err
}

// recovered clears the flag and covers what the store refused with a gap record.
func (w *recorder) recovered() error {
	s := &w.state
	lost, from, to := s.lost, s.lostFrom, s.lostTo
	w.n.log.Info("the store writes again", "store", w.o.Store.Path(), "failed_for", w.o.Now().Sub(s.since).Round(time.Second), "refused", lost)
	*s = storeState{}
	w.health.clear(record.StoreFault)
	w.health.now(w.o.Now())
	if lost > 0 {
		return w.gap(from, to, fmt.Sprintf("the store could not write (full disk or I/O error): %d records could not be kept", lost))
	}
	return nil
}

// finish makes a last try when the node stops, so that what a failing store refused is
// explained (a gap record) or, when it still cannot write, logged.
func (w *recorder) finish() error {
	if !w.state.failing {
		return nil
	}
	if err := w.o.Store.Flush(); err != nil {
		w.n.log.Error("the store still cannot write as the node stops: records held in memory are lost", "err", err, "refused", w.state.lost)
		return nil // said; Run's own Flush returns the error
	}
	return w.recovered()
}

// gap stores a gap record for [from, to): time without measurement, and why.
func (w *recorder) gap(from, to time.Time, why string) error {
	if to.Before(from) {
		from, to = to, from
	}
	if !to.After(from) {
		return nil
	}
	w.n.Counters.Gaps.Add(1)
	w.n.log.Info("gap in the data", "from", from.UTC(), "to", to.UTC(), "reason", why)
	return w.append(&record.Gap{From: from.UTC(), To: to.UTC(), Reason: why})
}

// spaceRoom is the free space on the store's file system, in MB, at which a store that a full
// file system made keep within its file may grow again.
const spaceRoom = 64

// checkSpaceCap keeps store-fault raised while a full file system holds the store within its
// file (it gives up its oldest records to take new ones), and lifts the cap once the file
// system has room again.
func (w *recorder) checkSpaceCap(rec *record.Health) {
	capped := w.o.Store.SpaceCapped() > 0
	if capped && rec.DiskFreeMB >= spaceRoom {
		w.o.Store.ResetSpaceCap()
		capped = false
	}
	switch {
	case capped:
		w.health.raise(record.StoreFault)
		rec.Flags |= record.StoreFault
	case !w.state.failing:
		w.health.clear(record.StoreFault)
	}
}

// append stores r; see recorder for what happens when the store cannot write.
func (w *recorder) append(r record.Record) error {
	if w.o.Synthetic {
		markSynthetic(r)
	}
	_, err := w.o.Store.Append(r)
	switch {
	case err == nil:
		if w.state.failing {
			return w.recovered()
		}
	case errors.Is(err, buffer.ErrNotCommitted):
		w.failing(err)
	case errors.Is(err, buffer.ErrRefused):
		w.failing(err)
		w.state.lose(r)
		return nil
	default:
		return fmt.Errorf("node: storing a %T: %w", r, err)
	}
	if w.o.Notify != nil {
		w.o.Notify()
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
