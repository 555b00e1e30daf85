package drive

import (
	"flag"
	"math"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
	"tilebench/internal/seeds"
)

// refDoc is the exchange document of testdata/ref/circuit_ref.py.
type refDoc struct {
	Source   string       `json:"source,omitempty"`
	Circuits []refCircuit `json:"circuits"`
}

type refCircuit struct {
	Start  [3]float64   `json:"start"`
	Pieces [][2]float64 `json:"pieces"` // length (m), curvature (1/m)
	S      []float64    `json:"s"`
	At     [][3]float64 `json:"at,omitempty"`
	End    []float64    `json:"end,omitempty"`
}

const refGolden = "testdata/circuit_ref.json"

var updateRef = flag.Bool("update-ref", false, "rerun the reference scripts and rewrite "+refGolden+" and "+bikeGolden)

// refInput is the script's input: the pieces of four held-out circuits
// (two default, two of the harder family) and 64 random arc lengths on
// each.
func refInput(t *testing.T) refDoc {
	var doc refDoc
	rng := seeds.NewRand(5)
	twisty, _, _ := ParseVariation("twisty")
	for i, cfg := range []TrackConfig{{}, {}, twisty.Track, twisty.Track} {
		tr, err := NewTrack(games.HeldOut(i), cfg)
		if err != nil {
			t.Fatal(err)
		}
		c := refCircuit{Start: [3]float64{tr.Start.X, tr.Start.Y, tr.StartHeading}}
		for _, pc := range tr.Pieces {
			c.Pieces = append(c.Pieces, [2]float64{pc.Length, pc.Kappa})
		}
		for k := 0; k < 64; k++ {
			c.S = append(c.S, tr.Length*rng.Float64())
		}
		doc.Circuits = append(doc.Circuits, c)
	}
	return doc
}

// checkAgainstRef walks each circuit's pieces with advance (exact
// straights and arcs) and compares position and heading at every arc
// length, and the closing point, with the ODE solution; it also checks
// that the sampled centreline (Track.At) lies on it.
func checkAgainstRef(t *testing.T, doc refDoc) {
	t.Helper()
	if len(doc.Circuits) == 0 {
		t.Fatal("no circuits in the reference")
	}
	for ci, c := range doc.Circuits {
		if len(c.At) != len(c.S) || len(c.End) != 3 {
			t.Fatalf("circuit %d: reference has %d points for %d arc lengths", ci, len(c.At), len(c.S))
		}
		tr := &Track{Start: Vec{c.Start[0], c.Start[1]}, StartHeading: c.Start[2], Width: 9}
		for _, pc := range c.Pieces {
			tr.Pieces = append(tr.Pieces, Piece{Length: pc[0], Kappa: pc[1]})
		}
		tr.sample(TrackConfig{}.withDefaults())
		for i, s := range c.S {
			p, h, left := tr.Start, tr.StartHeading, s
			for _, pc := range tr.Pieces {
				if left <= pc.Length {
					p, h = advance(p, h, pc.Kappa, left)
					break
				}
				p, h = advance(p, h, pc.Kappa, pc.Length)
				left -= pc.Length
			}
			want := c.At[i]
			if math.Hypot(p.X-want[0], p.Y-want[1]) > 1e-7 || math.Abs(h-want[2]) > 1e-9 {
				t.Fatalf("circuit %d s=%v: (%v, %v, %v), SciPy %v", ci, s, p.X, p.Y, h, want)
			}
			// The sampled polyline's chords stray at most 1/(8R) m from
			// the arcs (sagitta of a 1 m chord).
			q, _, _ := tr.At(s, 0)
			if d := math.Hypot(q.X-want[0], q.Y-want[1]); d > 1.0/(8*16)+1e-6 {
				t.Fatalf("circuit %d s=%v: centreline sample %v m from SciPy's curve", ci, s, d)
			}
		}
		end, h := tr.End()
		if math.Hypot(end.X-c.End[0], end.Y-c.End[1]) > 1e-7 || math.Abs(h-c.End[2]) > 1e-9 {
			t.Fatalf("circuit %d: ends at (%v, %v, %v), SciPy %v", ci, end.X, end.Y, h, c.End)
		}
		// SciPy's walk closes on the start line one full turn round.
		if math.Hypot(c.End[0]-c.Start[0], c.End[1]-c.Start[1]) > 1e-7 || math.Abs(c.End[2]-c.Start[2]-2*math.Pi) > 1e-9 {
			t.Fatalf("circuit %d: SciPy's walk ends at %v, not back at the start %v", ci, c.End, c.Start)
		}
	}
}

// The circuit geometry matches SciPy's integration of the plane curve
// equations, using the committed golden output of
// testdata/ref/circuit_ref.py (regenerate with -args -update-ref).
func TestCircuitMatchesSciPyGolden(t *testing.T) {
	doc := reftest.Golden(t, refGolden, *updateRef, func() refDoc { return runRef(t, refInput(t)) }, "scipy")
	checkAgainstRef(t, doc)
}

// The same check run live against SciPy on today's circuits.
func TestRefCircuitSciPy(t *testing.T) {
	reftest.Need(t, "scipy")
	checkAgainstRef(t, runRef(t, refInput(t)))
}

func runRef(t *testing.T, in refDoc) (out refDoc) {
	reftest.RunJSON(t, "circuit_ref.py", in, &out)
	return out
}

func runBike(t *testing.T, in bikeDoc) (out bikeDoc) {
	reftest.RunJSON(t, "bicycle_ref.py", in, &out)
	return out
}

// bikeDoc is the exchange document of testdata/ref/bicycle_ref.py.
type bikeDoc struct {
	Source    string    `json:"source,omitempty"`
	Wheelbase float64   `json:"wheelbase"`
	DT        float64   `json:"dt"`
	Runs      []bikeRun `json:"runs"`
}

type bikeRun struct {
	Start  [4]float64   `json:"start"`
	Inputs [][2]float64 `json:"inputs"` // steering angle δ (rad), acceleration (m/s²)
	States [][4]float64 `json:"states,omitempty"`
}

const bikeGolden = "testdata/bicycle_ref.json"

// bikeInput: four runs of 200 steps with random steering and a pedal
// that drives or brakes, chosen so that the car never stops (the model has no reverse).
func bikeInput() (bikeDoc, [][][2]float64) {
	p := CarParams{}.withDefaults()
	doc := bikeDoc{Wheelbase: p.Wheelbase, DT: DT}
	var actions [][][2]float64
	rng := seeds.NewRand(17)
	for r := 0; r < 4; r++ {
		run := bikeRun{Start: [4]float64{10 * rng.Float64(), -5 * rng.Float64(), 2*rng.Float64() - 1, 6 + 4*rng.Float64()}}
		var acts [][2]float64
		steer := 0.0
		for k := 0; k < 200; k++ {
			steer = math.Max(-1, math.Min(1, steer+0.3*(2*rng.Float64()-1)))
			pedal := rng.Float64() // drive
			if rng.IntN(2) == 0 {
				pedal = -0.2 * rng.Float64() // brake gently
			}
			acts = append(acts, [2]float64{steer, pedal})
			a := pedal * p.MaxAccel
			if pedal < 0 {
				a = pedal * p.MaxBrake
			}
			run.Inputs = append(run.Inputs, [2]float64{steer * p.MaxSteer, a})
		}
		doc.Runs = append(doc.Runs, run)
		actions = append(actions, acts)
	}
	return doc, actions
}

// checkBike drives the car (no drag, rolling resistance or grip cap, so
// the model is exactly Rajamani's) through each run's actions and
// compares every state with the ODE solution.
func checkBike(t *testing.T, doc bikeDoc, actions [][][2]float64) {
	t.Helper()
	if len(doc.Runs) != len(actions) {
		t.Fatalf("%d reference runs for %d action lists", len(doc.Runs), len(actions))
	}
	for r, run := range doc.Runs {
		c := NewCar(CarParams{Rolling: -1, Drag: -1, Grip: -1})
		c.Pos = Vec{run.Start[0], run.Start[1]}
		c.Heading, c.Speed = run.Start[2], run.Start[3]
		for k, a := range actions[r] {
			c.Advance(a[0], a[1], doc.DT)
			want := run.States[k]
			dpsi := math.Abs(wrapAngle(c.Heading - want[2]))
			if math.Hypot(c.Pos.X-want[0], c.Pos.Y-want[1]) > 1e-7 || dpsi > 1e-9 || math.Abs(c.Speed-want[3]) > 1e-9 {
				t.Fatalf("run %d step %d: car (%v, %v, %v, %v), ODE %v", r, k, c.Pos.X, c.Pos.Y, c.Heading, c.Speed, want)
			}
		}
	}
}

// The car's stepping matches SciPy's ODE solution of the kinematic
// bicycle model, using the committed golden output of
// testdata/ref/bicycle_ref.py (regenerate with -args -update-ref).
func TestBicycleMatchesSciPyGolden(t *testing.T) {
	in, actions := bikeInput()
	doc := reftest.Golden(t, bikeGolden, *updateRef, func() bikeDoc { return runBike(t, in) }, "scipy")
	checkBike(t, doc, actions)
}

// The same check run live against SciPy.
func TestRefBicycleSciPy(t *testing.T) {
	reftest.Need(t, "scipy")
	in, actions := bikeInput()
	checkBike(t, runBike(t, in), actions)
}
