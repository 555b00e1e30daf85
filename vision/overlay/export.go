package overlay

import (
	"errors"
	"fmt"
	"image"
	"io"

	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
)

// Export is frameio.Transform with a policy watching: every transformed
// frame's tokens go to pol, and spec is drawn over the transformed frame
// written to out (the frame as the policy saw it) and over the original
// frame given to the contact sheet (each token's weight on the cell its
// content came from). actionDim is the length of the policy's action.
// A frame on which pol reports no weights is written without overlay.
// It returns the number of frames written.
func Export(r frameio.Reader, tok *patch.Tokenizer, p *patch.Pipeline, m *patch.Manifest, out *frameio.Outputs,
	pol vision.Policy, actionDim int, spec Spec, progress func(int)) (int, error) {
	rep, ok := pol.(vision.AttentionReporter)
	if !ok {
		return 0, errors.New("overlay: the policy reports no attention weights")
	}
	g := tok.Grid()
	src := patch.NewTokenSet(g.N(), g.D())
	dst := patch.NewTokenSet(p.Capacity(), g.D())
	frame := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
	info := r.Info()
	orig := image.NewRGBA(image.Rect(0, 0, info.Width, info.Height))
	weights := make([]float32, p.Capacity())
	cells := make([]float32, g.N())
	action := make([]float64, actionDim)
	prev := make([]float64, actionDim)
	obs := vision.Observation{Tokens: dst, Grid: g, PrevAction: prev, Frame: frame}
	var rec patch.FrameRecord
	var d Drawer
	pol.Reset(p.Seed())
	for t := 0; ; t++ {
		img, err := r.Next()
		if err == io.EOF {
			if t == 0 {
				return 0, fmt.Errorf("%s: no frames", info.Name)
			}
			return t, nil
		}
		if err != nil {
			return t, err
		}
		if err := p.TokenizeFrame(t, tok, img, src); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", info.Name, t, err)
		}
		if err := p.Apply(t, src, dst, &rec); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", info.Name, t, err)
		}
		if m != nil {
			m.Append(&rec)
		}
		if err := tok.Assemble(dst, frame); err != nil {
			return t, fmt.Errorf("%s: frame %d: %w", info.Name, t, err)
		}
		obs.Step = t
		if err := pol.Act(&obs, action); err != nil {
			return t, fmt.Errorf("%s: frame %d: policy: %w", info.Name, t, err)
		}
		copy(prev, action)
		sheetOrig := img
		if _, n, ok := rep.TokenWeights(weights, nil); ok && n == dst.N {
			w := weights[:n]
			if img.Rect.Size() == orig.Rect.Size() {
				copy(orig.Pix, img.Pix[:len(orig.Pix)])
				SourceCells(cells, w, dst.Pos, &rec, g)
				d.Draw(orig, g, cells, spec)
				sheetOrig = orig
			}
			SeenCells(cells, w, dst.Pos, g)
			d.Draw(frame, g, cells, spec)
		}
		if err := out.Add(sheetOrig, frame); err != nil {
			return t, err
		}
		if progress != nil {
			progress(t + 1)
		}
	}
}
