package node

import "golang.org/x/sys/unix"

// KernelClockSynced reports whether the kernel considers the system clock synchronised, from
// adjtimex(2): the STA_UNSYNC status bit is clear and the call does not report TIME_ERROR. Boards
// without a real-time clock boot with an unsynchronised clock until NTP has set it.
func KernelClockSynced() bool {
	var tx unix.Timex
	state, err := unix.Adjtimex(&tx)
	if err != nil {
		return false
	}
	return state != unix.TIME_ERROR && tx.Status&unix.STA_UNSYNC == 0
}
