package daemon

import (
	"sync"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// TestDisplayFeedNeverBlocks: a display that does not take records never holds up the
// processing side: offers return at once, the records past the queue are counted as skipped,
// and closing the feed shows the queued ones, in order.
func TestDisplayFeedNeverBlocks(t *testing.T) {
	f := newDisplayFeed()
	release := make(chan struct{})
	var shown []time.Time
	var wg sync.WaitGroup
	wg.Go(func() {
		f.run(func(r record.Record) {
			<-release // the display is stuck until released
			shown = append(shown, r.Time())
		})
	})
	t0 := time.Date(2026, 5, 4, 12, 0, 0, 0, time.UTC)
	const offered = displayQueue + 40
	for i := range offered {
		f.offer(&record.Second{Start: t0.Add(time.Duration(i) * time.Second)})
	}
	// One record may be in the display's hands, displayQueue wait; the rest are skipped.
	if k := f.skipped.Load(); k < offered-displayQueue-1 || k > offered-displayQueue {
		t.Errorf("skipped %d records, want %d or %d", k, offered-displayQueue-1, offered-displayQueue)
	}
	f.close()
	close(release)
	wg.Wait()
	if want := offered - int(f.skipped.Load()); len(shown) != want {
		t.Fatalf("showed %d records, want %d", len(shown), want)
	}
	for i, at := range shown {
		if !at.Equal(t0.Add(time.Duration(i) * time.Second)) {
			t.Fatalf("record %d shown at %v: out of order", i, at)
		}
	}
}

// TestCloneRecords: the display's copies share no field or slice with the node's records.
func TestCloneRecords(t *testing.T) {
	sec := &record.Second{LAeq: 50, Spectrum: []float64{30, 31}}
	cs := cloneSecond(sec)
	sec.LAeq, sec.Spectrum[0] = 99, 99
	if cs.LAeq != 50 || cs.Spectrum[0] != 30 {
		t.Errorf("the copy changed with the original: LAeq %v, spectrum %v", cs.LAeq, cs.Spectrum)
	}
	m := &record.Minute{Spectrum: []float64{40, 41}, Histogram: record.LevelHistogram{First: 400, Counts: []uint32{1, 2}}}
	c := cloneMinute(m)
	m.Spectrum[0], m.Histogram.Counts[0] = 99, 99
	if c.Spectrum[0] != 40 || c.Histogram.Counts[0] != 1 {
		t.Errorf("the copy changed with the original: %v %v", c.Spectrum, c.Histogram.Counts)
	}
}
