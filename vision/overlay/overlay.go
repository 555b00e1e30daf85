// Package overlay draws what a policy attended to over the frames it saw:
// a heat tint by weight, and outlines around the most attended patches.
// It knows patch grids and token weights, not games or policies; weights
// come from a vision.AttentionReporter.
//
// Two pictures can carry an overlay. The frame as the policy saw it (the
// tokens reassembled, scrambled and occluded as they were) gets each
// token's weight on the cell the token sits in. The unscrambled frame gets
// each token's weight on the cell its content came from (the pipeline's
// FrameRecord), so an invariant policy's overlay there does not move when
// the tokens are scrambled.
package overlay

import (
	"fmt"
	"strconv"
	"strings"

	"tilebench/patch"
)

// Spec says what to draw.
type Spec struct {
	// Heat tints every cell by its weight.
	Heat bool
	// Top outlines the Top most attended cells (0: none).
	Top int
}

// MaxTop bounds Spec.Top.
const MaxTop = 1 << 16

// Parse reads an overlay option: "none" (or ""), "attention" (the heat
// tint), "top:K" (outlines around the K most attended cells), or both
// joined with "+" ("attention+top:3").
func Parse(s string) (Spec, error) {
	var sp Spec
	if s == "" || s == "none" {
		return sp, nil
	}
	for _, part := range strings.Split(s, "+") {
		switch {
		case part == "attention":
			if sp.Heat {
				return Spec{}, fmt.Errorf("overlay %q: attention given twice", s)
			}
			sp.Heat = true
		case strings.HasPrefix(part, "top:"):
			if sp.Top != 0 {
				return Spec{}, fmt.Errorf("overlay %q: top given twice", s)
			}
			k, err := strconv.Atoi(part[len("top:"):])
			if err != nil || k < 1 || k > MaxTop {
				return Spec{}, fmt.Errorf("overlay %q: top:K wants K a whole number from 1 to %d", s, MaxTop)
			}
			sp.Top = k
		default:
			return Spec{}, fmt.Errorf("overlay %q: want none, attention, top:K or attention+top:K", s)
		}
	}
	return sp, nil
}

// On reports whether the spec draws anything.
func (s Spec) On() bool { return s.Heat || s.Top > 0 }

// String is the spec as Parse reads it.
func (s Spec) String() string {
	var parts []string
	if s.Heat {
		parts = append(parts, "attention")
	}
	if s.Top > 0 {
		parts = append(parts, "top:"+strconv.Itoa(s.Top))
	}
	if len(parts) == 0 {
		return "none"
	}
	return strings.Join(parts, "+")
}

// SeenCells adds each token's weight w[i] to the cell it sits in,
// pos[i] (tokens with no cell, like added noise tokens, are skipped),
// into cells (len g.N(), cleared first).
func SeenCells(cells, w []float32, pos []patch.Pos, g *patch.Grid) {
	clear(cells)
	for i, v := range w {
		if i >= len(pos) {
			break
		}
		p := pos[i]
		if p.Row < 0 || p.Col < 0 || int(p.Row) >= g.Rows || int(p.Col) >= g.Cols {
			continue
		}
		cells[g.Index(p)] += v
	}
}

// SourceCells adds each token's weight w[i] to the cell its content came
// from, rec.Perm[i] (noise tokens are skipped; a duplicate counts for the
// cell it copies), into cells (len g.N(), cleared first). With rec nil
// the tokens are taken to be unscrambled, and SeenCells is used.
func SourceCells(cells, w []float32, pos []patch.Pos, rec *patch.FrameRecord, g *patch.Grid) {
	if rec == nil {
		SeenCells(cells, w, pos, g)
		return
	}
	clear(cells)
	n := g.N()
	for i, v := range w {
		if i >= len(rec.Perm) {
			break
		}
		if j := rec.Perm[i]; j >= 0 && j < n {
			cells[j] += v
		}
	}
}
