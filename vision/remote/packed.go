package remote

import (
	"errors"
	"fmt"
	"os"
	"syscall"
	"time"

	"tilebench/vision"
)

// Packed frames: a session that sends uint8 frames sends each as its
// height×width×channels bytes, row after row, the layout a .npy array of
// uint8 frames stores. A caller that holds frames in that layout (a
// recording read as stored) passes the bytes as they are, and with
// FrameBuffer reads them straight into the outgoing message: no RGBA
// frame between, and no copy of the payload.

// headRoom is the room kept before the frames of a packed message for
// its header lines (a waiting end and start, then the step or batch).
const headRoom = MaxLine + 1024

// PackedFrame reports the layout of one frame as the session sends it,
// (height, width, channels) bytes, and whether the session sends such
// frames (obs frame, dtype uint8): only then do ActPacked and
// ActBatchPacked work.
func (p *Policy) PackedFrame() (shape [3]int, ok bool) {
	return p.frameShape, p.cfg.Obs == ObsFrame && p.cfg.Dtype == Uint8
}

// FrameBuffer returns room for k packed frames inside the next message:
// frames written there and passed to ActPacked (k = 1) or ActBatchPacked
// go out with no copy. The room is reused by every call; nil when the
// session sends no packed frames or k is not 1..max(1, BatchSize()).
func (p *Policy) FrameBuffer(k int) []byte {
	shape, ok := p.PackedFrame()
	if !ok || k < 1 || k > max(1, p.BatchSize()) {
		return nil
	}
	fb := shape[0] * shape[1] * shape[2]
	if need := headRoom + max(1, p.BatchSize())*fb; len(p.pk) < need {
		p.pk = make([]byte, need)
	}
	return p.pk[headRoom : headRoom+k*fb]
}

// ActPacked is Act with the frame given as packed bytes (PackedFrame's
// layout) instead of obs.Frame, which is not read.
func (p *Policy) ActPacked(obs *vision.Observation, frame []byte, action []float64) error {
	if frame == nil {
		frame = []byte{}
	}
	return p.act(obs, frame, action)
}

// ActBatchPacked is ActBatch with the len(obs) frames given back to back
// as packed bytes (PackedFrame's layout) instead of each observation's
// Frame, which is not read.
func (p *Policy) ActBatchPacked(obs []*vision.Observation, frames []byte, actions [][]float64) error {
	if frames == nil {
		frames = []byte{}
	}
	return p.actBatch(obs, frames, nil, actions)
}

// fileFrames names packed frames stored in a file from offset off.
type fileFrames struct {
	f   *os.File
	off int64
}

// ActBatchFile is ActBatchPacked with the len(obs) frames stored in f
// from offset off, back to back in PackedFrame's layout (as a .npy array
// of uint8 frames stores them). Over an exec: session on Linux the
// kernel moves them from the file into the child's pipe (splice(2)), so
// they are never copied through this process; otherwise they are read
// into FrameBuffer's room and sent from there. The caller makes sure the
// file holds them: a file cut short is an IO fault.
func (p *Policy) ActBatchFile(obs []*vision.Observation, f *os.File, off int64, actions [][]float64) error {
	if f == nil {
		return fmt.Errorf("policy %s: no file of frames", p.target)
	}
	return p.actBatch(obs, nil, &fileFrames{f, off}, actions)
}

// sendFile sends the header lines head and then n bytes of frames from
// the file: spliced into the child's pipe where it can be, else read
// into FrameBuffer's room and written with the header.
func (p *Policy) sendFile(phase string, step int, head []byte, from *fileFrames, n int, deadline time.Time, timeout time.Duration) *FaultError {
	p.FrameBuffer(1) // the room, made once
	if p.pipe != nil {
		if f := p.write(phase, step, head, deadline, timeout); f != nil {
			return f
		}
		moved, err := spliceFile(p.pipe, from.f, from.off, n)
		if moved == 0 && errors.Is(err, syscall.EINVAL) {
			// This file system does not splice: read, then write.
			buf := p.pk[headRoom : headRoom+n]
			if _, err := from.f.ReadAt(buf, from.off); err != nil {
				return p.newFault(phase, step, IO, "frames from %s: %v", from.f.Name(), err)
			}
			return p.write(phase, step, buf, deadline, timeout)
		}
		return p.writeFault(phase, step, err, timeout)
	}
	buf := p.pk[headRoom : headRoom+n]
	if _, err := from.f.ReadAt(buf, from.off); err != nil {
		return p.newFault(phase, step, IO, "frames from %s: %v", from.f.Name(), err)
	}
	return p.write(phase, step, p.place(head, buf), deadline, timeout)
}

// checkPacked checks that the session sends packed frames and that n
// bytes are k of them.
func (p *Policy) checkPacked(n, k int) error {
	shape, ok := p.PackedFrame()
	if !ok {
		return fmt.Errorf("policy %s: the session sends %s %s, not packed uint8 frames", p.target, p.cfg.Obs, p.cfg.Dtype)
	}
	if fb := shape[0] * shape[1] * shape[2]; n != k*fb {
		return fmt.Errorf("policy %s: %d bytes of packed frames, want %d (%d frames of %dx%dx%d)", p.target, n, k*fb, k, shape[1], shape[0], shape[2])
	}
	return nil
}

// place returns the message of header lines head and payload frames: in
// place before frames when they are FrameBuffer's room (no copy of the
// frames), else both copied into the message buffer.
func (p *Policy) place(head, frames []byte) []byte {
	n := len(head)
	if n <= headRoom && len(frames) > 0 && len(p.pk) >= headRoom+len(frames) && &frames[0] == &p.pk[headRoom] {
		copy(p.pk[headRoom-n:headRoom], head)
		return p.pk[headRoom-n : headRoom+len(frames)]
	}
	p.out = append(append(p.out[:0], head...), frames...)
	return p.out
}
