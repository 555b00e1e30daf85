package remote

import "syscall"

// childAttr puts the child in a process group of its own (so that the
// whole group can be ended) and has the kernel send it SIGKILL when
// tilebench dies (prctl PR_SET_PDEATHSIG). The signal follows the death
// of the OS thread that started the child; the Go runtime keeps its
// threads alive except those of goroutines that exit while locked to
// one, which this package never does.
func childAttr() *syscall.SysProcAttr {
	return &syscall.SysProcAttr{Setpgid: true, Pdeathsig: syscall.SIGKILL}
}
