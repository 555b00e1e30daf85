package frameio

import (
	"errors"
	"fmt"
	"image"
	"image/draw"
	_ "image/jpeg" // register the JPEG decoder for frame folders
	_ "image/png"  // register the PNG decoder for frame folders
	"io"
	"os"
	"path/filepath"
	"strings"
)

// Info describes a frame sequence.
type Info struct {
	// Name is the input as the user named it, for messages.
	Name string
	// Width and Height are the frame size in pixels.
	Width, Height int
	// Channels is 1 for grey input (a .npy array with one channel or
	// none), 3 otherwise.
	Channels int
	// Frames is the number of frames, or -1 when it is not known before
	// the end (a raw stream).
	Frames int
}

// Reader hands out the frames of a sequence one at a time.
type Reader interface {
	// Info describes the sequence; it is known as soon as the reader is
	// open.
	Info() Info
	// Next returns the next frame, opaque, Width×Height with bounds at
	// the origin, or io.EOF after the last frame. The image belongs to
	// the reader: it is valid until the next call and must not be
	// changed. Any other error names the input (and the file).
	Next() (*image.RGBA, error)
	// Close releases the input.
	Close() error
}

// Options are the settings of Open that the input itself cannot tell.
// The zero value is useful.
type Options struct {
	// Width and Height are the frame size of raw RGB24 input (required
	// there) and of built-in scenes (default 96×96).
	Width, Height int
	// Frames is the length of a built-in scene (default 60).
	Frames int
	// Stdin is what "-" reads raw RGB24 frames from (default os.Stdin).
	Stdin io.Reader
	// MaxPixels is the pixel budget: the largest frame area
	// (width·height) read from any input, checked from each file's
	// header before its pixels are decoded (default MaxFramePixels,
	// 2^25 ≈ 33.5 million pixels; an animated GIF, decoded whole, may
	// hold 4·MaxPixels pixels over all its frames). Sides stay limited
	// to MaxSide.
	MaxPixels int
}

// Open opens the frame sequence in:
//
//	DIR              a folder of .png/.jpg/.jpeg frames in natural order
//	FILE.png|.jpg    a single frame
//	FILE.gif         an animated GIF, frames composited
//	FILE.npy         a uint8 array T×H×W×C, H×W×C or T×H×W (grey)
//	FILE.rgb|.raw    raw RGB24 frames of opt.Width×opt.Height
//	-                raw RGB24 frames on opt.Stdin
//	builtin:NAME     a built-in synthetic scene, "drift" or "checker"
func Open(in string, opt Options) (Reader, error) {
	switch {
	case in == "":
		return nil, errors.New("no input given")
	case strings.HasPrefix(in, "builtin:"):
		w, h, n := opt.Width, opt.Height, opt.Frames
		if w == 0 && h == 0 {
			w, h = 96, 96
		}
		if n == 0 {
			n = 60
		}
		return Builtin(strings.TrimPrefix(in, "builtin:"), n, w, h)
	case in == "-":
		src := opt.Stdin
		if src == nil {
			src = os.Stdin
		}
		return newRawReader(io.NopCloser(src), "stdin", opt.Width, opt.Height, opt.budget())
	}
	st, err := os.Stat(in)
	if err != nil {
		return nil, fmt.Errorf("input %s: %w", in, unwrapPath(err))
	}
	if st.IsDir() {
		return openDir(in, opt.budget())
	}
	switch strings.ToLower(filepath.Ext(in)) {
	case ".png", ".jpg", ".jpeg":
		return newFileList(in, []string{in}, opt.budget())
	case ".gif":
		return openGIF(in, opt.budget())
	case ".npy":
		f, err := os.Open(in)
		if err != nil {
			return nil, fmt.Errorf("input %s: %w", in, unwrapPath(err))
		}
		r, err := newNPYReader(f, in, opt.budget())
		if err != nil {
			f.Close()
			return nil, err
		}
		r.c = f
		return r, nil
	case ".rgb", ".raw":
		f, err := os.Open(in)
		if err != nil {
			return nil, fmt.Errorf("input %s: %w", in, unwrapPath(err))
		}
		r, err := newRawReader(f, in, opt.Width, opt.Height, opt.budget())
		if err != nil {
			f.Close()
		}
		return r, err
	}
	return nil, fmt.Errorf("input %s: not a folder, .png, .jpg, .gif, .npy, .rgb/.raw, - or builtin:NAME", in)
}

// unwrapPath drops the *PathError wrapper whose message repeats the path.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// ReadAll reads every remaining frame of r into new images.
func ReadAll(r Reader) ([]*image.RGBA, error) {
	var out []*image.RGBA
	for {
		f, err := r.Next()
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		c := image.NewRGBA(f.Bounds())
		copy(c.Pix, f.Pix)
		out = append(out, c)
	}
}

// frameExt reports whether name is a frame file a folder reader takes.
func frameExt(name string) bool {
	switch strings.ToLower(filepath.Ext(name)) {
	case ".png", ".jpg", ".jpeg":
		return true
	}
	return false
}

// openDir lists the frame files of dir (hidden files and other
// extensions are ignored) in natural order. When some are named
// frame-NNNNN.png (an export's sequence), only those are read.
func openDir(dir string, maxPixels int) (Reader, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("input %s: %w", dir, unwrapPath(err))
	}
	var names []string
	for _, e := range ents {
		if e.IsDir() || strings.HasPrefix(e.Name(), ".") || !frameExt(e.Name()) {
			continue
		}
		names = append(names, e.Name())
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("input %s: folder holds no .png or .jpg frames", dir)
	}
	// A folder tilebench exported into also holds sheet.png: read only
	// the exported frame-NNNNN.png sequence there.
	var exported []string
	for _, n := range names {
		if frameRe.MatchString(n) {
			exported = append(exported, n)
		}
	}
	if len(exported) > 0 {
		names = exported
	}
	SortNatural(names)
	paths := make([]string, len(names))
	for i, n := range names {
		paths[i] = filepath.Join(dir, n)
	}
	return newFileList(dir, paths, maxPixels)
}

// fileList reads image files one after another. Every file's header is
// read before its pixels: a frame of another size than the first (and so
// one over the pixel budget the first passed) is refused undecoded.
type fileList struct {
	info  Info
	paths []string
	i     int
	frame *image.RGBA
}

func newFileList(name string, paths []string, maxPixels int) (*fileList, error) {
	f, err := os.Open(paths[0])
	if err != nil {
		return nil, fmt.Errorf("frame %s: %w", paths[0], unwrapPath(err))
	}
	defer f.Close()
	cfg, _, err := image.DecodeConfig(f)
	if err != nil {
		return nil, fmt.Errorf("frame %s: %w", paths[0], err)
	}
	if err := checkBudget(cfg.Width, cfg.Height, maxPixels); err != nil {
		return nil, fmt.Errorf("frame %s: %w", paths[0], err)
	}
	return &fileList{
		info:  Info{Name: name, Width: cfg.Width, Height: cfg.Height, Channels: 3, Frames: len(paths)},
		paths: paths,
	}, nil
}

// checkSize applies MaxSide and the default pixel budget.
func checkSize(w, h int) error { return checkBudget(w, h, MaxFramePixels) }

func (l *fileList) Info() Info { return l.info }

func (l *fileList) Next() (*image.RGBA, error) {
	if l.i >= len(l.paths) {
		return nil, io.EOF
	}
	path := l.paths[l.i]
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("frame %s: %w", path, unwrapPath(err))
	}
	img, err := decodeSized(f, l.info.Width, l.info.Height)
	f.Close()
	if err != nil {
		var sz sizeError
		if errors.As(err, &sz) {
			return nil, fmt.Errorf("frame %s is %dx%d, but %s is %dx%d: all frames must have one size",
				path, sz.w, sz.h, l.paths[0], l.info.Width, l.info.Height)
		}
		return nil, fmt.Errorf("frame %s: %w", path, err)
	}
	b := img.Bounds()
	if l.frame == nil {
		l.frame = image.NewRGBA(image.Rect(0, 0, l.info.Width, l.info.Height))
	}
	if o, ok := img.(interface{ Opaque() bool }); ok && o.Opaque() {
		// Opaque (every JPEG, most PNGs): a plain conversion, which
		// image/draw does fast for the stdlib's pixel types.
		draw.Draw(l.frame, l.frame.Bounds(), img, b.Min, draw.Src)
	} else {
		// Composite over opaque black, the way the tokenizer reads RGBA.
		draw.Draw(l.frame, l.frame.Bounds(), image.Black, image.Point{}, draw.Src)
		draw.Draw(l.frame, l.frame.Bounds(), img, b.Min, draw.Over)
	}
	l.i++
	return l.frame, nil
}

func (l *fileList) Close() error { return nil }

// rawReader reads raw RGB24 frames (3 bytes a pixel, row-major, no
// header), as a video decoder writes them when asked for raw 24-bit RGB.
type rawReader struct {
	name  string
	r     io.ReadCloser
	info  Info
	buf   []byte
	frame *image.RGBA
	n     int
}

// newRawReader reads width×height RGB24 frames from r until its end; a
// trailing partial frame is an error, and so is an empty stream.
func newRawReader(r io.ReadCloser, name string, width, height, maxPixels int) (*rawReader, error) {
	if width == 0 && height == 0 {
		return nil, fmt.Errorf("%s: raw RGB24 input needs the frame size (--size WxH)", name)
	}
	if err := checkBudget(width, height, maxPixels); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return &rawReader{name: name, r: r, info: Info{Name: name, Width: width, Height: height, Channels: 3, Frames: -1}}, nil
}

// Info describes the stream; Frames is -1 (not known in advance).
func (r *rawReader) Info() Info { return r.info }

// Next reads the next frame.
func (r *rawReader) Next() (*image.RGBA, error) {
	w, h := r.info.Width, r.info.Height
	if r.buf == nil {
		r.buf = make([]byte, w*h*3)
		r.frame = image.NewRGBA(image.Rect(0, 0, w, h))
	}
	n, err := io.ReadFull(r.r, r.buf)
	switch {
	case err == io.EOF && r.n == 0:
		return nil, fmt.Errorf("%s: no frames (empty input)", r.name)
	case err == io.EOF:
		return nil, io.EOF
	case err == io.ErrUnexpectedEOF:
		return nil, fmt.Errorf("%s: trailing partial frame: %d of %d bytes after %d whole frames of %dx%d", r.name, n, len(r.buf), r.n, w, h)
	case err != nil:
		return nil, fmt.Errorf("%s: frame %d: %w", r.name, r.n, err)
	}
	expandRow(r.frame.Pix, r.buf, 3) // both are whole frames, rows back to back
	r.n++
	return r.frame, nil
}

// Close closes the stream.
func (r *rawReader) Close() error { return r.r.Close() }

// sizeError says a file's header gives another size than wanted.
type sizeError struct{ w, h int }

func (e sizeError) Error() string { return fmt.Sprintf("image is %dx%d", e.w, e.h) }

// decodeSized reads the header of the image in f and decodes its pixels
// only when it is w×h; otherwise it returns a sizeError, having
// allocated nothing for the pixels.
func decodeSized(f io.ReadSeeker, w, h int) (image.Image, error) {
	cfg, _, err := image.DecodeConfig(f)
	if err != nil {
		return nil, err
	}
	if cfg.Width != w || cfg.Height != h {
		return nil, sizeError{cfg.Width, cfg.Height}
	}
	if _, err := f.Seek(0, io.SeekStart); err != nil {
		return nil, err
	}
	img, _, err := image.Decode(f)
	if err != nil {
		return nil, err
	}
	if b := img.Bounds(); b.Dx() != w || b.Dy() != h {
		return nil, sizeError{b.Dx(), b.Dy()}
	}
	return img, nil
}
