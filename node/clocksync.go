package node

import (
	"errors"
	"os"

	"golang.org/x/sys/unix"
)

// timesyncFlag is the file systemd-timesyncd creates once it has synchronised the clock.
const timesyncFlag = "/run/systemd/timesync/synchronized"

// KernelClockSynced reports whether the system clock is synchronised. It asks the kernel with
// adjtimex(2) (the STA_UNSYNC status bit is clear and the call does not report TIME_ERROR).
// Where a sandbox refuses the call (systemd's ProtectClock), it falls back to the flag file of
// systemd-timesyncd. Boards without a real-time clock boot unsynchronised until NTP has set the
// clock.
func KernelClockSynced() bool {
	var tx unix.Timex
	state, err := unix.Adjtimex(&tx)
	if errors.Is(err, unix.EPERM) || errors.Is(err, unix.ENOSYS) {
		_, err := os.Stat(timesyncFlag)
		return err == nil
	}
	if err != nil {
		return false
	}
	return state != unix.TIME_ERROR && tx.Status&unix.STA_UNSYNC == 0
}
