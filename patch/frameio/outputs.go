package frameio

import (
	"errors"
	"fmt"
	"image"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"tilebench/internal/atomicfile"
)

// The output formats, in the spelling of the CLI's --as.
const (
	AsPNG   = "png"   // frame-NNNNN.png, one file a frame
	AsNPY   = "npy"   // frames.npy
	AsGIF   = "gif"   // frames.gif
	AsSheet = "sheet" // sheet.png
)

// ParseFormats reads a comma-separated list of output formats.
func ParseFormats(s string) ([]string, error) {
	var out []string
	seen := map[string]bool{}
	for _, f := range strings.Split(s, ",") {
		f = strings.ToLower(strings.TrimSpace(f))
		switch f {
		case AsPNG, AsNPY, AsGIF, AsSheet:
		default:
			return nil, fmt.Errorf("output format %q: want png, npy, gif or sheet", f)
		}
		if !seen[f] {
			seen[f] = true
			out = append(out, f)
		}
	}
	return out, nil
}

// FrameName is the file name of frame i in a PNG sequence.
func FrameName(i int) string { return fmt.Sprintf("frame-%05d.png", i) }

// OutputConfig says what an Outputs set writes. The zero value writes
// nothing; set Dir and Formats.
type OutputConfig struct {
	// Dir is the output folder; it is created if missing.
	Dir string
	// Formats lists what to write: AsPNG, AsNPY, AsGIF, AsSheet.
	Formats []string
	// Frames is the number of frames that will be added, or -1 (or 0)
	// when not known in advance.
	Frames int
	// Channels of the .npy array: 1 or 3 (0 means 3).
	Channels int
	// GIFDelay is the time a GIF frame is shown, in hundredths of a
	// second (0 means 10, i.e. 10 frames a second).
	GIFDelay int
	// GIFDither turns on Floyd–Steinberg dithering in the GIF (default:
	// nearest colour of the palette built from the frames; see
	// GIFWriter).
	GIFDither bool
	// Sheet lays out the contact sheet (its Total is set from Frames).
	Sheet SheetConfig
}

// Outputs writes one exported sequence in several formats at once. Files
// appear in Dir only on Commit: the PNG frames are written (atomically)
// to a hidden staging folder and moved in at the end, the .npy goes to a
// temporary file renamed at the end, the GIF and the sheet are encoded at
// the end. Abort removes everything not committed.
type Outputs struct {
	cfg     OutputConfig
	w, h    int
	n       int
	stage   string
	npy     *pending
	npyw    *NPYWriter
	gif     *GIFWriter
	sheet   *Sheet
	written []string
	closed  bool
	made    bool // Dir did not exist before
}

func (o *Outputs) has(f string) bool {
	for _, g := range o.cfg.Formats {
		if g == f {
			return true
		}
	}
	return false
}

// NewOutputs prepares the outputs for frames of width×height.
func NewOutputs(cfg OutputConfig, width, height int) (*Outputs, error) {
	if cfg.Dir == "" {
		return nil, errors.New("no output folder given")
	}
	if cfg.Channels == 0 {
		cfg.Channels = 3
	}
	if cfg.GIFDelay == 0 {
		cfg.GIFDelay = 10
	}
	if cfg.Frames == 0 {
		cfg.Frames = -1
	}
	o := &Outputs{cfg: cfg, w: width, h: height}
	if _, err := os.Stat(cfg.Dir); errors.Is(err, os.ErrNotExist) {
		o.made = true
	}
	if err := os.MkdirAll(cfg.Dir, 0o755); err != nil {
		return nil, fmt.Errorf("output folder %s: %w", cfg.Dir, unwrapPath(err))
	}
	ok := false
	defer func() {
		if !ok {
			o.Abort()
		}
	}()
	if o.has(AsPNG) {
		d, err := os.MkdirTemp(cfg.Dir, ".frames-tmp-")
		if err != nil {
			return nil, fmt.Errorf("output folder %s: %w", cfg.Dir, unwrapPath(err))
		}
		o.stage = d
	}
	if o.has(AsNPY) {
		o.npy = newPending(filepath.Join(cfg.Dir, "frames.npy"))
		err := o.npy.do(func(w io.Writer) error {
			var err error
			o.npyw, err = NewNPYWriter(w, width, height, cfg.Channels, cfg.Frames)
			return err
		})
		if err != nil {
			return nil, err
		}
	}
	if o.has(AsGIF) {
		o.gif = &GIFWriter{Delay: cfg.GIFDelay, Dither: cfg.GIFDither}
	}
	if o.has(AsSheet) {
		sc := cfg.Sheet
		sc.Total = cfg.Frames
		o.sheet = NewSheet(sc)
	}
	ok = true
	return o, nil
}

// Add writes frame number Frames() (its transformed pixels out, and its
// original orig for the contact sheet; orig may be nil without a sheet).
func (o *Outputs) Add(orig, out *image.RGBA) error {
	if o.closed {
		return errors.New("outputs: already committed or aborted")
	}
	if b := out.Bounds(); b.Dx() != o.w || b.Dy() != o.h {
		return fmt.Errorf("outputs: frame %d is %dx%d, want %dx%d", o.n, b.Dx(), b.Dy(), o.w, o.h)
	}
	i := o.n
	if o.stage != "" {
		path := filepath.Join(o.stage, FrameName(i))
		if err := atomicfile.Write(path, func(w io.Writer) error { return pngEncoder.Encode(w, out) }); err != nil {
			return err
		}
	}
	if o.npy != nil {
		if err := o.npy.do(func(io.Writer) error { return o.npyw.WriteFrame(out) }); err != nil {
			return err
		}
	}
	if o.gif != nil {
		if err := o.gif.Add(out); err != nil {
			return err
		}
	}
	if o.sheet != nil && orig != nil {
		o.sheet.Add(i, orig, out)
	}
	o.n++
	return nil
}

// Frames is the number of frames added so far.
func (o *Outputs) Frames() int { return o.n }

// pngEncoder favours speed a little over size (frames are small).
var pngEncoder = png.Encoder{CompressionLevel: png.BestSpeed}

// Commit finishes every output and moves it into place. It returns the
// paths written, in a stable order. Frames left in Dir by an earlier,
// longer export (frame-NNNNN.png numbered past this one's end) are
// removed so that the folder holds one sequence.
func (o *Outputs) Commit() ([]string, error) {
	if o.closed {
		return nil, errors.New("outputs: already committed or aborted")
	}
	if o.n == 0 {
		o.Abort()
		return nil, errors.New("no frames to write")
	}
	if o.cfg.Frames >= 0 && o.n != o.cfg.Frames {
		o.Abort()
		return nil, fmt.Errorf("outputs: %d frames added, %d announced", o.n, o.cfg.Frames)
	}
	fail := func(err error) ([]string, error) { o.Abort(); return o.written, err }
	if o.npy != nil {
		if err := o.npy.do(func(io.Writer) error { return o.npyw.Close() }); err != nil {
			return fail(err)
		}
		if err := o.npy.commit(); err != nil {
			return fail(err)
		}
		o.npy = nil
		o.written = append(o.written, filepath.Join(o.cfg.Dir, "frames.npy"))
	}
	if o.gif != nil {
		path := filepath.Join(o.cfg.Dir, "frames.gif")
		if err := atomicfile.Write(path, o.gif.Encode); err != nil {
			return fail(err)
		}
		o.written = append(o.written, path)
	}
	if o.sheet != nil {
		path := filepath.Join(o.cfg.Dir, "sheet.png")
		if err := atomicfile.Write(path, o.sheet.Encode); err != nil {
			return fail(err)
		}
		o.written = append(o.written, path)
	}
	if o.stage != "" {
		for i := 0; i < o.n; i++ {
			dst := filepath.Join(o.cfg.Dir, FrameName(i))
			if err := os.Rename(filepath.Join(o.stage, FrameName(i)), dst); err != nil {
				return fail(fmt.Errorf("write %s: %w", dst, unwrapPath(err)))
			}
			o.written = append(o.written, dst)
		}
		removeStaleFrames(o.cfg.Dir, o.n)
		os.RemoveAll(o.stage)
		o.stage = ""
	}
	o.closed = true
	sort.Strings(o.written)
	return o.written, nil
}

var frameRe = regexp.MustCompile(`^frame-(\d{5,})\.png$`)

// removeStaleFrames removes frame-NNNNN.png files numbered n or more.
func removeStaleFrames(dir string, n int) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return
	}
	for _, e := range ents {
		if m := frameRe.FindStringSubmatch(e.Name()); m != nil {
			if i, err := strconv.Atoi(m[1]); err == nil && i >= n {
				os.Remove(filepath.Join(dir, e.Name()))
			}
		}
	}
}

// Abort drops everything not yet committed. It is safe to call twice and
// after Commit.
func (o *Outputs) Abort() {
	if o.npy != nil {
		o.npy.abort()
		o.npy = nil
	}
	if o.stage != "" {
		os.RemoveAll(o.stage)
		o.stage = ""
	}
	if o.made && !o.closed {
		os.Remove(o.cfg.Dir) // only if still empty
	}
	o.gif, o.sheet = nil, nil
	o.closed = true
}

// pending is an output file fed piece by piece: a goroutine holds it open
// inside atomicfile.Write and runs the operations sent to it, so that the
// file is renamed into place only by commit, and removed by abort or by
// any failed operation.
type pending struct {
	ops   chan func(io.Writer) error
	res   chan error
	done  chan error
	final error
	ended bool
}

var errAborted = errors.New("aborted")

func newPending(path string) *pending {
	p := &pending{ops: make(chan func(io.Writer) error), res: make(chan error), done: make(chan error, 1)}
	go func() {
		p.done <- atomicfile.Write(path, func(w io.Writer) error {
			for op := range p.ops {
				err := op(w)
				p.res <- err
				if err != nil {
					return err
				}
			}
			return nil
		})
	}()
	return p
}

// do runs op on the open file and returns its error (or the error that
// already ended the file).
func (p *pending) do(op func(io.Writer) error) error {
	if p.ended {
		if p.final == nil {
			return errors.New("file already closed")
		}
		return p.final
	}
	select {
	case p.ops <- op:
		if err := <-p.res; err != nil {
			p.end()
			return err
		}
		return nil
	case err := <-p.done:
		p.ended, p.final = true, err
		return err
	}
}

// end closes the operation stream and waits for atomicfile.Write.
func (p *pending) end() error {
	if !p.ended {
		close(p.ops)
		p.final = <-p.done
		p.ended = true
	}
	return p.final
}

// commit renames the file into place.
func (p *pending) commit() error { return p.end() }

// abort removes the temporary file.
func (p *pending) abort() {
	if !p.ended {
		p.do(func(io.Writer) error { return errAborted })
		p.end()
	}
}
