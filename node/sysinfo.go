package node

import (
	"bytes"
	"os"
	"path/filepath"
	"strconv"
	"syscall"
	"time"

	"golang.org/x/sys/unix"
)

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
