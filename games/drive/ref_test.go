package drive

import (
	"encoding/json"
	"flag"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tilebench/games"
	"tilebench/internal/atomicfile"
	"tilebench/internal/reftest"
	"tilebench/internal/seeds"
)

// refDoc is the exchange document of testdata/ref/catmull_rom_ref.py.
type refDoc struct {
	Source   string       `json:"source,omitempty"`
	Circuits []refCircuit `json:"circuits"`
}

type refCircuit struct {
	Control       [][2]float64 `json:"control"`
	T             []float64    `json:"t"`
	Pos           [][2]float64 `json:"pos,omitempty"`
	Kappa         []float64    `json:"kappa,omitempty"`
	SegmentLength []float64    `json:"segment_length,omitempty"`
}

const refGolden = "testdata/catmull_rom_ref.json"

var updateRef = flag.Bool("update-ref", false, "rerun testdata/ref/catmull_rom_ref.py and rewrite "+refGolden)

// refInput is the script's input: the control points of three held-out
// circuits and 64 random spline parameters on each.
func refInput(t *testing.T) refDoc {
	var doc refDoc
	rng := seeds.NewRand(5)
	for i := 0; i < 3; i++ {
		tr, err := NewTrack(games.HeldOut(i), TrackConfig{})
		if err != nil {
			t.Fatal(err)
		}
		var c refCircuit
		for _, p := range tr.Control {
			c.Control = append(c.Control, [2]float64{p.X, p.Y})
		}
		for k := 0; k < 64; k++ {
			c.T = append(c.T, float64(len(tr.Control))*rng.Float64())
		}
		doc.Circuits = append(doc.Circuits, c)
	}
	return doc
}

// checkAgainstRef compares the spline, its curvature and the circuit
// length with the reference values.
func checkAgainstRef(t *testing.T, doc refDoc) {
	t.Helper()
	if len(doc.Circuits) == 0 {
		t.Fatal("no circuits in the reference")
	}
	for ci, c := range doc.Circuits {
		ctrl := make([]Vec, len(c.Control))
		for i, p := range c.Control {
			ctrl[i] = Vec{p[0], p[1]}
		}
		tr := buildTrack(ctrl, 9, 48)
		for i, tt := range c.T {
			k := int(math.Floor(tt))
			p, d1, d2 := tr.Eval(k, tt-float64(k))
			if math.Hypot(p.X-c.Pos[i][0], p.Y-c.Pos[i][1]) > 1e-9 {
				t.Fatalf("circuit %d t=%v: position %v, SciPy %v", ci, tt, p, c.Pos[i])
			}
			kap := d1.cross(d2) / math.Pow(d1.norm(), 3)
			if math.Abs(kap-c.Kappa[i]) > 1e-9*(1+math.Abs(c.Kappa[i])) {
				t.Fatalf("circuit %d t=%v: curvature %v, SciPy %v", ci, tt, kap, c.Kappa[i])
			}
		}
		var arc float64
		for _, l := range c.SegmentLength {
			arc += l
		}
		if rel := math.Abs(tr.Length-arc) / arc; rel > 5e-4 {
			t.Errorf("circuit %d: length %v m, SciPy quad %v m (rel. %v)", ci, tr.Length, arc, rel)
		}
	}
}

// The spline matches SciPy's CubicHermiteSpline with Catmull–Rom tangents,
// and the circuit length SciPy's quad, using the committed golden output of
// testdata/ref/catmull_rom_ref.py (regenerate with -args -update-ref).
func TestCatmullRomMatchesSciPyGolden(t *testing.T) {
	if *updateRef {
		reftest.Need(t, "numpy", "scipy")
		doc := runRef(t, refInput(t))
		data, err := json.MarshalIndent(doc, "", " ")
		if err != nil {
			t.Fatal(err)
		}
		if err := atomicfile.WriteBytes(refGolden, append(data, '\n')); err != nil {
			t.Fatal(err)
		}
	}
	data, err := os.ReadFile(refGolden)
	if err != nil {
		t.Fatal(err)
	}
	var doc refDoc
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	checkAgainstRef(t, doc)
}

// The same check run live against SciPy on today's circuits.
func TestRefCatmullRomSciPy(t *testing.T) {
	reftest.Need(t, "numpy", "scipy")
	checkAgainstRef(t, runRef(t, refInput(t)))
}

// runScript writes in as JSON, runs the reference script on it and
// decodes its output into out.
func runScript(t *testing.T, script string, in, out any) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "in.json")
	data, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(reftest.Run(t, script, path), out); err != nil {
		t.Fatal(err)
	}
}

func runRef(t *testing.T, in refDoc) (out refDoc) {
	runScript(t, "catmull_rom_ref.py", in, &out)
	return out
}

func runBike(t *testing.T, in bikeDoc) (out bikeDoc) {
	runScript(t, "bicycle_ref.py", in, &out)
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

// bikeInput: four runs of 200 steps with random steering and throttle or
// brake, chosen so that the car never stops (the model has no reverse).
func bikeInput() (bikeDoc, [][][3]float64) {
	p := CarParams{}.withDefaults()
	doc := bikeDoc{Wheelbase: p.Wheelbase, DT: DT}
	var actions [][][3]float64
	rng := seeds.NewRand(17)
	for r := 0; r < 4; r++ {
		run := bikeRun{Start: [4]float64{10 * rng.Float64(), -5 * rng.Float64(), 2*rng.Float64() - 1, 6 + 4*rng.Float64()}}
		var acts [][3]float64
		steer := 0.0
		for k := 0; k < 200; k++ {
			steer = math.Max(-1, math.Min(1, steer+0.3*(2*rng.Float64()-1)))
			thr, brk := 0.0, 0.0
			if rng.IntN(2) == 0 {
				thr = rng.Float64()
			} else {
				brk = 0.2 * rng.Float64()
			}
			acts = append(acts, [3]float64{steer, thr, brk})
			run.Inputs = append(run.Inputs, [2]float64{steer * p.MaxSteer, thr*p.MaxAccel - brk*p.MaxBrake})
		}
		doc.Runs = append(doc.Runs, run)
		actions = append(actions, acts)
	}
	return doc, actions
}

// checkBike drives the car (no drag, rolling resistance or grip cap, so
// the model is exactly Rajamani's) through each run's actions and
// compares every state with the ODE solution.
func checkBike(t *testing.T, doc bikeDoc, actions [][][3]float64) {
	t.Helper()
	if len(doc.Runs) != len(actions) {
		t.Fatalf("%d reference runs for %d action lists", len(doc.Runs), len(actions))
	}
	for r, run := range doc.Runs {
		c := NewCar(CarParams{Rolling: -1, Drag: -1, Grip: -1})
		c.Pos = Vec{run.Start[0], run.Start[1]}
		c.Heading, c.Speed = run.Start[2], run.Start[3]
		for k, a := range actions[r] {
			c.Advance(a[0], a[1], a[2], doc.DT)
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
	if *updateRef {
		reftest.Need(t, "scipy")
		data, err := json.MarshalIndent(runBike(t, in), "", " ")
		if err != nil {
			t.Fatal(err)
		}
		if err := atomicfile.WriteBytes(bikeGolden, append(data, '\n')); err != nil {
			t.Fatal(err)
		}
	}
	data, err := os.ReadFile(bikeGolden)
	if err != nil {
		t.Fatal(err)
	}
	var doc bikeDoc
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	checkBike(t, doc, actions)
}

// The same check run live against SciPy.
func TestRefBicycleSciPy(t *testing.T) {
	reftest.Need(t, "scipy")
	in, actions := bikeInput()
	checkBike(t, runBike(t, in), actions)
}
