package frameio

import (
	"errors"
	"fmt"
	"image"
	"io"

	"tilebench/patch"
)

// Transform runs every frame of r through the pipeline and hands the
// result to out: frame corruptions and tokenize (on tok's grid,
// p.TokenizeFrame) → p.Apply, recording into m
// (if not nil) → assemble into a frame of the grid's covered size
// (OutW×OutH: the padded frame with edge pad, so the exported frame holds
// the tokens exactly as a policy sees them, each token drawn at the cell
// of the slot it holds). The caller has Reset p. progress, if not nil, is
// told the number of frames done after each frame. It returns the number
// of frames written; out is left for the caller to Commit or Abort.
func Transform(r Reader, tok *patch.Tokenizer, p *patch.Pipeline, m *patch.Manifest, out *Outputs, progress func(int)) (int, error) {
	g := tok.Grid()
	src := patch.NewTokenSet(g.N(), g.D())
	dst := patch.NewTokenSet(p.Capacity(), g.D())
	frame := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
	var rec patch.FrameRecord
	name := r.Info().Name
	for t := 0; ; t++ {
		img, err := r.Next()
		if err == io.EOF {
			if t == 0 {
				return 0, fmt.Errorf("%s: no frames", name)
			}
			return t, nil
		}
		if err != nil {
			return t, err
		}
		if err := p.TokenizeFrame(t, tok, img, src); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", name, t, err)
		}
		if err := p.Apply(t, src, dst, &rec); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", name, t, err)
		}
		if m != nil {
			m.Append(&rec)
		}
		if err := tok.Assemble(dst, frame); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", name, t, err)
		}
		if err := out.Add(img, frame); err != nil {
			return t, err
		}
		if progress != nil {
			progress(t + 1)
		}
	}
}

// CheckInvertible reports whether frames of info, exported with m, can be
// put back in order: the grid must not overlap, the frames must be the
// grid's covered size, and (when the count is known) there must be one
// frame per manifest record. Errors are one line, for "manifest does not
// match the frames".
func CheckInvertible(info Info, m *patch.Manifest) error {
	g := m.GridOf()
	switch {
	case g == nil:
		return errors.New("manifest has no grid")
	case g.Overlapping():
		return fmt.Errorf("manifest grid %s overlaps (stride below patch size): overlapping tiles cannot be put back from frames", g)
	case info.Width != g.OutW || info.Height != g.OutH:
		return fmt.Errorf("%s has %dx%d frames, the manifest's grid exports %dx%d frames (%s): manifest does not match the frames",
			info.Name, info.Width, info.Height, g.OutW, g.OutH, g)
	case info.Frames >= 0 && info.Frames != len(m.Frames):
		return fmt.Errorf("%s has %d frames, the manifest records %d: manifest does not match the frames", info.Name, info.Frames, len(m.Frames))
	}
	return nil
}

// InvertSize is the size of the frames Invert writes: the grid's covered
// size, or the source size with cropToSource.
func InvertSize(m *patch.Manifest, cropToSource bool) (w, h int) {
	g := m.GridOf()
	if cropToSource {
		return min(g.Width, g.OutW), min(g.Height, g.OutH)
	}
	return g.OutW, g.OutH
}

// Invert puts frames that were exported with manifest m back into grid
// order and hands them to out (orig is the exported frame, out the
// restored one). Each frame is tokenized on the grid of the exported size
// (patch.Grid.Covered), and m's record of the frame inverts the
// permutation, rotations and flips (patch.FrameRecord.UnscramblePicture:
// output token k is read from the cell it was drawn at). Noise tokens and
// duplicates are left out; occluded cells stay as they were exported
// (black, mean or noise) and dropped cells come back black. With
// cropToSource the frame is cropped to the source size. Photometric
// changes are not undone.
func Invert(r Reader, m *patch.Manifest, cropToSource bool, out *Outputs, progress func(int)) (int, error) {
	info := r.Info()
	if err := CheckInvertible(info, m); err != nil {
		return 0, err
	}
	g := m.GridOf()
	etok, otok := patch.NewTokenizer(g.Covered()), patch.NewTokenizer(g)
	cells := patch.NewTokenSet(g.N(), g.D())
	back := patch.NewTokenSet(g.N(), g.D())
	full := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
	cw, ch := InvertSize(m, cropToSource)
	for t := 0; ; t++ {
		img, err := r.Next()
		if err == io.EOF {
			if t != len(m.Frames) {
				return t, fmt.Errorf("%s has %d frames, the manifest records %d: manifest does not match the frames", info.Name, t, len(m.Frames))
			}
			return t, nil
		}
		if err != nil {
			return t, err
		}
		if t >= len(m.Frames) {
			return t, fmt.Errorf("%s has more frames than the %d the manifest records: manifest does not match the frames", info.Name, len(m.Frames))
		}
		rec := &m.Frames[t]
		if rec.Frame != t {
			return t, fmt.Errorf("manifest record %d is for frame %d: manifest does not match the frames", t, rec.Frame)
		}
		if err := etok.Tokenize(img, cells); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", info.Name, t, err)
		}
		if err := rec.UnscramblePicture(g, cells, back); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", info.Name, t, err)
		}
		if err := otok.Assemble(back, full); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", info.Name, t, err)
		}
		res := full
		if cw != g.OutW || ch != g.OutH {
			res = full.SubImage(image.Rect(0, 0, cw, ch)).(*image.RGBA)
		}
		if err := out.Add(img, res); err != nil {
			return t, err
		}
		if progress != nil {
			progress(t + 1)
		}
	}
}
