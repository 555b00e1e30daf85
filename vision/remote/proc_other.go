//go:build !unix

package remote

import (
	"os"
	"os/exec"
	"syscall"
)

// childAttr sets nothing where there are no Unix process groups.
func childAttr() *syscall.SysProcAttr { return nil }

// ownGroup does nothing where there are no Unix process groups
// (Windows).
func ownGroup(*exec.Cmd) {}

// killTree ends the child process only. This is weaker than on Unix:
// processes the policy itself started (a shell's children, a framework's
// workers) are not ended with it and may outlive tilebench; start the
// real policy process directly (exec:python3 policy.py, not through a
// shell) on these systems. (A job object would end the whole tree; the
// standard library offers none.)
func killTree(p *os.Process) { p.Kill() }
