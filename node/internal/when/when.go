// Package when holds the small time helpers that several of node's packages share: the later
// and the earlier of two times, and a sleep that a context can cut short.
package when

import (
	"context"
	"time"
)

// Later returns the later of a and b.
func Later(a, b time.Time) time.Time {
	if a.After(b) {
		return a
	}
	return b
}

// Earlier returns the earlier of a and b.
func Earlier(a, b time.Time) time.Time {
	if a.Before(b) {
		return a
	}
	return b
}

// Sleep waits for d or until ctx ends; it reports whether the whole of d passed.
func Sleep(ctx context.Context, d time.Duration) bool {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return true
	case <-ctx.Done():
		return false
	}
}
