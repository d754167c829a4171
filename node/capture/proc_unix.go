//go:build unix

package capture

import (
	"os/exec"
	"syscall"
)

// setProcessGroup starts cmd in a process group of its own, so that stopping it also stops
// any children (a wrapper script's) that hold its pipes open.
func setProcessGroup(cmd *exec.Cmd) {
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
}

// terminate sends SIGTERM to cmd's process group.
func terminate(cmd *exec.Cmd) { _ = syscall.Kill(-cmd.Process.Pid, syscall.SIGTERM) }

// kill sends SIGKILL to cmd's process group.
func kill(cmd *exec.Cmd) { _ = syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
