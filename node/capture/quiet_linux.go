//go:build cgo && !noportaudio && linux

package capture

import (
	"os"
	"syscall"
)

// quietStderr runs f with file descriptor 2 pointed at /dev/null, then restores it. It
// silences what PortAudio, ALSA and JACK print from C (JACK's five lines on every Initialize,
// ALSA's complaints about absent cards) without touching our own logs for longer than f runs.
// Danger: fd 2 is per process, so anything another goroutine writes to standard error while f
// runs is lost too; keep f short.
func quietStderr(f func()) {
	saved, err := syscall.Dup(2)
	if err != nil {
		f()
		return
	}
	defer func() { _ = syscall.Close(saved) }() // a duplicate nobody else holds: nothing to lose
	null, err := os.OpenFile(os.DevNull, os.O_WRONLY, 0)
	if err != nil {
		f()
		return
	}
	err = syscall.Dup3(int(null.Fd()), 2, 0)
	_ = null.Close() // opened for writing nothing: fd 2 now holds /dev/null
	if err != nil {
		f()
		return
	}
	defer func() {
		// Restoring fd 2 can fail only if saved is not a descriptor, which Dup above rules
		// out; there is no standard error left to report it on.
		_ = syscall.Dup3(saved, 2, 0)
	}()
	f()
}
