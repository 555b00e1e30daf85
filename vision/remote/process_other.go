//go:build unix && !linux

package remote

import "syscall"

// childAttr puts the child in a process group of its own, so that the
// whole group can be ended; the watchdog (startGuard) ends it if
// tilebench dies.
func childAttr() *syscall.SysProcAttr { return &syscall.SysProcAttr{Setpgid: true} }
