//go:build unix

package runner

import (
	"syscall"
	"time"
)

// cpuTime is the CPU time (user + system) the process has used, so that
// benchmarks can report throughput per CPU-second, which other programs
// on a busy machine do not change.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
