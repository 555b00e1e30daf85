package remote

import (
	"io"
	"os"
	"os/exec"
	"strconv"
	"sync/atomic"
	"time"
)

// exitGrace is how long replies already in the pipe may still be read
// once the child has exited.
const exitGrace = 100 * time.Millisecond

// lifecycle is what a Policy keeps, beyond os/exec, to watch over its
// child: whether it has exited (seen from the process itself, not from
// its output, which a grandchild may hold open), the end of its stderr,
// and the watchdog that ends its process group if tilebench dies.
type lifecycle struct {
	gone    atomic.Bool   // the child has exited
	errDone chan struct{} // closed when its stderr reached its end
	guard   *exec.Cmd     // the watchdog, if one runs
	guardIn *os.File      // the watchdog's stdin: its end tells it to act
}

// copyStderr copies the child's stderr (errR, read end of an *os.File
// pipe, so that cmd.Wait returns as soon as the child exits even when a
// grandchild holds the write end) into w.
func (l *lifecycle) copyStderr(errR *os.File, w io.Writer) {
	l.errDone = make(chan struct{})
	go func() {
		io.Copy(w, errR)
		close(l.errDone)
	}()
}

// watch waits for cmd to exit, then marks the session's child gone and
// wakes any read or write blocked on in or out, so that a crash is told
// from the exit at once and not after the whole timeout.
func (p *Policy) watch(cmd *exec.Cmd, in, out *os.File) {
	p.waitErr = cmd.Wait()
	if p.life.errDone != nil {
		select { // the last stderr lines, for the fault message
		case <-p.life.errDone:
		case <-time.After(250 * time.Millisecond):
		}
	}
	close(p.exited)
	p.life.gone.Store(true)
	wake := time.Now().Add(exitGrace)
	out.SetReadDeadline(wake)
	in.SetWriteDeadline(wake)
}

// setReadDeadline sets the reply deadline, cut short to the grace period
// once the child has exited. The second look at gone closes the race
// with watch: either watch's wake-up comes after this call, or this call
// sees gone.
func (p *Policy) setReadDeadline(d time.Time) {
	p.rd.SetReadDeadline(d)
	if p.cmd != nil && p.life.gone.Load() {
		p.rd.SetReadDeadline(minTime(d, time.Now().Add(exitGrace)))
	}
}

// setWriteDeadline is setReadDeadline for messages going out.
func (p *Policy) setWriteDeadline(d time.Time) {
	p.w.SetWriteDeadline(d)
	if p.cmd != nil && p.life.gone.Load() {
		p.w.SetWriteDeadline(minTime(d, time.Now().Add(exitGrace)))
	}
}

func minTime(a, b time.Time) time.Time {
	if b.Before(a) {
		return b
	}
	return a
}

// childGone reports whether an exec: child has exited.
func (p *Policy) childGone() bool { return p.cmd != nil && p.life.gone.Load() }

// timeoutHint names the setting that bounds the wait in phase.
func timeoutHint(phase string) string {
	if phase == "handshake" {
		return " (the start timeout: raise it with --policy-start-timeout)"
	}
	return " (the step timeout: raise it with --policy-timeout)"
}

// startGuard starts a watchdog for process group pgid: a shell that
// waits for the end of its stdin and then kills the group. tilebench
// holds the only write end of that pipe, so the kernel ends the input
// when tilebench dies in any way (even SIGKILL), and the policy's whole
// group, grandchildren included, goes with it. The watchdog is in a group
// of its own so that a terminal's Ctrl-C does not end it before
// tilebench has cleaned up. Without /bin/sh there is no watchdog; on
// Linux the child still dies with tilebench (childAttr's parent-death
// signal), only its own children may be left.
func (l *lifecycle) startGuard(pgid int) {
	r, w, err := os.Pipe()
	if err != nil {
		return
	}
	g := exec.Command("/bin/sh", "-c", `read x; kill -KILL -"$1" 2>/dev/null`, "tilebench-guard", strconv.Itoa(pgid))
	g.Stdin = r
	ownGroup(g)
	if err := g.Start(); err != nil {
		r.Close()
		w.Close()
		return
	}
	r.Close()
	l.guard, l.guardIn = g, w
	go g.Wait()
}

// stopGuard ends the watchdog without letting it act. It is called
// before the policy's group is killed and reaped, so that the watchdog
// can never signal a group number the system has since given to others.
func (l *lifecycle) stopGuard() {
	if l.guard == nil {
		return
	}
	l.guard.Process.Kill()
	l.guardIn.Close()
	l.guard, l.guardIn = nil, nil
}
