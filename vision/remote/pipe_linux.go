package remote

import (
	"os"
	"syscall"
)

// fSetPipeSz is F_SETPIPE_SZ (fcntl(2), Linux 2.6.35 and later).
const fSetPipeSz = 1031

// growPipe asks the kernel for a pipe buffer of size bytes, so that one
// step's payload fits and the reader wakes once. Failure (a size above
// /proc/sys/fs/pipe-max-size for an unprivileged user) leaves the default.
func growPipe(f *os.File, size int) {
	rc, err := f.SyscallConn()
	if err != nil {
		return
	}
	rc.Control(func(fd uintptr) {
		syscall.Syscall(syscall.SYS_FCNTL, fd, fSetPipeSz, uintptr(size))
	})
}
