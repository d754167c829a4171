package capture

import (
	"context"
	"time"
)

// pacer releases samples in real time: the block that ends at sample count n is released at
// start + n/rate. Deadlines are computed from the count against one fixed start, never by
// adding up block durations, so rounding never accumulates and a replay of any length stays
// within a timer tick of real time. A reader that falls behind gets the late blocks at once,
// as from a sound card's buffer, until it has caught up.
type pacer struct {
	rate  int64
	start time.Time // carries the monotonic clock reading
	timer *time.Timer
}

func newPacer(rate int) *pacer {
	t := time.NewTimer(time.Hour)
	t.Stop()
	return &pacer{rate: int64(rate), start: time.Now(), timer: t}
}

// newPacerAt returns a pacer for a stream resumed at sample count pos: pos is due now, so the
// resumed stream does not burst to catch up with its first start.
func newPacerAt(rate int, pos int64) *pacer {
	p := newPacer(rate)
	p.start = p.start.Add(-p.due(pos).Sub(p.start))
	return p
}

// due returns the time at which sample count n is complete.
func (p *pacer) due(n int64) time.Time {
	sec, rem := n/p.rate, n%p.rate
	return p.start.Add(time.Duration(sec)*time.Second + time.Duration(rem*int64(time.Second)/p.rate))
}

// wait blocks until sample count n is due, ctx is done (its error) or done is closed
// (ErrClosed).
func (p *pacer) wait(ctx context.Context, done <-chan struct{}, n int64) error {
	d := time.Until(p.due(n))
	if d <= 0 {
		return ctx.Err()
	}
	p.timer.Reset(d)
	select {
	case <-p.timer.C:
		return nil
	case <-ctx.Done():
		p.timer.Stop()
		return ctx.Err()
	case <-done:
		p.timer.Stop()
		return ErrClosed
	}
}
