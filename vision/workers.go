package vision

import (
	"fmt"
	"runtime"
)

// WorkersPerCore is how many parallel workers a run may have per core
// unless forced: more only add memory (each holds a game, a pipeline and
// a policy) and contention, never speed.
const WorkersPerCore = 4

// MaxWorkers is the largest worker count accepted without forcing:
// WorkersPerCore × runtime.NumCPU().
func MaxWorkers() int { return WorkersPerCore * runtime.NumCPU() }

// CheckWorkers refuses a negative worker count, and one above MaxWorkers
// unless force is set. 0 (one per core) is valid.
func CheckWorkers(n int, force bool) error {
	if n < 0 {
		return fmt.Errorf("%d workers: want 0 (one per core) or more", n)
	}
	if n > MaxWorkers() && !force {
		return fmt.Errorf("%d workers: at most %d (%d per core on this machine) unless forced (--force-workers)", n, MaxWorkers(), WorkersPerCore)
	}
	return nil
}
