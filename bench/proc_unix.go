//go:build unix

package bench

import (
	"os/exec"
	"syscall"
)

// killGroup runs cmd in its own process group and makes the cancellation
// kill the whole group, so that a shell script's children (a sleep, an
// interpreter) do not outlive it and hold its output open.
func killGroup(cmd *exec.Cmd) {
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error {
		if cmd.Process == nil {
			return nil
		}
		return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL)
	}
}
