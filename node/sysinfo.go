package node

import (
	"bytes"
	"context"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"sync/atomic"
	"syscall"
	"time"

	"golang.org/x/sys/unix"
)

// sysWatch reads the machine's state that the records report (resident memory, free space
// under the store, board temperature, the kernel's clock error, whether the clock is
// synchronised) on a goroutine of its own, every sysEvery, so that the processing goroutine
// reads no file: /proc and /sys reads are quick, but statfs on a failing memory card is not,
// and the clock check may fall back to a file (KernelClockSynced). Records carry the latest
// reading, at most sysEvery old.
type sysWatch struct {
	storePath, thermalDir string
	clockSynced           func() bool
	last                  atomic.Pointer[sysReading]
}

// sysEvery is how often sysWatch reads the machine: well within the default snapshot interval
// of a minute, rare enough to cost nothing.
const sysEvery = 10 * time.Second

// sysReading is one reading of the machine; a value that could not be read is 0, the
// temperature NaN.
type sysReading struct {
	memoryMB, diskFreeMB, clockErrorMs, temperatureC float64
	synced                                           bool
}

// newSysWatch takes a first reading at once, so that the first record has one.
func newSysWatch(storePath, thermalDir string, clockSynced func() bool) *sysWatch {
	w := &sysWatch{storePath: storePath, thermalDir: thermalDir, clockSynced: clockSynced}
	w.read()
	return w
}

func (w *sysWatch) read() {
	r := &sysReading{memoryMB: residentMB(), diskFreeMB: diskFreeMB(w.storePath), clockErrorMs: clockErrorMs(),
		temperatureC: math.NaN(), synced: w.clockSynced()}
	if t, ok := boardTemperature(w.thermalDir); ok {
		r.temperatureC = t
	}
	w.last.Store(r)
}

// latest returns the latest reading.
func (w *sysWatch) latest() *sysReading { return w.last.Load() }

// run reads the machine every sysEvery until ctx ends.
func (w *sysWatch) run(ctx context.Context) {
	t := time.NewTicker(sysEvery)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
			w.read()
		}
	}
}

// processCPU returns the CPU time the process has used (user and system).
func processCPU() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// residentMB returns the process's resident memory in MB, from /proc/self/statm.
func residentMB() float64 {
	b, err := os.ReadFile("/proc/self/statm")
	if err != nil {
		return 0
	}
	f := bytes.Fields(b)
	if len(f) < 2 {
		return 0
	}
	pages, err := strconv.ParseFloat(string(f[1]), 64)
	if err != nil {
		return 0
	}
	return pages * float64(os.Getpagesize()) / (1 << 20)
}

// diskFreeMB returns the space available to the process on the file system holding path.
func diskFreeMB(path string) float64 {
	var st unix.Statfs_t
	if unix.Statfs(filepath.Dir(path), &st) != nil {
		return 0
	}
	return float64(st.Bavail) * float64(st.Bsize) / (1 << 20)
}

// clockErrorMs returns the kernel's estimated clock error in milliseconds (adjtimex esterror),
// or 0 where the call is refused.
func clockErrorMs() float64 {
	var tx unix.Timex
	if _, err := unix.Adjtimex(&tx); err != nil {
		return 0
	}
	return float64(tx.Esterror) / 1000
}

// boardTemperature returns the highest temperature in °C that the thermal zones under dir
// report (/sys/class/thermal on Linux), and false where there is none.
func boardTemperature(dir string) (float64, bool) {
	zones, _ := filepath.Glob(filepath.Join(dir, "thermal_zone*", "temp"))
	best, ok := 0.0, false
	for _, z := range zones {
		b, err := os.ReadFile(z)
		if err != nil {
			continue
		}
		v, err := strconv.ParseFloat(string(bytes.TrimSpace(b)), 64)
		if err != nil {
			continue
		}
		if c := v / 1000; !ok || c > best { // millidegrees Celsius
			best, ok = c, true
		}
	}
	return best, ok
}
