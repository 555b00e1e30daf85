package frameio

import (
	"errors"
	"fmt"
	"image"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
)

// Random is a frame sequence whose frames can be read in any order, by
// many goroutines at once: a .npy array or a raw RGB24 file (read at an
// offset, never loaded whole), a folder of frames (one file decoded per
// call), or a sequence held in memory (a GIF, a single picture, a
// built-in scene). Raw RGB24 on stdin is first copied to a temporary file,
// removed again by Close.
type Random interface {
	// Info describes the sequence; Frames is always known.
	Info() Info
	// ReadFrameAt reads frame i (from 0) into dst, which must be
	// Width×Height at the origin. Safe for concurrent use with distinct
	// dst.
	ReadFrameAt(i int, dst *image.RGBA) error
	// Close releases the input.
	Close() error
}

// Packed is a Random whose frames are stored as packed rows of
// Info().Channels bytes a pixel, back to back (a .npy array, raw RGB24):
// BytesAt hands them out as stored, with no RGBA conversion.
type Packed interface {
	Random
	// BytesAt reads frames i, i+1, ... as stored (Width·Height·Channels
	// bytes each, row after row) into dst, whose length must be a whole
	// number of frames, all within the input, with one read. Safe for
	// concurrent use with distinct dst.
	BytesAt(i int, dst []byte) error
	// Stored returns the file frames i..i+n-1 are stored in and the
	// offset of frame i, for moving them without reading them (a
	// splice into a pipe); the file stays the input's: do not close it.
	Stored(i, n int) (*os.File, int64, error)
}

// OpenRandom opens in (any input Open takes) for reading in any order.
// For a folder, every frame file's header is read at once so that frames
// of another size are refused before any work starts, with the file and
// its index in the message.
func OpenRandom(in string, opt Options) (Random, error) {
	if in == "-" {
		return spoolStdin(opt)
	}
	if st, err := os.Stat(in); err == nil && !st.IsDir() {
		switch strings.ToLower(filepath.Ext(in)) {
		case ".npy":
			return openNPYAt(in)
		case ".rgb", ".raw":
			return openRawAt(in, in, opt.Width, opt.Height, nil)
		}
	}
	r, err := Open(in, opt)
	if err != nil {
		return nil, err
	}
	if l, ok := r.(*fileList); ok {
		return newFolderAt(l)
	}
	defer r.Close()
	frames, err := ReadAll(r)
	if err != nil {
		return nil, err
	}
	info := r.Info()
	info.Frames = len(frames)
	if len(frames) == 0 {
		return nil, fmt.Errorf("input %s: no frames", in)
	}
	return &memAt{info: info, frames: frames}, nil
}

// memAt is a sequence held in memory.
type memAt struct {
	info   Info
	frames []*image.RGBA
}

func (m *memAt) Info() Info { return m.info }

func (m *memAt) ReadFrameAt(i int, dst *image.RGBA) error {
	if i < 0 || i >= len(m.frames) {
		return fmt.Errorf("%s: frame %d: the input has frames 0..%d", m.info.Name, i, len(m.frames)-1)
	}
	if err := checkDst(m.info, dst); err != nil {
		return err
	}
	copy(dst.Pix, m.frames[i].Pix)
	return nil
}

func (m *memAt) Close() error { return nil }

func checkDst(info Info, dst *image.RGBA) error {
	if b := dst.Bounds(); b.Min != (image.Point{}) || b.Dx() != info.Width || b.Dy() != info.Height || dst.Stride != 4*info.Width {
		return fmt.Errorf("%s: destination is %dx%d, frames are %dx%d", info.Name, b.Dx(), b.Dy(), info.Width, info.Height)
	}
	return nil
}

// fileAt reads fixed-size frames at offsets of a file (.npy data or raw
// RGB24), one frame's bytes at a time.
type fileAt struct {
	info     Info
	f        *os.File
	offset   int64
	channels int
	remove   string // a spooled temporary file to delete on Close
}

func openNPYAt(path string) (Random, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("input %s: %w", path, unwrapPath(err))
	}
	dims, n, err := readNPYHeader(f)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	s, err := shapeOf(dims, MaxFramePixels)
	if err == nil {
		err = checkSize(s.Width, s.Height)
	}
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	want := int64(s.Frames) * int64(s.FrameBytes())
	if have := st.Size() - int64(n); have != want {
		f.Close()
		return nil, fmt.Errorf("%s: shape %s needs %d bytes of data, the file holds %d", path, fmtDims(dims), want, have)
	}
	if s.Frames == 0 {
		f.Close()
		return nil, fmt.Errorf("%s: the array holds no frames", path)
	}
	return &fileAt{info: Info{Name: path, Width: s.Width, Height: s.Height, Channels: s.Channels, Frames: s.Frames},
		f: f, offset: int64(n), channels: s.Channels}, nil
}

func openRawAt(path, name string, w, h int, remove *string) (Random, error) {
	if w == 0 && h == 0 {
		return nil, fmt.Errorf("%s: raw RGB24 input needs the frame size (--size WxH)", name)
	}
	if err := checkSize(w, h); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("input %s: %w", name, unwrapPath(err))
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	fb := int64(w * h * 3)
	if st.Size() == 0 {
		f.Close()
		return nil, fmt.Errorf("%s: no frames (empty input)", name)
	}
	if st.Size()%fb != 0 {
		f.Close()
		return nil, fmt.Errorf("%s: trailing partial frame: %d bytes after %d whole frames of %dx%d", name, st.Size()%fb, st.Size()/fb, w, h)
	}
	fa := &fileAt{info: Info{Name: name, Width: w, Height: h, Channels: 3, Frames: int(st.Size() / fb)}, f: f, channels: 3}
	if remove != nil {
		fa.remove = *remove
	}
	return fa, nil
}

// spoolStdin copies raw RGB24 frames from stdin to a temporary file.
func spoolStdin(opt Options) (Random, error) {
	src := opt.Stdin
	if src == nil {
		src = os.Stdin
	}
	if opt.Width == 0 && opt.Height == 0 {
		return nil, errors.New("stdin: raw RGB24 input needs the frame size (--size WxH)")
	}
	tmp, err := os.CreateTemp("", "tilebench-stdin-*.rgb")
	if err != nil {
		return nil, fmt.Errorf("stdin: %w", err)
	}
	name := tmp.Name()
	_, err = io.Copy(tmp, src)
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		os.Remove(name)
		return nil, fmt.Errorf("stdin: %w", err)
	}
	r, err := openRawAt(name, "stdin", opt.Width, opt.Height, &name)
	if err != nil {
		os.Remove(name)
	}
	return r, err
}

func (a *fileAt) Info() Info { return a.info }

func (a *fileAt) ReadFrameAt(i int, dst *image.RGBA) error {
	if i < 0 || i >= a.info.Frames {
		return fmt.Errorf("%s: frame %d: the input has frames 0..%d", a.info.Name, i, a.info.Frames-1)
	}
	if err := checkDst(a.info, dst); err != nil {
		return err
	}
	w, h, c := a.info.Width, a.info.Height, a.channels
	fb := w * h * c
	bp := rowPool.Get().(*[]byte)
	if cap(*bp) < fb {
		*bp = make([]byte, fb)
	}
	buf := (*bp)[:fb]
	defer rowPool.Put(bp)
	if _, err := a.f.ReadAt(buf, a.offset+int64(i)*int64(fb)); err != nil {
		return fmt.Errorf("%s: frame %d of %d: %w", a.info.Name, i, a.info.Frames, noEOF(err))
	}
	expandRow(dst.Pix[:4*w*h], buf, c) // rows are back to back in both
	return nil
}

// BytesAt reads the stored bytes of len(dst)/frame-size frames from i
// (Packed).
func (a *fileAt) BytesAt(i int, dst []byte) error {
	fb := a.info.Width * a.info.Height * a.channels
	n := len(dst) / fb
	if len(dst) != n*fb || n == 0 {
		return fmt.Errorf("%s: a buffer of %d bytes for frames of %d bytes", a.info.Name, len(dst), fb)
	}
	if i < 0 || i+n > a.info.Frames {
		return fmt.Errorf("%s: frames %d..%d: the input has frames 0..%d", a.info.Name, i, i+n-1, a.info.Frames-1)
	}
	if _, err := a.f.ReadAt(dst, a.offset+int64(i)*int64(fb)); err != nil {
		return fmt.Errorf("%s: frames %d..%d of %d: %w", a.info.Name, i, i+n-1, a.info.Frames, noEOF(err))
	}
	return nil
}

// Stored returns the file and offset of frames i..i+n-1 (Packed).
func (a *fileAt) Stored(i, n int) (*os.File, int64, error) {
	if n < 1 || i < 0 || i+n > a.info.Frames {
		return nil, 0, fmt.Errorf("%s: frames %d..%d: the input has frames 0..%d", a.info.Name, i, i+n-1, a.info.Frames-1)
	}
	return a.f, a.offset + int64(i)*int64(a.info.Width*a.info.Height*a.channels), nil
}

// rowPool holds frame-sized read buffers, so that concurrent
// ReadFrameAt calls allocate nothing in steady state.
var rowPool = sync.Pool{New: func() any { return new([]byte) }}

func (a *fileAt) Close() error {
	err := a.f.Close()
	if a.remove != "" {
		os.Remove(a.remove)
	}
	return err
}

// folderAt decodes one frame file per call.
type folderAt struct {
	info  Info
	paths []string
}

func newFolderAt(l *fileList) (Random, error) {
	for i, p := range l.paths {
		f, err := os.Open(p)
		if err != nil {
			return nil, fmt.Errorf("frame %d (%s): %w", i, p, unwrapPath(err))
		}
		cfg, _, err := image.DecodeConfig(f)
		f.Close()
		if err != nil {
			return nil, fmt.Errorf("frame %d (%s): %w", i, p, err)
		}
		if cfg.Width != l.info.Width || cfg.Height != l.info.Height {
			return nil, fmt.Errorf("frame %d (%s) is %dx%d, but frame 0 (%s) is %dx%d: all frames must have one size",
				i, p, cfg.Width, cfg.Height, l.paths[0], l.info.Width, l.info.Height)
		}
	}
	return &folderAt{info: l.info, paths: l.paths}, nil
}

func (d *folderAt) Info() Info { return d.info }

func (d *folderAt) ReadFrameAt(i int, dst *image.RGBA) error {
	if i < 0 || i >= len(d.paths) {
		return fmt.Errorf("%s: frame %d: the input has frames 0..%d", d.info.Name, i, len(d.paths)-1)
	}
	if err := checkDst(d.info, dst); err != nil {
		return err
	}
	l := &fileList{info: d.info, paths: d.paths, i: i, frame: dst}
	_, err := l.Next()
	return err
}

func (d *folderAt) Close() error { return nil }
