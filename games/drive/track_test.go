package drive

import (
	"math"
	"testing"

	"tilebench/games"
	"tilebench/internal/seeds"
)

// refProject is Track.Project written plainly (every index taken modulo
// n, math.Min and math.Max): the stepped loop must give the same
// segment, arc length and offset bit for bit.
func refProject(tr *Track, p Vec, hint, window int) (idx int, s, lateral float64) {
	n := len(tr.Pts)
	lo, hi := hint-window, hint+window
	if window <= 0 || 2*window+1 >= n {
		lo, hi = 0, n-1
	}
	best := math.Inf(1)
	for ii := lo; ii <= hi; ii++ {
		i := ((ii % n) + n) % n
		a, b := tr.Pts[i], tr.Pts[(i+1)%n]
		ab := b.sub(a)
		l2 := ab.dot(ab)
		u := 0.0
		if l2 > 0 {
			u = math.Max(0, math.Min(1, p.sub(a).dot(ab)/l2))
		}
		d := p.sub(a.add(ab.scale(u)))
		if d2 := d.dot(d); d2 < best {
			best, idx = d2, i
			next := tr.Length
			if i+1 < n {
				next = tr.S[i+1]
			}
			s = tr.S[i] + u*(next-tr.S[i])
			lateral = math.Sqrt(d2)
			if ab.cross(d) < 0 {
				lateral = -lateral
			}
		}
	}
	return idx, s, lateral
}

// Project matches the plain version on random points near and far from
// circuits of both families, with hints on either side of the closing
// segment (negative, past the end) and every window kind.
func TestProjectMatchesPlain(t *testing.T) {
	rng := seeds.NewRand(22)
	twisty, _, _ := ParseVariation("twisty")
	for c, cfg := range []TrackConfig{{}, twisty.Track} {
		tr, err := NewTrack(games.HeldOut(c), cfg)
		if err != nil {
			t.Fatal(err)
		}
		n := len(tr.Pts)
		for k := 0; k < 4000; k++ {
			q := tr.Pts[rng.IntN(n)]
			p := Vec{q.X + 30*(2*rng.Float64()-1), q.Y + 30*(2*rng.Float64()-1)}
			hint := rng.IntN(3*n) - n
			window := []int{0, -1, 1, 24, 24, 24, n / 2, n}[rng.IntN(8)]
			i1, s1, l1 := tr.Project(p, hint, window)
			i2, s2, l2 := refProject(tr, p, hint, window)
			if i1 != i2 || math.Float64bits(s1) != math.Float64bits(s2) || math.Float64bits(l1) != math.Float64bits(l2) {
				t.Fatalf("circuit %d, p %v, hint %d, window %d: (%d, %v, %v), plain (%d, %v, %v)", c, p, hint, window, i1, s1, l1, i2, s2, l2)
			}
		}
	}
}
