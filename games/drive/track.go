package drive

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"tilebench/internal/seeds"
)

// Vec is a point or direction in the world plane, in metres.
type Vec struct{ X, Y float64 }

func (a Vec) add(b Vec) Vec       { return Vec{a.X + b.X, a.Y + b.Y} }
func (a Vec) sub(b Vec) Vec       { return Vec{a.X - b.X, a.Y - b.Y} }
func (a Vec) scale(k float64) Vec { return Vec{a.X * k, a.Y * k} }
func (a Vec) dot(b Vec) float64   { return a.X*b.X + a.Y*b.Y }
func (a Vec) cross(b Vec) float64 { return a.X*b.Y - a.Y*b.X }
func (a Vec) norm() float64       { return math.Hypot(a.X, a.Y) }

func unit(h float64) Vec { return Vec{math.Cos(h), math.Sin(h)} }

// TrackConfig shapes the generated circuits. The zero value gives the
// default circuit family.
type TrackConfig struct {
	// Bends is the number of constant-radius bends in a circuit; each
	// circuit draws Bends or Bends+1. Default 5.
	Bends int
	// Reverse is the number of those bends that turn the other way
	// (right-handers on an anticlockwise circuit). Default 0.
	Reverse int
	// MinRadius and MaxRadius bound the bends' centreline radii in metres.
	// Defaults 16 (about three times the car's smallest turning radius at
	// full lock) and 42.
	MinRadius, MaxRadius float64
	// MinStraight and MaxStraight bound the drawn straights in metres; the
	// two straights solved for to close the circuit may reach twice
	// MaxStraight or 80 m, whichever is longer. Defaults 6 and 42.
	MinStraight, MaxStraight float64
	// Width is the mean road width in metres. Default 9.
	Width float64
	// WidthSwing is the largest relative change of the road width round
	// the circuit (0.2 puts it in [0.8, 1.2]·Width). Default 0.18.
	WidthSwing float64
	// Extent is the largest side of the circuit's bounding box in metres;
	// larger circuits are drawn again. Default 190.
	Extent float64
	// Spacing is the distance between centreline samples in metres.
	// Default 1.
	Spacing float64
}

func (c TrackConfig) withDefaults() TrackConfig {
	if c.Bends == 0 {
		c.Bends = 5
	}
	orDefault(&c.MinRadius, 16, false)
	orDefault(&c.MaxRadius, 42, false)
	orDefault(&c.MinStraight, 6, false)
	orDefault(&c.MaxStraight, 42, false)
	orDefault(&c.Width, 9, false)
	orDefault(&c.WidthSwing, 0.18, false)
	orDefault(&c.Extent, 190, false)
	orDefault(&c.Spacing, 1, false)
	return c
}

func (c TrackConfig) check() error {
	switch {
	case c.Bends < 3 || c.Bends > 16:
		return fmt.Errorf("track config: %d bends, want 3..16", c.Bends)
	case c.Reverse < 0 || 2*c.Reverse >= c.Bends:
		return fmt.Errorf("track config: %d reverse bends of %d, want fewer than half", c.Reverse, c.Bends)
	case c.MinRadius <= 0 || c.MaxRadius < c.MinRadius:
		return fmt.Errorf("track config: radii %v..%v m", c.MinRadius, c.MaxRadius)
	case c.MinStraight < 0 || c.MaxStraight < c.MinStraight:
		return fmt.Errorf("track config: straights %v..%v m", c.MinStraight, c.MaxStraight)
	case c.Width <= 0 || c.WidthSwing < 0 || c.WidthSwing >= 0.5:
		return fmt.Errorf("track config: width %v m, swing %v", c.Width, c.WidthSwing)
	case c.Spacing <= 0 || c.Spacing > 4 || c.Extent <= 0:
		return fmt.Errorf("track config: spacing %v m, extent %v m", c.Spacing, c.Extent)
	}
	return nil
}

// Piece is one stretch of a circuit: a straight (Kappa 0) or a bend of
// constant curvature Kappa (1/m, positive turning left), Length metres
// long along the centreline.
type Piece struct {
	Length, Kappa float64
}

// Track is a closed circuit of straights and constant-radius bends,
// sampled into a centreline polyline with arc length, curvature and road
// half-width at each sample.
type Track struct {
	// Pieces are the straights and bends in order from the start line.
	Pieces []Piece
	// Start and StartHeading place the start line (the beginning of
	// Pieces[0]).
	Start        Vec
	StartHeading float64
	// Width is the mean road width in metres.
	Width float64
	// Pts are the centreline samples, the first on the start line; the
	// polyline closes from the last sample to Pts[0].
	Pts []Vec
	// S[i] is the arc length from the start line to Pts[i].
	S []float64
	// Kappa[i] is the signed curvature of the centreline at Pts[i] (1/m,
	// positive turning left).
	Kappa []float64
	// Half[i] is half the road width at Pts[i], in metres.
	Half []float64
	// Length is the centreline's length in metres.
	Length float64
	// Min and Max bound the centreline.
	Min, Max Vec
	// Attempts is how many circuits were drawn before one passed the
	// checks (1 if the first did).
	Attempts int
	// scratch for the checks and for the width profile.
	coarse  []Vec
	coarseS []float64
	swing   [2]float64 // relative amplitude and phase of the width wave
	waves   float64    // width waves per lap
	pcg     rand.PCG   // the attempts' generator, reseeded (no allocation)
	rng     *rand.Rand
}

// ErrNoTrack is returned when no acceptable circuit was found within the
// attempt limit (only possible with extreme TrackConfig values).
var ErrNoTrack = errors.New("no acceptable circuit")

// maxAttempts bounds the regeneration loop.
const maxAttempts = 400

// NewTrack generates the circuit for seed into a new Track.
func NewTrack(seed uint64, cfg TrackConfig) (*Track, error) {
	tr := &Track{}
	return tr, tr.Generate(seed, cfg)
}

// Generate draws the circuit for seed into tr, reusing its buffers. Each
// attempt draws from seeds.DeriveSeed(seed, StreamKey("circuit"),
// attempt): Bends (or Bends+1) bends of radius in [MinRadius, MaxRadius]
// whose turning angles add up to one full turn, each followed by a
// straight; all straights but two are drawn in [MinStraight,
// MaxStraight], and the two whose directions are furthest from parallel
// are solved for so that the circuit closes. Attempts whose solved
// straights come out too short or too long, that come too close to
// themselves, or whose box exceeds Extent are thrown away.
func (tr *Track) Generate(seed uint64, cfg TrackConfig) error {
	cfg = cfg.withDefaults()
	if err := cfg.check(); err != nil {
		return err
	}
	if tr.rng == nil {
		tr.rng = rand.New(&tr.pcg)
	}
	for a := 0; a < maxAttempts; a++ {
		// The stream of seeds.NewRand(DeriveSeed(seed, "circuit", a)).
		s := seeds.DeriveSeed(seed, seeds.StreamKey("circuit"), uint64(a))
		tr.pcg.Seed(seeds.DeriveSeed(s, 1), seeds.DeriveSeed(s, 2))
		if !tr.draw(tr.rng, cfg) {
			continue
		}
		tr.sample(cfg)
		if tr.acceptable(cfg) {
			tr.Attempts = a + 1
			return nil
		}
	}
	return fmt.Errorf("seed %d: %w after %d attempts", seed, ErrNoTrack, maxAttempts)
}

// draw fills tr.Pieces with one closed layout, or reports false if the
// closing straights cannot be solved within bounds.
func (tr *Track) draw(rng *rand.Rand, cfg TrackConfig) bool {
	rnd := rng.Float64
	m := cfg.Bends
	if rnd() < 0.5 {
		m++
	}
	rev := cfg.Reverse
	// Turning angles: weights for the forward bends, reverse bends of
	// 35°–80°, scaled so the forward ones make up one turn plus what the
	// reverse ones take back.
	var ang [20]float64
	var back float64
	revAt := -1
	if rev > 0 {
		revAt = int(rnd() * float64(m))
	}
	var wsum float64
	for j := 0; j < m; j++ {
		// Reverse bends sit at every other position from revAt.
		isRev := rev > 0 && (j-revAt+m)%m%2 == 0 && (j-revAt+m)%m/2 < rev
		if isRev {
			ang[j] = -(35 + 45*rnd()) * math.Pi / 180
			back -= ang[j]
		} else {
			ang[j] = 0.45 + rnd()
			wsum += ang[j]
		}
	}
	for j := 0; j < m; j++ {
		if ang[j] > 0 {
			ang[j] *= (2*math.Pi + back) / wsum
			if ang[j] > 0.95*math.Pi {
				return false // tighter than a hairpin
			}
		}
	}
	// Pieces: straight j then bend j.
	tr.Pieces = tr.Pieces[:0]
	h := 0.0
	var dirs [20]Vec
	var sum Vec // displacement of everything but the two solved straights
	var lens [20]float64
	for j := 0; j < m; j++ {
		dirs[j] = unit(h)
		lens[j] = cfg.MinStraight + (cfg.MaxStraight-cfg.MinStraight)*rnd()
		R := cfg.MinRadius + (cfg.MaxRadius-cfg.MinRadius)*rnd()
		k := 1 / R
		if ang[j] < 0 {
			k = -k
		}
		// Chord of the bend: 2R sin(|φ|/2) along h + φ/2.
		sum = sum.add(unit(h + ang[j]/2).scale(2 * R * math.Sin(math.Abs(ang[j])/2)))
		tr.Pieces = append(tr.Pieces, Piece{}, Piece{Length: math.Abs(ang[j]) * R, Kappa: k})
		h += ang[j]
	}
	// Solve two straights so that the circuit closes:
	// L_a·u_a + L_b·u_b = −(everything else). Of all pairs, take the one
	// whose shorter solved straight is longest.
	for j := 0; j < m; j++ {
		sum = sum.add(dirs[j].scale(lens[j]))
	}
	ba, bb, la, lb := -1, -1, 0.0, 0.0
	longest := max(2*cfg.MaxStraight, 80)
	for i := 0; i < m; i++ {
		for j := i + 1; j < m; j++ {
			det := dirs[i].cross(dirs[j])
			if math.Abs(det) < 0.3 {
				continue
			}
			rhs := sum.sub(dirs[i].scale(lens[i])).sub(dirs[j].scale(lens[j])).scale(-1)
			li, lj := rhs.cross(dirs[j])/det, dirs[i].cross(rhs)/det
			if li > longest || lj > longest {
				continue
			}
			if ba < 0 || min(li, lj) > min(la, lb) {
				ba, bb, la, lb = i, j, li, lj
			}
		}
	}
	if ba < 0 || la < cfg.MinStraight || lb < cfg.MinStraight {
		return false
	}
	lens[ba], lens[bb] = la, lb
	// The start line lies on the first straight, which must be long
	// enough to start on.
	if lens[0] < 12 {
		return false
	}
	for j := 0; j < m; j++ {
		tr.Pieces[2*j].Length = lens[j]
	}
	tr.Start, tr.StartHeading = Vec{}, 0
	tr.Width = cfg.Width
	tr.waves = float64(2 + int(2*rnd()))
	tr.swing = [2]float64{cfg.WidthSwing * (0.5 + 0.5*rnd()), 2 * math.Pi * rnd()}
	return true
}

// sample fills the centreline samples from the pieces.
func (tr *Track) sample(cfg TrackConfig) {
	var total float64
	for _, pc := range tr.Pieces {
		total += pc.Length
	}
	tr.Length = total
	tr.Pts, tr.S, tr.Kappa, tr.Half = tr.Pts[:0], tr.S[:0], tr.Kappa[:0], tr.Half[:0]
	p, h, s := tr.Start, tr.StartHeading, 0.0
	for _, pc := range tr.Pieces {
		n := int(math.Ceil(pc.Length / cfg.Spacing))
		if n < 1 {
			n = 1
		}
		ds := pc.Length / float64(n)
		for j := 0; j < n; j++ {
			q, _ := advance(p, h, pc.Kappa, float64(j)*ds)
			tr.Pts = append(tr.Pts, q)
			tr.S = append(tr.S, s+float64(j)*ds)
			tr.Kappa = append(tr.Kappa, pc.Kappa)
		}
		p, h = advance(p, h, pc.Kappa, pc.Length)
		s += pc.Length
	}
	tr.Min, tr.Max = Vec{math.Inf(1), math.Inf(1)}, Vec{math.Inf(-1), math.Inf(-1)}
	for i, q := range tr.Pts {
		tr.Half = append(tr.Half, tr.halfAt(tr.S[i]))
		tr.Min = Vec{math.Min(tr.Min.X, q.X), math.Min(tr.Min.Y, q.Y)}
		tr.Max = Vec{math.Max(tr.Max.X, q.X), math.Max(tr.Max.Y, q.Y)}
	}
}

// halfAt is half the road width at arc length s: a slow wave of seeded
// phase round the lap.
func (tr *Track) halfAt(s float64) float64 {
	return tr.Width / 2 * (1 + tr.swing[0]*math.Sin(2*math.Pi*tr.waves*s/tr.Length+tr.swing[1]))
}

// advance moves from p along heading h on a path of constant curvature k
// for distance d (exact: a straight or a circular arc) and returns the end
// point and heading.
func advance(p Vec, h, k, d float64) (Vec, float64) {
	if math.Abs(k*d) < 1e-12 {
		return p.add(unit(h).scale(d)), h
	}
	nh := h + k*d
	return Vec{p.X + (math.Sin(nh)-math.Sin(h))/k, p.Y + (math.Cos(h)-math.Cos(nh))/k}, nh
}

// End is where the pieces end: the position and heading after the last
// piece. On a closed circuit it is the start line again, one turn round.
func (tr *Track) End() (Vec, float64) {
	p, h := tr.Start, tr.StartHeading
	for _, pc := range tr.Pieces {
		p, h = advance(p, h, pc.Kappa, pc.Length)
	}
	return p, h
}

// acceptable reports whether the circuit fits in Extent, bends no tighter
// than MinRadius and keeps stretches of road that are not neighbours
// along it apart (which also rules out crossings).
func (tr *Track) acceptable(cfg TrackConfig) bool {
	for _, k := range tr.Kappa {
		if math.Abs(k)*cfg.MinRadius > 1+1e-9 {
			return false
		}
	}
	if tr.Max.X-tr.Min.X > cfg.Extent || tr.Max.Y-tr.Min.Y > cfg.Extent {
		return false
	}
	return tr.clear(cfg.Width * (1 + cfg.WidthSwing))
}

// clearStep is the sample spacing of the clearance check in metres.
const clearStep = 3.0

// clear reports whether every two points of the centreline further apart
// along the road than three road widths (and a bend's worth) are at least
// 1.6·width + clearStep apart in the plane; the margin covers the coarse
// spacing of the check, and since the spacing is far below the gap, no
// two stretches can cross either.
func (tr *Track) clear(width float64) bool {
	tr.coarse, tr.coarseS = tr.coarse[:0], tr.coarseS[:0]
	next := 0.0
	for i, p := range tr.Pts {
		if tr.S[i] >= next {
			tr.coarse = append(tr.coarse, p)
			tr.coarseS = append(tr.coarseS, tr.S[i])
			next = tr.S[i] + clearStep
		}
	}
	gap := 1.6*width + clearStep
	gap2 := gap * gap
	along := 3*width + math.Pi/2*gap
	n := len(tr.coarse)
	for i := 0; i < n; i++ {
		a := tr.coarse[i]
		for j := i + 1; j < n; j++ {
			ds := tr.coarseS[j] - tr.coarseS[i]
			if ds < along || tr.Length-ds < along {
				continue
			}
			d := a.sub(tr.coarse[j])
			if d.X*d.X+d.Y*d.Y < gap2 {
				return false
			}
		}
	}
	return true
}

// SelfIntersects reports whether two non-adjacent segments of the closed
// centreline polyline cross.
func (tr *Track) SelfIntersects() bool {
	n := len(tr.Pts)
	for i := 0; i < n; i++ {
		a, b := tr.Pts[i], tr.Pts[(i+1)%n]
		for j := i + 2; j < n; j++ {
			if i == 0 && j == n-1 {
				continue // adjacent through the closing segment
			}
			c, d := tr.Pts[j], tr.Pts[(j+1)%n]
			if segmentsCross(a, b, c, d) {
				return true
			}
		}
	}
	return false
}

// segmentsCross is the orientation test for proper crossing of ab and cd.
func segmentsCross(a, b, c, d Vec) bool {
	o1 := b.sub(a).cross(c.sub(a))
	o2 := b.sub(a).cross(d.sub(a))
	o3 := d.sub(c).cross(a.sub(c))
	o4 := d.sub(c).cross(b.sub(c))
	return o1*o2 < 0 && o3*o4 < 0
}

// Project finds the point of the centreline nearest p, searching the
// segments within window samples of hint (all segments if window ≤ 0). It
// returns the sample index of the segment's start, the arc length of the
// projection (interpolated between the samples' arc lengths), and the
// signed lateral offset (positive left of the
// direction of travel).
func (tr *Track) Project(p Vec, hint, window int) (idx int, s, lateral float64) {
	n := len(tr.Pts)
	lo, hi := hint-window, hint+window
	if window <= 0 || 2*window+1 >= n {
		lo, hi = 0, n-1
	}
	best := math.Inf(1)
	// Segment i runs from sample i to sample j = i+1 (0 past the last):
	// stepped rather than taken modulo n, and clamped with the built-in
	// min and max (the same values as math.Min and math.Max, NaN and
	// signed zeros included), as this runs over 49 segments every step.
	i := ((lo % n) + n) % n
	for ii := lo; ii <= hi; ii, i = ii+1, i+1 {
		if i == n {
			i = 0
		}
		j := i + 1
		if j == n {
			j = 0
		}
		a, b := tr.Pts[i], tr.Pts[j]
		ab := b.sub(a)
		l2 := ab.dot(ab)
		u := 0.0
		if l2 > 0 {
			u = p.sub(a).dot(ab) / l2
			u = max(0, min(1, u))
		}
		q := a.add(ab.scale(u))
		d := p.sub(q)
		d2 := d.dot(d)
		if d2 < best {
			best = d2
			idx = i
			next := tr.Length
			if i+1 < n {
				next = tr.S[i+1]
			}
			s = tr.S[i] + u*(next-tr.S[i]) // arc length, not chord length
			lateral = math.Sqrt(d2)
			if ab.cross(d) < 0 {
				lateral = -lateral
			}
		}
	}
	return idx, s, lateral
}

// At returns the centreline point at arc length s (wrapped into
// [0, Length)), the heading of the road there, and the sample index.
func (tr *Track) At(s float64, hint int) (Vec, float64, int) {
	s = math.Mod(s, tr.Length)
	if s < 0 {
		s += tr.Length
	}
	n := len(tr.Pts)
	i := ((hint % n) + n) % n
	// Walk from the hint; s rarely moves more than a few samples.
	for steps := 0; steps < 2*n; steps++ {
		next := tr.Length
		if i < n-1 {
			next = tr.S[i+1]
		}
		if s >= tr.S[i] && s < next {
			break
		}
		if s < tr.S[i] {
			i = (i - 1 + n) % n
		} else {
			i = (i + 1) % n
		}
	}
	a, b := tr.Pts[i], tr.Pts[(i+1)%n]
	seg := b.sub(a)
	l := seg.norm()
	u := 0.0
	if l > 0 {
		u = (s - tr.S[i]) / l
	}
	return a.add(seg.scale(u)), math.Atan2(seg.Y, seg.X), i
}

// Heading is the road's direction of travel at the start (radians).
func (tr *Track) Heading() float64 { return tr.StartHeading }

// HalfWidth is half the road width at sample i, in metres.
func (tr *Track) HalfWidth(i int) float64 { return tr.Half[i] }

// fallback makes tr a plain rounded square (four 40 m straights and four
// quarter turns of 30 m radius), used only if generation failed.
func (tr *Track) fallback(cfg TrackConfig) {
	tr.Pieces = tr.Pieces[:0]
	for k := 0; k < 4; k++ {
		tr.Pieces = append(tr.Pieces, Piece{Length: 40}, Piece{Length: math.Pi / 2 * 30, Kappa: 1.0 / 30})
	}
	tr.Start, tr.StartHeading, tr.Width = Vec{}, 0, cfg.Width
	tr.waves, tr.swing = 2, [2]float64{}
	tr.sample(cfg)
}

// measure sets S and Length from Pts as a closed polyline (for circuits
// built from points alone).
func (tr *Track) measure() {
	tr.S = append(tr.S[:0], 0)
	for i := 1; i < len(tr.Pts); i++ {
		tr.S = append(tr.S, tr.S[i-1]+tr.Pts[i].sub(tr.Pts[i-1]).norm())
	}
	tr.Length = tr.S[len(tr.S)-1] + tr.Pts[0].sub(tr.Pts[len(tr.Pts)-1]).norm()
}
