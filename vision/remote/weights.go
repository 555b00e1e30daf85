package remote

import (
	"fmt"
	"math"
	"strconv"

	"tilebench/patch"
	"tilebench/vision"
)

// WeightsKey is the optional key of an action reply that carries the
// policy's own per-token attention weights (docs/policy-protocol.md,
// "action").
const WeightsKey = "weights"

// parseWeights reads the optional weights array of an action reply into
// dst: n values, each finite and ≥ 0. It returns false with no error when
// the reply has no weights (absent or null), and a fault kind with the
// error when the array is malformed.
func parseWeights(h *header, n int, dst []float32) (bool, Kind, error) {
	vals, ok, err := h.floats(WeightsKey)
	if err != nil {
		return false, Shape, fmt.Errorf("%q must be an array of numbers", WeightsKey)
	}
	if !ok {
		return false, "", nil
	}
	if len(vals) != n {
		return false, Shape, fmt.Errorf("%q has %d values, want %d", WeightsKey, len(vals), n)
	}
	if len(dst) < n {
		return false, Shape, fmt.Errorf("%q: %d values do not fit", WeightsKey, n)
	}
	for i, v := range vals {
		switch {
		case math.IsNaN(v) || math.IsInf(v, 0):
			return false, NonFinite, fmt.Errorf("%q value %d is %v", WeightsKey, i, v)
		case v < 0:
			return false, Shape, fmt.Errorf("%q value %d is %v, want ≥ 0", WeightsKey, i, v)
		case v > math.MaxFloat32:
			return false, NonFinite, fmt.Errorf("%q value %d is %v, beyond float32", WeightsKey, i, v)
		}
		dst[i] = float32(v)
	}
	return true, "", nil
}

// weightCount is how many weights an action reply to obs carries: one per
// token sent (obs tokens), or one per cell of the frame sent, row after
// row (obs frame).
func (p *Policy) weightCount(obs *vision.Observation) int {
	if p.cfg.Obs == ObsTokens {
		return obs.Tokens.N
	}
	return p.cfg.Grid.N()
}

// takeWeights reads the optional weights of the reply just checked and
// keeps them, per token of obs, for TokenWeights.
func (p *Policy) takeWeights(step int, obs *vision.Observation) error {
	p.haveW = false
	if p.hdr.get(WeightsKey) == nil {
		return nil
	}
	n := p.weightCount(obs)
	if cap(p.wbuf) < max(n, p.cfg.MaxTokens) {
		p.wbuf = make([]float32, max(n, p.cfg.MaxTokens, p.cfg.Grid.N()))
		p.wtok = make([]float32, max(p.cfg.MaxTokens, p.cfg.Grid.N()))
	}
	ok, kind, err := parseWeights(&p.hdr, n, p.wbuf)
	if err != nil {
		return p.newFault("step", step, kind, "%v", err)
	}
	if !ok {
		return nil
	}
	ts := obs.Tokens
	if ts == nil {
		return nil
	}
	if p.cfg.Obs == ObsTokens {
		copy(p.wtok[:ts.N], p.wbuf[:ts.N])
	} else {
		// Frame cells to the tokens drawn in them.
		g := p.cfg.Grid
		if ts.N > len(p.wtok) {
			return nil
		}
		for i := 0; i < ts.N; i++ {
			pos := ts.Pos[i]
			p.wtok[i] = 0
			if pos != patch.NoCell && pos.Row >= 0 && pos.Col >= 0 && int(pos.Row) < g.Rows && int(pos.Col) < g.Cols {
				p.wtok[i] = p.wbuf[g.Index(pos)]
			}
		}
	}
	p.nW, p.haveW = ts.N, true
	return nil
}

// TokenWeights implements vision.AttentionReporter with the weights the
// policy sent with its last action (one query). ok is false when the last
// reply carried none.
func (p *Policy) TokenWeights(sum, perQuery []float32) (queries, n int, ok bool) {
	if !p.haveW || len(sum) < p.nW {
		return 1, p.nW, false
	}
	copy(sum, p.wtok[:p.nW])
	if len(perQuery) >= p.nW {
		copy(perQuery, p.wtok[:p.nW])
	}
	return 1, p.nW, true
}

// appendWeights adds the served policy's weights of the last step to an
// action reply, when it reports them: per token in the order received
// (obs tokens), or per cell of the frame (obs frame, where the policy saw
// the frame's tokens in grid order).
func (s *server) appendWeights(b []byte) []byte {
	rep, ok := s.pol.(vision.AttentionReporter)
	if !ok || s.tokens == nil {
		return b
	}
	want := s.tokens.N
	if s.h.Obs == ObsFrame {
		want = s.grid.N()
		if s.tokens.N != want {
			return b
		}
	}
	if cap(s.wbuf) < s.tokens.Cap() {
		s.wbuf = make([]float32, s.tokens.Cap())
	}
	_, n, ok := rep.TokenWeights(s.wbuf[:s.tokens.Cap()], nil)
	if !ok || n != want || n+len(s.action) > maxNumbers {
		return b
	}
	b = append(b, `,"`+WeightsKey+`":[`...)
	for i, v := range s.wbuf[:n] {
		if i > 0 {
			b = append(b, ',')
		}
		b = strconv.AppendFloat(b, float64(v), 'g', -1, 32)
	}
	return append(b, ']')
}
