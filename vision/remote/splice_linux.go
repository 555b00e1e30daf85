package remote

import (
	"io"
	"os"
	"syscall"
)

// splice(2) flags (linux/splice.h).
const (
	spliceMove     = 0x1
	spliceNonblock = 0x2
)

// spliceFile moves n bytes of src from off into the pipe dst with
// splice(2): the kernel hands the file's cached pages to the pipe, and
// the bytes are never copied through this process. It waits for room in
// the pipe under dst's write deadline. A file system that does not
// splice gives moved 0 and syscall.EINVAL before anything is sent.
func spliceFile(dst, src *os.File, off int64, n int) (moved int, err error) {
	sc, err := src.SyscallConn()
	if err != nil {
		return 0, err
	}
	dc, err := dst.SyscallConn()
	if err != nil {
		return 0, err
	}
	var serr error
	cerr := sc.Control(func(sfd uintptr) {
		werr := dc.Write(func(dfd uintptr) bool {
			for moved < n {
				o := off + int64(moved)
				k, e := syscall.Splice(int(sfd), &o, int(dfd), nil, n-moved, spliceMove|spliceNonblock)
				switch {
				case e == syscall.EINTR:
					continue
				case e == syscall.EAGAIN:
					return false // wait for room in the pipe
				case e != nil:
					serr = e
					return true
				case k == 0:
					serr = io.ErrUnexpectedEOF
					return true
				}
				moved += int(k)
			}
			return true
		})
		if serr == nil {
			serr = werr
		}
	})
	if serr == nil {
		serr = cerr
	}
	return moved, serr
}
