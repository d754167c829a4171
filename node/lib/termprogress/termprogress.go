// Package termprogress draws progress bars on a terminal for long reads of recordings: one
// bar for one recording, or one bar for a batch read on several goroutines at once. Bars
// redraw their line with a carriage return; they are for a terminal only (the caller checks
// that standard error is one), and a failed write to the terminal is not an error of the read.
package termprogress

import (
	"fmt"
	"io"
	"strings"
	"sync"
	"time"
)

// Clear erases the line a bar was drawn on.
func Clear(w io.Writer) { draw(w, "\r\033[K") }

// draw writes to the terminal. A failed write is dropped: a bar is a courtesy to the person
// watching, and the read it follows goes on whether the terminal shows it or not.
func draw(w io.Writer, format string, a ...any) { _, _ = fmt.Fprintf(w, format, a...) }

// Bar returns the progress callback of one read (frames done of total; total <= 0: not
// known) that draws a bar on the terminal w.
func Bar(w io.Writer) func(done, total int64) {
	return func(done, total int64) {
		if total <= 0 {
			draw(w, "\r%d frames read", done)
			return
		}
		const width = 40
		frac := float64(done) / float64(total)
		n := int(frac * width)
		draw(w, "\r[%s%s] %3.0f%%", strings.Repeat("#", n), strings.Repeat(".", width-n), 100*frac)
	}
}

// Batch draws one progress bar on a terminal for a batch of recordings read at once: the
// share of all frames read, and the number of recordings finished.
type Batch struct {
	mu          sync.Mutex
	w           io.Writer
	done, total []int64
	finished    int
	last        time.Time
}

// NewBatch returns the bar of a batch of n recordings, drawn on w.
func NewBatch(w io.Writer, n int) *Batch {
	return &Batch{w: w, done: make([]int64, n), total: make([]int64, n)}
}

// Progress returns the progress callback of recording i; it may be called from any goroutine.
func (b *Batch) Progress(i int) func(done, total int64) {
	return func(done, total int64) {
		b.mu.Lock()
		defer b.mu.Unlock()
		b.done[i], b.total[i] = done, total
		if time.Since(b.last) > 200*time.Millisecond {
			b.draw()
			b.last = time.Now()
		}
	}
}

// Finish marks recording i as read to its end.
func (b *Batch) Finish(i int) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.finished++
	if b.total[i] <= 0 {
		b.total[i] = b.done[i]
	}
	b.done[i] = b.total[i]
	b.draw()
}

// Clear erases the bar's line.
func (b *Batch) Clear() {
	b.mu.Lock()
	defer b.mu.Unlock()
	Clear(b.w)
}

// draw writes the bar; the caller holds b.mu. Recordings whose length is not known yet count
// as the mean of the known ones.
func (b *Batch) draw() {
	var done, total float64
	known := 0
	for i, t := range b.total {
		if t > 0 {
			done += float64(min(b.done[i], t))
			total += float64(t)
			known++
		}
	}
	frac := 0.0
	if known > 0 && total > 0 {
		total += total / float64(known) * float64(len(b.total)-known)
		frac = done / total
	}
	const width = 40
	n := min(width, int(frac*width))
	draw(b.w, "\r[%s%s] %3.0f%%  %d/%d recordings", strings.Repeat("#", n), strings.Repeat(".", width-n), 100*frac, b.finished, len(b.total))
}
