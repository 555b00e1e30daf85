package drive

import (
	"errors"
	"fmt"
	"math"

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

// TrackConfig shapes the generated circuits. The zero value gives the
// default circuit family.
type TrackConfig struct {
	// Points is the number of control points. Default 9.
	Points int
	// Radius is the mean distance of the control points from the centre,
	// in metres. Default 58.
	Radius float64
	// Shape, when positive, bends the circle by two slow waves (2 and 3
	// per turn, each of seeded phase and of seeded amplitude up to Shape
	// relative to Radius) into ovals, beans, peanuts and rounded
	// triangles; RadiusJitter then adds to that. Default 0 (no waves).
	Shape float64
	// RadiusJitter is the largest relative change of each point's radius
	// (0.25 puts radii in [0.75, 1.25]·Radius). Default 0.25.
	RadiusJitter float64
	// AngleJitter is the largest shift of each point's angle, as a
	// fraction of the even spacing 2π/Points. Default 0.25.
	AngleJitter float64
	// Width is the road width in metres. Default 9.
	Width float64
	// MinRadius is the tightest centreline radius of curvature accepted,
	// in metres; tighter circuits are regenerated. Default 14 (about three
	// times the car's smallest turning radius at full lock).
	MinRadius float64
	// SamplesPerSegment is how finely each spline segment is sampled for
	// the centreline polyline. Default 48.
	SamplesPerSegment int
}

func (c TrackConfig) withDefaults() TrackConfig {
	for _, f := range []struct {
		v *int
		d int
	}{{&c.Points, 9}, {&c.SamplesPerSegment, 48}} {
		if *f.v == 0 {
			*f.v = f.d
		}
	}
	orDefault(&c.Radius, 58, false)
	orDefault(&c.RadiusJitter, 0.25, false)
	orDefault(&c.AngleJitter, 0.25, false)
	orDefault(&c.Width, 9, false)
	orDefault(&c.MinRadius, 14, false)
	return c
}

// Track is a closed circuit: the Catmull–Rom spline through Control,
// sampled into a centreline polyline with arc length and curvature at each
// sample.
type Track struct {
	// Control holds the control points, in order around the circuit.
	Control []Vec
	// Width is the road width in metres.
	Width float64
	// Pts are the centreline samples; Pts[k*SamplesPerSegment] is
	// Control[k]. The polyline closes from the last sample to Pts[0].
	Pts []Vec
	// S[i] is the arc length of the polyline from Pts[0] to Pts[i].
	S []float64
	// Kappa[i] is the signed curvature of the spline at Pts[i] (1/m,
	// positive turning left).
	Kappa []float64
	// Length is the closed polyline's length in metres.
	Length float64
	// Attempts is how many circuits were generated before one passed the
	// checks (1 if the first did).
	Attempts int
	per      int
}

// ErrNoTrack is returned when no acceptable circuit was found within the
// attempt limit (only possible with extreme TrackConfig values).
var ErrNoTrack = errors.New("no acceptable circuit")

// maxAttempts bounds the regeneration loop.
const maxAttempts = 400

// NewTrack generates the circuit for seed. Each attempt draws its control
// points from seeds.DeriveSeed(seed, StreamKey("circuit"), attempt);
// attempts that self-intersect, come too close to themselves or bend
// tighter than MinRadius are thrown away.
func NewTrack(seed uint64, cfg TrackConfig) (*Track, error) {
	cfg = cfg.withDefaults()
	if cfg.Points < 4 || cfg.Width <= 0 || cfg.Radius <= 0 || cfg.SamplesPerSegment < 2 {
		return nil, fmt.Errorf("track config %+v: need ≥4 points, positive width, radius and sampling", cfg)
	}
	for a := 0; a < maxAttempts; a++ {
		rng := seeds.NewRand(seeds.DeriveSeed(seed, seeds.StreamKey("circuit"), uint64(a)))
		var a2, p2, a3, p3 float64
		if cfg.Shape > 0 { // (drawn only then: the plain family's stream is unchanged)
			a2, p2 = cfg.Shape*rng.Float64(), 2*math.Pi*rng.Float64()
			a3, p3 = cfg.Shape*rng.Float64(), 2*math.Pi*rng.Float64()
		}
		ctrl := make([]Vec, cfg.Points)
		step := 2 * math.Pi / float64(cfg.Points)
		for k := range ctrl {
			ang := float64(k)*step + (2*rng.Float64()-1)*cfg.AngleJitter*step
			wave := 0.0
			if cfg.Shape > 0 {
				wave = a2*math.Cos(2*ang+p2) + a3*math.Cos(3*ang+p3)
			}
			r := cfg.Radius * (1 + wave + (2*rng.Float64()-1)*cfg.RadiusJitter)
			ctrl[k] = Vec{r * math.Cos(ang), r * math.Sin(ang)}
		}
		t := buildTrack(ctrl, cfg.Width, cfg.SamplesPerSegment)
		t.Attempts = a + 1
		if t.acceptable(cfg.MinRadius) {
			return t, nil
		}
	}
	return nil, fmt.Errorf("seed %d: %w after %d attempts", seed, ErrNoTrack, maxAttempts)
}

// CatmullRom evaluates the uniform Catmull–Rom segment between p1 and p2
// (Catmull & Rom 1974) at t ∈ [0,1], with its first and second
// derivatives with respect to t.
func CatmullRom(p0, p1, p2, p3 Vec, t float64) (pos, d1, d2 Vec) {
	// P(t) = ½[2p1 + (−p0+p2)t + (2p0−5p1+4p2−p3)t² + (−p0+3p1−3p2+p3)t³]
	a := p1.scale(2)
	b := p2.sub(p0)
	c := p0.scale(2).sub(p1.scale(5)).add(p2.scale(4)).sub(p3)
	d := p1.scale(3).sub(p0).sub(p2.scale(3)).add(p3)
	t2, t3 := t*t, t*t*t
	pos = a.add(b.scale(t)).add(c.scale(t2)).add(d.scale(t3)).scale(0.5)
	d1 = b.add(c.scale(2 * t)).add(d.scale(3 * t2)).scale(0.5)
	d2 = c.scale(2).add(d.scale(6 * t)).scale(0.5)
	return
}

// Eval evaluates the closed spline of tr at segment k (from Control[k] to
// Control[k+1]) and t ∈ [0,1].
func (tr *Track) Eval(k int, t float64) (pos, d1, d2 Vec) {
	n := len(tr.Control)
	at := func(i int) Vec { return tr.Control[((i%n)+n)%n] }
	return CatmullRom(at(k-1), at(k), at(k+1), at(k+2), t)
}

func buildTrack(ctrl []Vec, width float64, per int) *Track {
	n := len(ctrl)
	tr := &Track{Control: ctrl, Width: width, per: per}
	tr.Pts = make([]Vec, 0, n*per)
	tr.Kappa = make([]float64, 0, n*per)
	for k := 0; k < n; k++ {
		for j := 0; j < per; j++ {
			p, d1, d2 := tr.Eval(k, float64(j)/float64(per))
			if j == 0 {
				p = ctrl[k] // exact, not just to rounding
			}
			sp := d1.norm()
			kap := 0.0
			if sp > 0 {
				kap = d1.cross(d2) / (sp * sp * sp)
			}
			tr.Pts = append(tr.Pts, p)
			tr.Kappa = append(tr.Kappa, kap)
		}
	}
	tr.S = make([]float64, len(tr.Pts))
	for i := 1; i < len(tr.Pts); i++ {
		tr.S[i] = tr.S[i-1] + tr.Pts[i].sub(tr.Pts[i-1]).norm()
	}
	tr.Length = tr.S[len(tr.S)-1] + tr.Pts[0].sub(tr.Pts[len(tr.Pts)-1]).norm()
	return tr
}

// acceptable reports whether the circuit has no self-intersection, keeps
// non-neighbouring stretches of road apart, and bends no tighter than
// minRadius.
func (tr *Track) acceptable(minRadius float64) bool {
	for _, k := range tr.Kappa {
		if math.Abs(k)*minRadius > 1 {
			return false
		}
	}
	if tr.SelfIntersects() {
		return false
	}
	// Stretches further apart along the road than 3 widths must stay 1.6
	// widths apart in the plane, so two roads never touch.
	n := len(tr.Pts)
	gap := 1.6 * tr.Width
	along := 3 * tr.Width
	for i := 0; i < n; i += 2 {
		for j := i + 1; j < n; j += 2 {
			ds := tr.S[j] - tr.S[i]
			if ds < along || tr.Length-ds < along {
				continue
			}
			if tr.Pts[i].sub(tr.Pts[j]).norm() < gap {
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
// projection, and the signed lateral offset (positive left of the
// direction of travel).
func (tr *Track) Project(p Vec, hint, window int) (idx int, s, lateral float64) {
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
			u = p.sub(a).dot(ab) / l2
			u = math.Max(0, math.Min(1, u))
		}
		q := a.add(ab.scale(u))
		d := p.sub(q)
		d2 := d.dot(d)
		if d2 < best {
			best = d2
			idx = i
			s = tr.S[i] + u*math.Sqrt(l2)
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
		next := tr.S[(i+1)%n]
		if i == n-1 {
			next = tr.Length
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
func (tr *Track) Heading() float64 {
	d := tr.Pts[1].sub(tr.Pts[0])
	return math.Atan2(d.Y, d.X)
}
