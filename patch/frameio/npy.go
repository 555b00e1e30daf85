package frameio

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	"io"
	"os"
	"strconv"
	"strings"
)

// Limits on .npy input, checked before anything is allocated.
const (
	// maxNPYHeader is the largest header (the Python dict literal) read.
	// NumPy itself refuses headers over 10000 bytes by default.
	maxNPYHeader = 65535
	// MaxSide is the largest frame width or height accepted.
	MaxSide = 16384
	// MaxFramePixels is the default pixel budget: the largest frame area
	// (width·height) accepted unless Options.MaxPixels says otherwise.
	MaxFramePixels = 1 << 25
	// MaxFrames is the largest frame count accepted.
	MaxFrames = 1 << 24
)

// npyMagic opens every .npy file (NEP 1).
const npyMagic = "\x93NUMPY"

// npyGrowthDigits is the room NumPy (≥ 1.23, numpy/lib/format.py
// GROWTH_AXIS_MAX_DIGITS) leaves after the dict so that the first axis can
// be rewritten in place; we leave the same, so that our headers are byte
// for byte NumPy's and a writer that does not know its frame count in
// advance can patch it at the end.
const npyGrowthDigits = 21

// Shape is the geometry of a uint8 frame array.
type Shape struct {
	// Frames, Height, Width and Channels (1 or 3) of the sequence.
	Frames, Height, Width, Channels int
	// Dims is the array's shape as stored in the file.
	Dims []int
}

// FrameBytes is the size of one frame's data: Height·Width·Channels.
func (s Shape) FrameBytes() int { return s.Height * s.Width * s.Channels }

// shapeOf reads an array shape as a frame sequence:
//
//	4 axes T×H×W×C with C 1 or 3
//	3 axes H×W×C when the last axis is 1 or 3 (one frame),
//	       T×H×W otherwise (grey frames)
//
// and refuses anything else, or sizes beyond MaxSide, maxPixels and
// MaxFrames, or empty axes.
func shapeOf(dims []int, maxPixels int) (Shape, error) {
	s := Shape{Dims: dims}
	switch {
	case len(dims) == 4:
		s.Frames, s.Height, s.Width, s.Channels = dims[0], dims[1], dims[2], dims[3]
	case len(dims) == 3 && (dims[2] == 1 || dims[2] == 3):
		s.Frames, s.Height, s.Width, s.Channels = 1, dims[0], dims[1], dims[2]
	case len(dims) == 3:
		s.Frames, s.Height, s.Width, s.Channels = dims[0], dims[1], dims[2], 1
	default:
		return Shape{}, fmt.Errorf("shape %s: want T×H×W×C, H×W×C or T×H×W", fmtDims(dims))
	}
	switch {
	case s.Channels != 1 && s.Channels != 3:
		return Shape{}, fmt.Errorf("shape %s: %d channels, want 1 or 3", fmtDims(dims), s.Channels)
	case s.Frames <= 0 || s.Height <= 0 || s.Width <= 0:
		return Shape{}, fmt.Errorf("shape %s: holds no pixels", fmtDims(dims))
	case s.Frames > MaxFrames:
		return Shape{}, fmt.Errorf("shape %s: more than %d frames", fmtDims(dims), MaxFrames)
	}
	if err := checkBudget(s.Width, s.Height, maxPixels); err != nil {
		return Shape{}, fmt.Errorf("shape %s: %w", fmtDims(dims), err)
	}
	return s, nil
}

// fmtDims prints dims the way Python prints a shape tuple.
func fmtDims(dims []int) string {
	var b strings.Builder
	b.WriteByte('(')
	for i, d := range dims {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Itoa(d))
	}
	if len(dims) == 1 {
		b.WriteByte(',')
	}
	b.WriteByte(')')
	return b.String()
}

// NPYHeader returns the complete preamble of a C-order uint8 .npy file of
// the given shape, version 1.0, exactly as NumPy writes it (NEP 1 and
// numpy/lib/format.py): the magic string, the version, the little-endian
// header length, then the dict literal padded with spaces and a final
// newline so that the preamble's length is a multiple of 64.
func NPYHeader(dims []int) []byte {
	return appendNPYHeader(nil, "|u1", dims)
}

// NPYHeaderOf is NPYHeader for an array of any NumPy type descr ('<f4',
// '<i2', '|b1', ...). Like NPYHeader it leaves room after the dict for a
// first axis of up to 21 digits, so that a writer can patch the count in
// place without moving the data.
func NPYHeaderOf(descr string, dims []int) []byte {
	return appendNPYHeader(nil, descr, dims)
}

func appendNPYHeader(dst []byte, descr string, dims []int) []byte {
	dict := "{'descr': '" + descr + "', 'fortran_order': False, 'shape': " + fmtDims(dims) + ", }"
	if len(dims) > 0 {
		dict += strings.Repeat(" ", max(0, npyGrowthDigits-len(strconv.Itoa(dims[0]))))
	}
	hlen := len(dict) + 1 // the newline
	pad := 64 - (len(npyMagic)+2+2+hlen)%64
	dst = append(dst, npyMagic...)
	dst = append(dst, 1, 0)
	dst = binary.LittleEndian.AppendUint16(dst, uint16(hlen+pad))
	dst = append(dst, dict...)
	for range pad {
		dst = append(dst, ' ')
	}
	return append(dst, '\n')
}

// readNPYHeader reads and checks the preamble of a .npy stream (NEP 1,
// versions 1.0, 2.0 and 3.0) and returns the array's shape and the number
// of bytes the preamble took. The header must describe a C-order uint8
// array ('|u1', or '<u1', '>u1', '=u1', 'u1', all the same for one byte);
// it is parsed as the strict subset of Python literals that NumPy writes:
// a dict with exactly the keys descr, fortran_order and shape.
func readNPYHeader(r io.Reader) (dims []int, n int, err error) {
	descr, dims, n, err := ReadNPYArrayHeader(r)
	if err != nil {
		return nil, 0, err
	}
	switch descr {
	case "|u1", "<u1", ">u1", "=u1", "u1":
	default:
		return nil, 0, fmt.Errorf(".npy header: dtype %q: want uint8 ('|u1')", descr)
	}
	return dims, n, nil
}

// ReadNPYArrayHeader reads and checks the preamble of a .npy stream of
// any dtype (NEP 1, versions 1.0, 2.0 and 3.0): it returns the type
// descr as the header spells it ('|b1', '<i8', ...), unchecked, with the
// shape and the preamble's length. The array must be in C order.
func ReadNPYArrayHeader(r io.Reader) (descr string, dims []int, n int, err error) {
	var pre [8]byte
	if _, err := io.ReadFull(r, pre[:]); err != nil {
		return "", nil, 0, fmt.Errorf("not a .npy file: %w", noEOF(err))
	}
	if string(pre[:6]) != npyMagic {
		return "", nil, 0, errors.New("not a .npy file: missing the \\x93NUMPY magic string")
	}
	major, minor := pre[6], pre[7]
	var hlen int
	switch {
	case major == 1 && minor == 0:
		var l [2]byte
		if _, err := io.ReadFull(r, l[:]); err != nil {
			return "", nil, 0, fmt.Errorf(".npy header length: %w", noEOF(err))
		}
		hlen, n = int(binary.LittleEndian.Uint16(l[:])), 10
	case (major == 2 || major == 3) && minor == 0:
		var l [4]byte
		if _, err := io.ReadFull(r, l[:]); err != nil {
			return "", nil, 0, fmt.Errorf(".npy header length: %w", noEOF(err))
		}
		h := binary.LittleEndian.Uint32(l[:])
		if h > maxNPYHeader {
			return "", nil, 0, fmt.Errorf(".npy header of %d bytes is over the %d-byte limit", h, maxNPYHeader)
		}
		hlen, n = int(h), 12
	default:
		return "", nil, 0, fmt.Errorf(".npy format version %d.%d: want 1.0, 2.0 or 3.0", major, minor)
	}
	buf := make([]byte, hlen)
	if _, err := io.ReadFull(r, buf); err != nil {
		return "", nil, 0, fmt.Errorf(".npy header (%d bytes): %w", hlen, noEOF(err))
	}
	descr, dims, err = parseNPYDict(buf)
	if err != nil {
		return "", nil, 0, fmt.Errorf(".npy header: %w", err)
	}
	return descr, dims, n + hlen, nil
}

// noEOF turns a bare io.EOF into io.ErrUnexpectedEOF: inside a file, an
// end is always a truncation.
func noEOF(err error) error {
	if err == io.EOF {
		return io.ErrUnexpectedEOF
	}
	return err
}

// parseNPYDict parses the header dict: "{" key ":" value ("," key ":"
// value)* [","] "}", then only spaces, then a final newline. It returns
// the descr unchecked and the shape.
func parseNPYDict(b []byte) (string, []int, error) {
	if len(b) == 0 || b[len(b)-1] != '\n' {
		return "", nil, errors.New("does not end with a newline")
	}
	p := &pyLex{s: string(b[:len(b)-1])}
	if !p.eat('{') {
		return "", nil, errors.New("does not start with '{'")
	}
	var (
		descr                     string
		dims                      []int
		seenD, seenF, seenS, done bool
	)
	for !done {
		p.space()
		if p.eat('}') {
			break
		}
		key, err := p.str()
		if err != nil {
			return "", nil, fmt.Errorf("key: %w", err)
		}
		p.space()
		if !p.eat(':') {
			return "", nil, fmt.Errorf("key %q: want ':' at byte %d", key, p.i)
		}
		p.space()
		switch key {
		case "descr":
			if seenD {
				return "", nil, errors.New("key 'descr' given twice")
			}
			seenD = true
			if descr, err = p.str(); err != nil {
				return "", nil, fmt.Errorf("descr: %w", err)
			}
		case "fortran_order":
			if seenF {
				return "", nil, errors.New("key 'fortran_order' given twice")
			}
			seenF = true
			switch w := p.word(); w {
			case "False":
			case "True":
				return "", nil, errors.New("fortran_order True: only C-order arrays are read")
			default:
				return "", nil, fmt.Errorf("fortran_order %q: want True or False", w)
			}
		case "shape":
			if seenS {
				return "", nil, errors.New("key 'shape' given twice")
			}
			seenS = true
			if dims, err = p.tuple(); err != nil {
				return "", nil, fmt.Errorf("shape: %w", err)
			}
		default:
			return "", nil, fmt.Errorf("unexpected key %q", key)
		}
		p.space()
		if !p.eat(',') {
			p.space()
			if !p.eat('}') {
				return "", nil, fmt.Errorf("want ',' or '}' at byte %d", p.i)
			}
			done = true
		}
	}
	for ; p.i < len(p.s); p.i++ {
		if p.s[p.i] != ' ' {
			return "", nil, fmt.Errorf("unexpected byte %q after the dict", p.s[p.i])
		}
	}
	if !seenD || !seenF || !seenS {
		return "", nil, errors.New("want the keys 'descr', 'fortran_order' and 'shape'")
	}
	return descr, dims, nil
}

// pyLex scans the Python literal subset of a .npy header.
type pyLex struct {
	s string
	i int
}

func (p *pyLex) space() {
	for p.i < len(p.s) && p.s[p.i] == ' ' {
		p.i++
	}
}

func (p *pyLex) eat(c byte) bool {
	if p.i < len(p.s) && p.s[p.i] == c {
		p.i++
		return true
	}
	return false
}

// str reads a quoted string without escapes.
func (p *pyLex) str() (string, error) {
	if p.i >= len(p.s) || (p.s[p.i] != '\'' && p.s[p.i] != '"') {
		return "", fmt.Errorf("want a quoted string at byte %d", p.i)
	}
	q := p.s[p.i]
	end := strings.IndexByte(p.s[p.i+1:], q)
	if end < 0 {
		return "", errors.New("unterminated string")
	}
	v := p.s[p.i+1 : p.i+1+end]
	if strings.ContainsAny(v, "\\\n") {
		return "", fmt.Errorf("string %q: escapes are not allowed", v)
	}
	p.i += end + 2
	return v, nil
}

// word reads a run of ASCII letters.
func (p *pyLex) word() string {
	j := p.i
	for j < len(p.s) && (p.s[j] >= 'a' && p.s[j] <= 'z' || p.s[j] >= 'A' && p.s[j] <= 'Z') {
		j++
	}
	w := p.s[p.i:j]
	p.i = j
	return w
}

// tuple reads "(" [int ("," int)* [","]] ")" with at most 8 entries, each
// a plain decimal of at most 10 digits.
func (p *pyLex) tuple() ([]int, error) {
	if !p.eat('(') {
		return nil, fmt.Errorf("want '(' at byte %d", p.i)
	}
	var dims []int
	for {
		p.space()
		if p.eat(')') {
			// "()" or a list that ended in a comma.
			return dims, nil
		}
		j := p.i
		for j < len(p.s) && isDigit(p.s[j]) {
			j++
		}
		if j == p.i || j-p.i > 10 {
			return nil, fmt.Errorf("want an axis length at byte %d", p.i)
		}
		v, _ := strconv.Atoi(p.s[p.i:j])
		if v > 1<<31-1 {
			return nil, fmt.Errorf("axis length %d too large", v)
		}
		p.i = j
		if dims = append(dims, v); len(dims) > 8 {
			return nil, errors.New("more than 8 axes")
		}
		p.space()
		if !p.eat(',') {
			p.space()
			if !p.eat(')') {
				return nil, fmt.Errorf("want ',' or ')' at byte %d", p.i)
			}
			if len(dims) == 1 {
				return nil, errors.New("a one-axis shape needs a trailing comma")
			}
			return dims, nil
		}
	}
}

// NPYReader reads the frames of a uint8 .npy array one at a time.
type NPYReader struct {
	name  string
	r     *bufio.Reader
	c     io.Closer
	shape Shape
	next  int
	row   []byte
	frame *image.RGBA
}

// NewNPYReader reads the header of a .npy stream and returns a reader of
// its frames; name is used in error messages. When r can tell its
// remaining length (an *os.File, a *bytes.Reader, ...), a data size that
// does not match the shape is refused at once.
func NewNPYReader(r io.Reader, name string) (*NPYReader, error) {
	return newNPYReader(r, name, MaxFramePixels)
}

func newNPYReader(r io.Reader, name string, maxPixels int) (*NPYReader, error) {
	dims, _, err := readNPYHeader(r)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	s, err := shapeOf(dims, maxPixels)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	want := int64(s.Frames) * int64(s.FrameBytes())
	if have, ok := remaining(r); ok && have != want {
		return nil, fmt.Errorf("%s: shape %s needs %d bytes of data, the file holds %d", name, fmtDims(dims), want, have)
	}
	return &NPYReader{name: name, r: bufio.NewReaderSize(r, 64<<10), shape: s}, nil
}

// remaining returns how many bytes r has left, when it can tell.
func remaining(r io.Reader) (int64, bool) {
	switch v := r.(type) {
	case interface{ Len() int }:
		return int64(v.Len()), true
	case *os.File:
		st, err := v.Stat()
		if err != nil || !st.Mode().IsRegular() {
			return 0, false
		}
		off, err := v.Seek(0, io.SeekCurrent)
		if err != nil {
			return 0, false
		}
		return st.Size() - off, true
	}
	return 0, false
}

// Shape returns the array's geometry.
func (n *NPYReader) Shape() Shape { return n.shape }

// Info describes the sequence.
func (n *NPYReader) Info() Info {
	return Info{Name: n.name, Width: n.shape.Width, Height: n.shape.Height, Channels: n.shape.Channels, Frames: n.shape.Frames}
}

// Next returns the next frame, or io.EOF after the last. The image is
// reused by the following call.
func (n *NPYReader) Next() (*image.RGBA, error) {
	if n.frame == nil {
		n.frame = image.NewRGBA(image.Rect(0, 0, n.shape.Width, n.shape.Height))
	}
	if err := n.ReadFrame(n.frame); err != nil {
		return nil, err
	}
	return n.frame, nil
}

// ReadFrame reads the next frame into dst, which must be Width×Height.
// It returns io.EOF after the last frame, and an error if bytes follow it.
func (n *NPYReader) ReadFrame(dst *image.RGBA) error {
	s := n.shape
	if n.next >= s.Frames {
		if _, err := n.r.ReadByte(); err == nil {
			return fmt.Errorf("%s: bytes after the last of %d frames", n.name, s.Frames)
		}
		return io.EOF
	}
	if b := dst.Bounds(); b.Dx() != s.Width || b.Dy() != s.Height {
		return fmt.Errorf("%s: destination is %dx%d, frames are %dx%d", n.name, b.Dx(), b.Dy(), s.Width, s.Height)
	}
	rowBytes := s.Width * s.Channels
	if cap(n.row) < rowBytes {
		n.row = make([]byte, rowBytes)
	}
	row := n.row[:rowBytes]
	for y := 0; y < s.Height; y++ {
		if _, err := io.ReadFull(n.r, row); err != nil {
			return fmt.Errorf("%s: frame %d of %d: %w", n.name, n.next, s.Frames, noEOF(err))
		}
		o := dst.PixOffset(dst.Rect.Min.X, dst.Rect.Min.Y+y)
		expandRow(dst.Pix[o:o+4*s.Width], row, s.Channels)
	}
	n.next++
	return nil
}

// expandRow turns one row of RGB (c 3) or grey (c 1) bytes into opaque
// RGBA bytes.
func expandRow(out, row []byte, c int) {
	if c == 3 {
		for x := 0; x < len(out)/4; x++ {
			s := row[3*x : 3*x+3 : 3*x+3]
			d := out[4*x : 4*x+4 : 4*x+4]
			d[0], d[1], d[2], d[3] = s[0], s[1], s[2], 0xff
		}
		return
	}
	for x := 0; x < len(out)/4; x++ {
		v := row[x]
		d := out[4*x : 4*x+4 : 4*x+4]
		d[0], d[1], d[2], d[3] = v, v, v, 0xff
	}
}

// Close closes the underlying file if the reader was opened by Open.
func (n *NPYReader) Close() error {
	if n.c != nil {
		return n.c.Close()
	}
	return nil
}

// NPYWriter writes frames as a C-order uint8 array T×H×W×C (.npy,
// NEP 1, version 1.0).
type NPYWriter struct {
	w                 io.Writer
	width, height, ch int
	frames, n         int
	buf               []byte
}

// NewNPYWriter writes the header of a frames×height×width×channels array
// to w and returns a writer for its frames. If frames is negative the
// count is not known yet: the header is written for 0 frames and patched
// in place by Close, which then needs w to be an io.WriteSeeker (an
// *os.File is one).
func NewNPYWriter(w io.Writer, width, height, channels, frames int) (*NPYWriter, error) {
	if channels != 1 && channels != 3 {
		return nil, fmt.Errorf("npy: %d channels, want 1 or 3", channels)
	}
	if width <= 0 || height <= 0 {
		return nil, fmt.Errorf("npy: frame size %dx%d must be positive", width, height)
	}
	nw := &NPYWriter{w: w, width: width, height: height, ch: channels, frames: frames,
		buf: make([]byte, 0, width*height*channels)}
	if _, err := w.Write(NPYHeader([]int{max(frames, 0), height, width, channels})); err != nil {
		return nil, fmt.Errorf("npy: %w", err)
	}
	return nw, nil
}

// WriteFrame appends one frame. img must be width×height; with one
// channel its red byte is written.
func (n *NPYWriter) WriteFrame(img *image.RGBA) error {
	b := img.Bounds()
	if b.Dx() != n.width || b.Dy() != n.height {
		return fmt.Errorf("npy: frame %d is %dx%d, the array's frames are %dx%d", n.n, b.Dx(), b.Dy(), n.width, n.height)
	}
	if n.frames >= 0 && n.n >= n.frames {
		return fmt.Errorf("npy: more than the %d frames declared", n.frames)
	}
	buf := n.buf[:0]
	for y := 0; y < n.height; y++ {
		o := img.PixOffset(b.Min.X, b.Min.Y+y)
		row := img.Pix[o : o+4*n.width]
		if n.ch == 3 {
			for x := 0; x < len(row); x += 4 {
				buf = append(buf, row[x], row[x+1], row[x+2])
			}
		} else {
			for x := 0; x < len(row); x += 4 {
				buf = append(buf, row[x])
			}
		}
	}
	n.buf = buf
	if _, err := n.w.Write(buf); err != nil {
		return fmt.Errorf("npy: frame %d: %w", n.n, err)
	}
	n.n++
	return nil
}

// Frames is the number of frames written so far.
func (n *NPYWriter) Frames() int { return n.n }

// Close finishes the array: it checks that the declared number of frames
// was written or, for an unknown count, rewrites the header with the
// count. It does not close w.
func (n *NPYWriter) Close() error {
	if n.frames >= 0 {
		if n.n != n.frames {
			return fmt.Errorf("npy: %d frames written, %d declared", n.n, n.frames)
		}
		return nil
	}
	if n.n == 0 {
		return errors.New("npy: no frames written")
	}
	ws, ok := n.w.(io.WriteSeeker)
	if !ok {
		return errors.New("npy: an unknown frame count needs a seekable file")
	}
	end, err := ws.Seek(0, io.SeekCurrent)
	if err == nil {
		_, err = ws.Seek(0, io.SeekStart)
	}
	if err == nil {
		_, err = ws.Write(NPYHeader([]int{n.n, n.height, n.width, n.ch}))
	}
	if err == nil {
		_, err = ws.Seek(end, io.SeekStart)
	}
	if err != nil {
		return fmt.Errorf("npy: patch header: %w", err)
	}
	return nil
}
