package paddle

import (
	"flag"
	"math"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/internal/seeds"
)

var updateRef = flag.Bool("update-ref", false, "rewrite testdata/track_ref.json from testdata/ref/paddle_track_ref.py")

// trackDoc is the exchange document of testdata/ref/paddle_track_ref.py.
type trackDoc struct {
	Source string      `json:"source,omitempty"`
	Centre [2]float64  `json:"centre"`
	Rho    float64     `json:"rho"`
	Shots  []trackShot `json:"shots"`
}

type trackShot struct {
	Ball  [4]float64 `json:"ball"`
	T     float64    `json:"t,omitempty"`
	After [2]float64 `json:"after,omitempty"`
}

const trackGolden = "testdata/track_ref.json"

// trackInput is 200 random shots from inside the track's circle.
func trackInput() trackDoc {
	rng := seeds.NewRand(29)
	doc := trackDoc{Centre: [2]float64{TrackCX, TrackCY}, Rho: TrackR - 1.6}
	for i := 0; i < 200; i++ {
		rad, ang := doc.Rho*math.Sqrt(rng.Float64()), 2*math.Pi*rng.Float64()
		va, s := 2*math.Pi*rng.Float64(), 0.2+4*rng.Float64()
		doc.Shots = append(doc.Shots, trackShot{Ball: [4]float64{TrackCX + rad*math.Cos(ang), TrackCY + rad*math.Sin(ang), s * math.Cos(va), s * math.Sin(va)}})
	}
	return doc
}

func runTrackRef(t *testing.T, in trackDoc) (out trackDoc) {
	reftest.RunJSON(t, "paddle_track_ref.py", in, &out)
	return out
}

// checkTrack compares the game's meeting time and mirror bounce (the
// closed box's track) with the reference document.
func checkTrack(t *testing.T, doc trackDoc) {
	t.Helper()
	if len(doc.Shots) != 200 {
		t.Fatalf("%d shots in the reference", len(doc.Shots))
	}
	g := newGame(t, "")
	g.closed = true
	bounced := 0
	for i, s := range doc.Shots {
		b := Ball{X: s.Ball[0], Y: s.Ball[1], VX: s.Ball[2], VY: s.Ball[3]}
		tt := trackTime(b, doc.Rho)
		if math.Abs(tt-s.T) > 1e-9*math.Max(1, s.T) {
			t.Fatalf("shot %d: meets the track after %v steps, NumPy says %v", i, tt, s.T)
		}
		// The bounce itself, through advance: put the ball just before
		// the meeting point so it hits within one step.
		lead := math.Min(0.5, tt)
		g.ball = Ball{X: b.X + b.VX*(tt-lead), Y: b.Y + b.VY*(tt-lead), VX: b.VX, VY: b.VY}
		g.nEvents = 0
		g.advance(lead + 1e-9)
		evs := g.Events()
		if len(evs) == 0 || evs[0].Kind != HitTrack {
			if len(evs) > 0 && evs[0].Kind != HitTrack {
				continue // a rail or the far wall first: not this check's business
			}
			t.Fatalf("shot %d: no track bounce (%+v)", i, evs)
		}
		if a := evs[0].After; math.Abs(a.VX-s.After[0]) > 1e-9 || math.Abs(a.VY-s.After[1]) > 1e-9 {
			t.Fatalf("shot %d: leaves the mirror at (%v,%v), NumPy says %v", i, a.VX, a.VY, s.After)
		}
		bounced++
	}
	if bounced < 100 {
		t.Fatalf("only %d of the shots bounced off the track", bounced)
	}
}

// The track's meeting time and mirror bounce match NumPy's (numpy.roots
// and a Householder reflection), from the committed output of
// testdata/ref/paddle_track_ref.py (regenerate with -args -update-ref).
func TestTrackMatchesNumPyGolden(t *testing.T) {
	doc := reftest.Golden(t, trackGolden, *updateRef, func() trackDoc { return runTrackRef(t, trackInput()) }, "numpy")
	checkTrack(t, doc)
}

// The same check run live against NumPy.
func TestRefTrackNumPy(t *testing.T) {
	reftest.Need(t, "numpy")
	checkTrack(t, runTrackRef(t, trackInput()))
}
