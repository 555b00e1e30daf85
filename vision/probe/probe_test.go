package probe

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision/nets"
	"tilebench/vision/study"
)

// recording writes n frames of a built-in scene as a uint8 .npy and
// returns its path; the frame size is the scene's, whatever it is.
func recording(t testing.TB, dir string, n, w, h int) string {
	t.Helper()
	r, err := frameio.Builtin("drift", n, w, h)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	path := filepath.Join(dir, "rec.npy")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	nw, err := frameio.NewNPYWriter(f, w, h, 3, n)
	if err != nil {
		t.Fatal(err)
	}
	for {
		fr, err := r.Next()
		if err != nil {
			break
		}
		if err := nw.WriteFrame(fr); err != nil {
			t.Fatal(err)
		}
	}
	if err := nw.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	return path
}

// writeNPY writes a float64 (or int64 when ints) array of shape rows×width.
func writeNPY(t testing.TB, path string, rows, width int, ints bool, v func(i, j int) float64) {
	t.Helper()
	descr := "<f8"
	if ints {
		descr = "<i8"
	}
	shape := fmt.Sprintf("(%d, %d)", rows, width)
	if width == 1 {
		shape = fmt.Sprintf("(%d,)", rows)
	}
	h := fmt.Sprintf("{'descr': '%s', 'fortran_order': False, 'shape': %s, }", descr, shape)
	for (10+len(h)+1)%64 != 0 {
		h += " "
	}
	h += "\n"
	var b bytes.Buffer
	b.WriteString("\x93NUMPY\x01\x00")
	binary.Write(&b, binary.LittleEndian, uint16(len(h)))
	b.WriteString(h)
	for i := 0; i < rows; i++ {
		for j := 0; j < width; j++ {
			if ints {
				binary.Write(&b, binary.LittleEndian, int64(v(i, j)))
			} else {
				binary.Write(&b, binary.LittleEndian, v(i, j))
			}
		}
	}
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func plan(t testing.TB, c Config) *Plan {
	t.Helper()
	p, err := NewPlan(c)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func runProbe(t testing.TB, p *Plan, opt Options) *Outcome {
	t.Helper()
	o, err := Run(context.Background(), p, opt)
	if err != nil {
		t.Fatal(err)
	}
	if o.Failed > 0 {
		t.Fatalf("%d units failed: %s", o.Failed, o.FirstFailure)
	}
	return o
}

func cellByLabel(t testing.TB, s *Summary, label string) CellStats {
	t.Helper()
	for _, c := range s.Cells {
		if c.Label == label {
			return c
		}
	}
	t.Fatalf("no cell %q", label)
	return CellStats{}
}

func summary(t testing.TB, dir string) *Summary {
	t.Helper()
	in, err := ReadInfo(dir)
	if err != nil {
		t.Fatal(err)
	}
	recs, _, err := ReadResults(dir)
	if err != nil {
		t.Fatal(err)
	}
	s, err := Analyze(&in.Plan, recs)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestScrambleInvariance: the mean-pooling family ignores token order by
// construction (a mean over tokens; the family's definition in
// docs/families.md), so under a full scramble its action moves only by
// float32 rounding of the summation order; the position-aware attention
// family reads each token's cell and must move.
func TestScrambleInvariance(t *testing.T) {
	dir := t.TempDir()
	// The trained position-aware weights fix the frame size; the
	// recording is made at that size, whatever the game renders today.
	pos := filepath.Join("..", "..", "testdata", "policies", "drive-posattention-p8.safetensors")
	n, err := nets.Load(pos)
	if err != nil {
		t.Fatal(err)
	}
	g := n.Grid()
	rec := recording(t, dir, 24, g.Width, g.Height)
	maxFresh := 0.0
	for _, pc := range []struct{ name, policy, family string }{
		{"meanpool", "fresh", "meanpool"}, {"posattention", pos, ""}} {
		p := plan(t, Config{In: rec, Policy: pc.policy, Family: pc.family, ActionSpace: actionSpaceOf(n),
			Axes: study.Axes{Scramble: study.Axis{"none,full"}}, Resamples: 200})
		out := filepath.Join(dir, pc.name)
		runProbe(t, p, Options{Dir: out, Workers: 2})
		c := cellByLabel(t, summary(t, out), "scramble full")
		if c.Frames != 24 {
			t.Fatalf("%s: %d frames, want 24", pc.name, c.Frames)
		}
		if pc.name == "meanpool" {
			maxFresh = c.Max
			if c.Max > 1e-5 {
				t.Errorf("meanpool under a full scramble: max drift %g, want ≤ 1e-5 (float tolerance)", c.Max)
			}
		} else if !(c.Drift.Value > 1e-3 && c.Drift.Value > 1000*maxFresh) {
			t.Errorf("posattention under a full scramble: mean drift %g, want a real change (> 1e-3 and > 1000× meanpool's %g)", c.Drift.Value, maxFresh)
		}
	}
}

// actionSpaceOf spells a net's action space for Config.ActionSpace.
func actionSpaceOf(n nets.Net) string {
	s := n.Space()
	if s.Kind == games.Discrete {
		return fmt.Sprintf("discrete:%d", s.Choices())
	}
	return fmt.Sprintf("continuous:%d", s.Dim())
}

func read(t testing.TB, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestDeterminism: results.jsonl is the same bytes with 1 or 3 workers,
// and two shards merged give the same bytes again; so does a run killed
// mid-line and resumed.
func TestDeterminism(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 30, 40, 32)
	eps := filepath.Join(dir, "episodes.csv")
	os.WriteFile(eps, []byte("start\n0\n9\n17\n"), 0o644)
	acts := filepath.Join(dir, "actions.npy")
	writeNPY(t, acts, 30, 2, false, func(i, j int) float64 { return math.Sin(float64(i+j)) / 2 })
	cfg := Config{In: rec, Episodes: eps, Actions: acts, Policy: "fresh", Family: "attention", ActionSpace: "continuous:2",
		Axes: study.Axes{Scramble: study.Axis{"none,partial:0.5"}, Occlude: study.Axis{"none,random:0.3"}, NoiseTokens: study.Axis{"0,4"}}, Resamples: 200, Seed: 3}
	p := plan(t, cfg)
	one := filepath.Join(dir, "one")
	runProbe(t, p, Options{Dir: one, Workers: 1})
	three := filepath.Join(dir, "three")
	runProbe(t, p, Options{Dir: three, Workers: 3})
	want := read(t, filepath.Join(one, resultsFile))
	if !bytes.Equal(want, read(t, filepath.Join(three, resultsFile))) {
		t.Fatal("results differ between 1 and 3 workers")
	}
	if n := bytes.Count(want, []byte("\n")); n != p.Units() {
		t.Fatalf("%d lines, want %d (one per sequence per cell)", n, p.Units())
	}
	var shards []string
	for i := 0; i < 2; i++ {
		d := filepath.Join(dir, fmt.Sprintf("shard%d", i))
		runProbe(t, p, Options{Dir: d, Workers: 2, Shard: study.Shard{Index: i, Count: 2}, NoReport: true})
		shards = append(shards, d)
	}
	merged := filepath.Join(dir, "merged")
	if _, err := merge(merged, shards, true); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(want, read(t, filepath.Join(merged, resultsFile))) {
		t.Fatal("merged shards differ from the unsharded run")
	}
	if !bytes.Equal(read(t, filepath.Join(one, jsonFile)), read(t, filepath.Join(merged, jsonFile))) {
		t.Error("summary.json of the merged shards differs")
	}
	// A kill: keep three whole lines and half of the fourth.
	killed := filepath.Join(dir, "killed")
	runProbe(t, p, Options{Dir: killed, Workers: 2, NoReport: true})
	lines := bytes.SplitAfter(want, []byte("\n"))
	cut := append(bytes.Join(lines[:3], nil), lines[3][:len(lines[3])/2]...)
	os.WriteFile(filepath.Join(killed, resultsFile), cut, 0o644)
	if _, err := Run(context.Background(), p, Options{Dir: killed, Workers: 2}); err == nil {
		t.Fatal("rerun without --resume into a used folder: no error")
	}
	o := runProbe(t, p, Options{Dir: killed, Workers: 2, Resume: true})
	if o.Kept != 3 || o.Ran != p.Units()-3 {
		t.Errorf("resume kept %d ran %d, want 3 and %d", o.Kept, o.Ran, p.Units()-3)
	}
	if !bytes.Equal(want, read(t, filepath.Join(killed, resultsFile))) {
		t.Fatal("resumed results differ")
	}
	s := summary(t, one)
	c := cellByLabel(t, s, "clean")
	if c.Drift.Value != 0 || c.CleanError == nil || c.Error.Value != c.CleanError.Value {
		t.Errorf("clean cell: drift %v, errors %+v %+v; want 0 drift and equal errors", c.Drift, c.CleanError, c.Error)
	}
	if s.Method != "moving-block bootstrap" || s.Sequences != 3 {
		t.Errorf("method %q over %d sequences", s.Method, s.Sequences)
	}
}

// TestBadInput: each problem is one line naming the file, the row and
// what was expected, and nothing is written.
func TestBadInput(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 20, 32, 32)
	w := func(name, s string) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, []byte(s), 0o644)
		return p
	}
	short := filepath.Join(dir, "short.npy")
	writeNPY(t, short, 19, 2, false, func(i, j int) float64 { return 0 })
	wide := filepath.Join(dir, "wide.npy")
	writeNPY(t, wide, 20, 3, false, func(i, j int) float64 { return 0 })
	badChoice := filepath.Join(dir, "choice.npy")
	writeNPY(t, badChoice, 20, 1, true, func(i, j int) float64 { return float64(i % 4) })
	mixed := filepath.Join(dir, "mixed")
	os.Mkdir(mixed, 0o755)
	for i, sz := range []int{16, 16, 12} {
		f, _ := os.Create(filepath.Join(mixed, fmt.Sprintf("f%d.png", i)))
		img := image.NewRGBA(image.Rect(0, 0, sz, sz))
		img.Set(0, 0, color.White)
		png.Encode(f, img)
		f.Close()
	}
	base := Config{In: rec, Policy: "fresh", ActionSpace: "continuous:2"}
	for _, c := range []struct {
		name string
		mod  func(*Config)
		want []string
	}{
		{"unsorted", func(c *Config) { c.Episodes = w("e1.csv", "0\n10\n5\n") }, []string{"e1.csv", "line 3", "not after the previous start 10"}},
		{"out of range", func(c *Config) { c.Episodes = w("e2.csv", "start\n0\n25\n") }, []string{"e2.csv", "line 3", "frames 0..19"}},
		{"not from 0", func(c *Config) { c.Episodes = w("e3.csv", "4\n") }, []string{"e3.csv", "line 1", "start at frame 0"}},
		{"id comes back", func(c *Config) {
			c.Episodes = w("e4.csv", "sequence\n"+strings.Repeat("a\n", 5)+strings.Repeat("b\n", 5)+strings.Repeat("a\n", 10))
		}, []string{"e4.csv", "line 12", "contiguous"}},
		{"too few ids", func(c *Config) { c.Episodes = w("e5.csv", "sequence\n"+strings.Repeat("a\n", 7)) }, []string{"e5.csv", "7 sequence ids", "20 frames"}},
		{"actions length", func(c *Config) { c.Actions = short }, []string{"short.npy", "19 rows", "20 frames"}},
		{"actions width", func(c *Config) { c.Actions = wide }, []string{"wide.npy", "3 values per row", "have 2"}},
		{"choice out of range", func(c *Config) { c.Actions, c.ActionSpace = badChoice, "discrete:3" }, []string{"choice.npy", "row 3", "0..2"}},
		{"mixed sizes", func(c *Config) { c.In = mixed }, []string{"frame 2", "f2.png", "12x12", "16x16"}},
		{"no action space", func(c *Config) { c.ActionSpace = "" }, []string{"--action-space"}},
		{"expert", func(c *Config) { c.Policy = "expert" }, []string{"no game"}},
	} {
		cfg := base
		c.mod(&cfg)
		_, err := NewPlan(cfg)
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		msg := err.Error()
		if strings.Contains(msg, "\n") {
			t.Errorf("%s: error spans lines: %q", c.name, msg)
		}
		for _, w := range c.want {
			if !strings.Contains(msg, w) {
				t.Errorf("%s: error %q does not say %q", c.name, msg, w)
			}
		}
	}
	// A weights file for another frame size, without --resize.
	pol := filepath.Join("..", "..", "testdata", "policies", "drive-attention-p8.safetensors")
	if _, err := NewPlan(Config{In: rec, Policy: pol}); err == nil || !strings.Contains(err.Error(), "--resize") {
		t.Errorf("weights for another size: %v", err)
	}
}

// TestRecordedDiscrete: a discrete policy against recorded choices gives
// agreement rates with Wilson intervals that hold the rate.
func TestRecordedDiscrete(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 40, 32, 32)
	acts := filepath.Join(dir, "a.npy")
	writeNPY(t, acts, 40, 1, true, func(i, j int) float64 { return float64(i / 10 % 3) })
	p := plan(t, Config{In: rec, Actions: acts, Policy: "fresh", Family: "attention",
		Axes: study.Axes{Occlude: study.Axis{"none,block:0.5"}}, Resamples: 200})
	if !p.Space.Discrete() || p.Space.Choices != 3 {
		t.Fatalf("space %+v, want discrete of 3 (from integer actions)", p.Space)
	}
	out := filepath.Join(dir, "o")
	runProbe(t, p, Options{Dir: out, Workers: 2})
	for _, c := range summary(t, out).Cells {
		if c.Agreement == nil || c.CleanAgreement == nil {
			t.Fatalf("cell %s: no agreement", c.Label)
		}
		a := c.Agreement
		if !(a.WilsonLo <= a.Value && a.Value <= a.WilsonHi) || a.Trials != 40 {
			t.Errorf("cell %s: agreement %+v", c.Label, a)
		}
		for _, d := range []float64{c.Drift.Value, c.Held.Value} {
			if d < 0 || d > 1 {
				t.Errorf("cell %s: rate %v outside [0, 1]", c.Label, d)
			}
		}
	}
}

func TestParseActionSpace(t *testing.T) {
	for _, s := range []string{"continuous:3", "continuous:2:-2:2", "discrete:5"} {
		if _, err := ParseActionSpace(s); err != nil {
			t.Errorf("%s: %v", s, err)
		}
	}
	for _, s := range []string{"", "continuous", "continuous:0", "discrete:1", "continuous:2:1:1", "box:2"} {
		if _, err := ParseActionSpace(s); err == nil {
			t.Errorf("%q: no error", s)
		}
	}
}

// TestCleanReassembly backs the runner's shortcut: on a grid that covers
// the frame exactly, the clean tokens reassemble into the frame byte for
// byte (uint8 → float32 v/255 → round(v·255) is the identity on 0..255).
func TestCleanReassembly(t *testing.T) {
	grid, err := patch.NewGrid(patch.GridConfig{Width: 40, Height: 24, PatchW: 8})
	if err != nil {
		t.Fatal(err)
	}
	img := image.NewRGBA(image.Rect(0, 0, 40, 24))
	r := patch.NewRand(5)
	for i := range img.Pix {
		img.Pix[i] = uint8(r.IntN(256))
		if i%4 == 3 {
			img.Pix[i] = 255
		}
	}
	tok := patch.NewTokenizer(grid)
	ts := patch.NewTokenSet(grid.N(), grid.D())
	if err := tok.Tokenize(img, ts); err != nil {
		t.Fatal(err)
	}
	back := image.NewRGBA(img.Rect)
	if err := tok.Assemble(ts, back); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(back.Pix, img.Pix) {
		t.Fatal("clean tokens do not reassemble into the frame")
	}
}

// TestResize: frames of another size are scaled to the policy's with
// --resize, a weights file's size is enforced, and raw RGB24 files work.
func TestResize(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 10, 50, 30)
	p := plan(t, Config{In: rec, Policy: "fresh", ActionSpace: "continuous:2", Resize: "40x24",
		Axes: study.Axes{Occlude: study.Axis{"block:0.5"}}, Resamples: 100})
	if p.Width != 40 || p.Height != 24 {
		t.Fatalf("policy frame %dx%d, want 40x24", p.Width, p.Height)
	}
	out := filepath.Join(dir, "o")
	runProbe(t, p, Options{Dir: out, Workers: 1})
	if !bytes.Contains(read(t, filepath.Join(out, "report.html")), []byte("data:image/png")) {
		t.Error("no strip frames in the report")
	}
	pos := filepath.Join("..", "..", "testdata", "policies", "drive-posattention-p8.safetensors")
	n, err := nets.Load(pos)
	if err != nil {
		t.Fatal(err)
	}
	g := n.Grid()
	if _, err := NewPlan(Config{In: rec, Policy: pos, Resize: "40x24"}); err == nil || !strings.Contains(err.Error(), fmt.Sprintf("%dx%d", g.Width, g.Height)) {
		t.Errorf("resize to another size than the weights': %v", err)
	}
	pw := plan(t, Config{In: rec, Policy: pos, Resize: fmt.Sprintf("%dx%d", g.Width, g.Height), Resamples: 100})
	runProbe(t, pw, Options{Dir: filepath.Join(dir, "w"), Workers: 1, NoReport: true})
	// The same frames as raw RGB24.
	src, _ := frameio.Builtin("drift", 6, 16, 12)
	frames, _ := frameio.ReadAll(src)
	var raw []byte
	for _, f := range frames {
		for i := 0; i < len(f.Pix); i += 4 {
			raw = append(raw, f.Pix[i], f.Pix[i+1], f.Pix[i+2])
		}
	}
	rgb := filepath.Join(dir, "f.rgb")
	os.WriteFile(rgb, raw, 0o644)
	pr := plan(t, Config{In: rgb, RawWidth: 16, RawHeight: 12, Policy: "fresh", ActionSpace: "discrete:3", Resamples: 100})
	if pr.Input.Frames != 6 {
		t.Fatalf("raw input: %d frames", pr.Input.Frames)
	}
	runProbe(t, pr, Options{Dir: filepath.Join(dir, "r"), Workers: 1, NoReport: true})
	if _, err := NewPlan(Config{In: "-", Policy: "fresh", ActionSpace: "discrete:3"}); err == nil || !strings.Contains(err.Error(), ".rgb") {
		t.Errorf("stdin: %v", err)
	}
}

// TestCorruption: the frame corruptions of a study (blur, JPEG, ...) are
// probe axes too, applied to the frame before it is cut.
func TestCorruption(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 8, 48, 32)
	p := plan(t, Config{In: rec, Policy: "fresh", Family: "mlp", ActionSpace: "continuous:2",
		Axes: study.Axes{Corrupt: study.Axis{"blur:1,jpeg:40"}}, Resamples: 100})
	out := filepath.Join(dir, "o")
	runProbe(t, p, Options{Dir: out, Workers: 2})
	s := summary(t, out)
	n := 0
	for _, c := range s.Cells {
		if c.Axis == "corruption" {
			n++
			if !(c.Drift.Value > 0) {
				t.Errorf("%s: no drift", c.Label)
			}
		}
	}
	if n != 2 {
		t.Errorf("%d corruption cells, want 2", n)
	}
}

// TestSummaryTitle: summary.md and the report say what was probed, the
// policy and the recording's file name, as a study's name its game and
// policy.
func TestSummaryTitle(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 12, 32, 32)
	for _, c := range []struct {
		cfg  Config
		want string
	}{
		{Config{In: rec, Policy: "fresh", Family: "meanpool", ActionSpace: "continuous:2"}, "probe: untrained meanpool on rec.npy"},
		{Config{Name: "bench cam", In: rec, Policy: "fresh", Family: "mlp", ActionSpace: "discrete:3"}, "bench cam: untrained mlp on rec.npy"},
	} {
		c.cfg.Resamples = 200
		out := filepath.Join(dir, c.cfg.Family)
		runProbe(t, plan(t, c.cfg), Options{Dir: out, Workers: 1})
		md := string(read(t, filepath.Join(out, "summary.md")))
		if first, _, _ := strings.Cut(md, "\n"); first != "# "+c.want {
			t.Errorf("summary.md heading %q, want %q", first, "# "+c.want)
		}
		if html := string(read(t, filepath.Join(out, "report.html"))); !strings.Contains(html, "<title>"+c.want) {
			t.Errorf("report.html does not carry the title %q", c.want)
		}
		var js map[string]any
		if err := json.Unmarshal(read(t, filepath.Join(out, jsonFile)), &js); err != nil || js["title"] != c.want {
			t.Errorf("summary.json title %v (%v), want %q", js["title"], err, c.want)
		}
	}
}
