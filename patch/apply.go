package patch

import (
	"errors"
	"fmt"
)

func newPipeline(g *Grid, spec Spec) (*Pipeline, error) {
	if spec != (Spec{}) && !(spec.Scramble == "none" || spec.Scramble == "") {
		return nil, errors.New("pipeline: transforms not implemented yet")
	}
	return &Pipeline{g: g, spec: spec}, nil
}

func (p *Pipeline) reset(seed uint64) {}

func (p *Pipeline) apply(t int, src, dst *TokenSet, rec *FrameRecord) error {
	if src.D != p.g.D() || src.N != p.g.N() {
		return fmt.Errorf("pipeline: source has %d tokens of %d values, grid has %d of %d", src.N, src.D, p.g.N(), p.g.D())
	}
	if dst.Cap() < p.Capacity() || len(dst.Data) < p.Capacity()*src.D {
		return fmt.Errorf("pipeline: destination has room for %d tokens, need %d", dst.Cap(), p.Capacity())
	}
	dst.N, dst.D = src.N, src.D
	copy(dst.Data, src.Data[:src.N*src.D])
	copy(dst.Pos, src.Pos[:src.N])
	if rec != nil {
		rec.Frame = t
		rec.Perm = rec.Perm[:0]
		for i := 0; i < src.N; i++ {
			rec.Perm = append(rec.Perm, i)
		}
	}
	return nil
}
