package testrig

import (
	"bytes"
	"context"
	"sync"
	"testing"
	"time"
)

// Background runs run (a service's Run method) on a goroutine until the test ends or stop is
// called, whichever is first. stop cancels run's context and waits at most within for it to
// return; an error from run, or a run that does not return in time, fails t under the name what.
func Background(t testing.TB, what string, within time.Duration, run func(context.Context) error) (stop func()) {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- run(ctx) }()
	var once sync.Once
	stop = func() {
		once.Do(func() {
			cancel()
			select {
			case err := <-done:
				if err != nil {
					t.Errorf("%s: %v", what, err)
				}
			case <-time.After(within):
				t.Errorf("%s did not stop %v after its context ended", what, within)
			}
		})
	}
	t.Cleanup(stop)
	return stop
}

// SyncBuffer is a bytes.Buffer that several goroutines may write (a slog handler's writer, a
// command's output) while a test reads it.
type SyncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

// Write appends p.
func (l *SyncBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

// String returns everything written so far.
func (l *SyncBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}
