package node

import "github.com/leqnode/leqnode/node/lib/calibrate"

// stateWriter writes the sensitivity state file (calibrate.SaveState) on a goroutine of its
// own, so that the processing goroutine never waits for a file system: an fsync on a memory
// card can take longer than the capture queue lasts. The processing goroutine hands it a state
// to save (save) and picks the outcome up from done as a value, in its loop; Node.Run starts
// the writer and stops it (stop) after the processing goroutine has taken every outcome.
//
// One write is outstanding at a time (a calibration request waits for its check's write), so
// the channels, one slot each, never make either side wait.
type stateWriter struct {
	requests chan stateWrite
	done     chan error // the outcome of each write, in order
	stopped  chan struct{}
}

type stateWrite struct {
	dir   string
	state calibrate.State
}

func startStateWriter() *stateWriter {
	w := &stateWriter{requests: make(chan stateWrite, 1), done: make(chan error, 1), stopped: make(chan struct{})}
	go func() {
		defer close(w.stopped)
		for r := range w.requests {
			w.done <- calibrate.SaveState(r.dir, r.state)
		}
	}()
	return w
}

// save hands a state to the writer. Called on the processing goroutine.
func (w *stateWriter) save(dir string, st calibrate.State) {
	w.requests <- stateWrite{dir: dir, state: st}
}

// stop ends the writer once it has written what it was given, and waits for it.
func (w *stateWriter) stop() {
	close(w.requests)
	<-w.stopped
}
