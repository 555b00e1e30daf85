//go:build !linux

package remote

import (
	"os"
	"syscall"
)

// spliceFile cannot move file bytes into a pipe here: it moves nothing
// and says so as a file system that does not splice would.
func spliceFile(dst, src *os.File, off int64, n int) (int, error) { return 0, syscall.EINVAL }
