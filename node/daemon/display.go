package daemon

import (
	"slices"
	"sync/atomic"

	"github.com/leqnode/leqnode/buffer/record"
)

// displayQueue is how many records wait for a slow display before the next ones are skipped
// for it: a minute of seconds and a few minutes.
const displayQueue = 64

// displayFeed hands stored records from the processing goroutine to the display's goroutine
// without ever blocking the first.
type displayFeed struct {
	ch      chan record.Record
	skipped atomic.Uint64
}

func newDisplayFeed() *displayFeed { return &displayFeed{ch: make(chan record.Record, displayQueue)} }

// offer queues r for the display, or counts it as skipped when the queue is full. It runs on
// the processing goroutine and never waits.
func (f *displayFeed) offer(r record.Record) {
	select {
	case f.ch <- r:
	default:
		f.skipped.Add(1)
	}
}

// run shows the queued records until the feed is closed and empty.
func (f *displayFeed) run(show func(record.Record)) {
	for r := range f.ch {
		show(r)
	}
}

// close ends the feed once the node can offer no more records (its Run returned, or never
// started); run shows what is still queued and returns.
func (f *displayFeed) close() { close(f.ch) }

// cloneSecond and cloneMinute copy a record for the display, which reads it on another
// goroutine: the node owns the record it passes to its hooks and may change or reuse it (and
// its slices) once the hook returns.
func cloneSecond(r *record.Second) *record.Second {
	c := *r
	c.Spectrum = slices.Clone(r.Spectrum)
	return &c
}

func cloneMinute(r *record.Minute) *record.Minute {
	c := *r
	c.Spectrum = slices.Clone(r.Spectrum)
	c.Histogram.Counts = slices.Clone(r.Histogram.Counts)
	return &c
}
