package runner

import (
	"image"

	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/overlay"
)

// stripOverlay draws the policy's attention on the frames a strip keeps:
// on what it saw, each token's weight where the token sits; on the game
// frame, where the token's content came from.
type stripOverlay struct {
	spec    overlay.Spec
	rep     vision.AttentionReporter
	d       overlay.Drawer
	weights []float32
	cells   []float32
}

// withOverlay turns the overlay on when spec asks for one and the
// player's policy reports weights (players of the built-in games are
// episodes, whose policy is known).
func (s *stripRecorder) withOverlay(spec string, pl Player) {
	sp, err := overlay.Parse(spec)
	if s == nil || err != nil || !sp.On() {
		return
	}
	ep, ok := pl.(episodePlayer)
	if !ok {
		return
	}
	rep, ok := ep.ep.Policy.(vision.AttentionReporter)
	if !ok {
		return
	}
	s.ov = &stripOverlay{spec: sp, rep: rep}
}

func (s *stripRecorder) overlayName() string {
	if s.ov == nil {
		return ""
	}
	return s.ov.spec.String()
}

// keepOverlaid keeps step t's frames with the overlay drawn on copies.
func (s *stripRecorder) keepOverlaid(t int, raw *image.RGBA, obs *vision.Observation, rec *patch.FrameRecord) {
	o := s.ov
	r, seen := cloneRGBA(raw), (*image.RGBA)(nil)
	if obs.Frame != nil {
		seen = cloneRGBA(obs.Frame)
	}
	if cap(o.weights) < obs.Tokens.Cap() {
		o.weights = make([]float32, obs.Tokens.Cap())
		o.cells = make([]float32, obs.Grid.N())
	}
	if _, n, ok := o.rep.TokenWeights(o.weights, nil); ok && n == obs.Tokens.N {
		w := o.weights[:n]
		overlay.SourceCells(o.cells, w, obs.Tokens.Pos, rec, obs.Grid)
		o.d.Draw(r, obs.Grid, o.cells, o.spec)
		if seen != nil {
			overlay.SeenCells(o.cells, w, obs.Tokens.Pos, obs.Grid)
			o.d.Draw(seen, obs.Grid, o.cells, o.spec)
		}
	}
	s.kept = append(s.kept, t)
	s.raw = append(s.raw, r)
	s.seen = append(s.seen, seen)
}
