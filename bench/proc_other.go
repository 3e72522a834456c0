//go:build !unix

package bench

import "os/exec"

// killGroup leaves the default cancellation (killing the process itself);
// WaitDelay bounds the wait for pipes its children may hold.
func killGroup(cmd *exec.Cmd) {}
