//go:build unix

package remote

import (
	"os"
	"os/exec"
	"syscall"
)

// ownGroup starts the child in a process group of its own, so that
// killTree ends it and every process it started.
func ownGroup(cmd *exec.Cmd) {
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
}

// killTree ends the child's whole process group.
func killTree(p *os.Process) {
	syscall.Kill(-p.Pid, syscall.SIGKILL)
}
