package play

import (
	"bytes"
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"tilebench/patch/frameio"
)

// frameFolder writes one sequence of PNG frames (frameio.FrameName(t)) into a
// hidden staging folder beside Dir and renames it to Dir on Commit, so
// that Dir only ever holds a whole sequence. Frames are not synced one by
// one: the folder is the unit that appears or not.
type frameFolder struct {
	dir, stage string
	enc        png.Encoder
	buf        bytes.Buffer
}

// newFrameFolder starts a sequence that will become dir (its parent is
// created if missing).
func newFrameFolder(dir string) (*frameFolder, error) {
	parent := filepath.Dir(dir)
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return nil, err
	}
	stage, err := os.MkdirTemp(parent, "."+filepath.Base(dir)+".tmp-")
	if err != nil {
		return nil, err
	}
	return &frameFolder{dir: dir, stage: stage, enc: png.Encoder{CompressionLevel: png.BestSpeed}}, nil
}

// Add writes frame t.
func (f *frameFolder) Add(t int, img image.Image) error {
	f.buf.Reset()
	if err := f.enc.Encode(&f.buf, img); err != nil {
		return err
	}
	path := filepath.Join(f.stage, frameio.FrameName(t))
	if err := os.WriteFile(path, f.buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

// Commit replaces the folder with the staged frames.
func (f *frameFolder) Commit() error {
	if err := os.RemoveAll(f.dir); err != nil {
		f.Abort()
		return fmt.Errorf("replace %s: %w", f.dir, err)
	}
	if err := os.Rename(f.stage, f.dir); err != nil {
		f.Abort()
		return fmt.Errorf("write %s: %w", f.dir, err)
	}
	return nil
}

// Abort removes the staged frames; the folder is left as it was.
func (f *frameFolder) Abort() { os.RemoveAll(f.stage) }
