package policies_test

import (
	"errors"
	"flag"
	"io"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tilebench/games"
	_ "tilebench/games/all" // the built-in games
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/policies"
)

func paddle(t *testing.T) games.Game {
	t.Helper()
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	return g
}

func TestKind(t *testing.T) {
	for src, want := range map[string]string{
		"expert": policies.KindExpert, "fresh": policies.KindFresh, "meanpool": policies.KindFamily,
		"exec:python3 x.py": policies.KindExternal, "tcp://h:1": policies.KindExternal,
		"p{patch}.safetensors": policies.KindFile, "runs/a.safetensors": policies.KindFile,
	} {
		if got := policies.Kind(src); got != want {
			t.Errorf("Kind(%q) = %s, want %s", src, got, want)
		}
	}
}

func TestAutoPatch(t *testing.T) {
	// The first of 8, 7, 6, 12, 4 dividing both sides.
	for _, c := range [][3]int{{96, 96, 8}, {84, 84, 7}, {90, 60, 6}, {100, 100, 4}, {101, 99, 8}} {
		if got := policies.AutoPatch(c[0], c[1]); got != c[2] {
			t.Errorf("AutoPatch(%d,%d) = %d, want %d", c[0], c[1], got, c[2])
		}
	}
}

// act returns the policy's first action on a fixed token set.
func act(t *testing.T, pol vision.Policy, grid *patch.Grid, sp games.Spec) []float64 {
	t.Helper()
	obs := nets.RandomObservation(grid, sp.Action, 3)
	a := make([]float64, sp.Action.Dim())
	pol.Reset(0)
	if err := pol.Act(obs, a); err != nil {
		t.Fatal(err)
	}
	return a
}

func TestOpenNetworks(t *testing.T) {
	g := paddle(t)
	sp := g.Spec()
	grid, err := policies.GridFor("fresh", sp, "")
	if err != nil {
		t.Fatal(err)
	}
	if grid.PatchW != 8 {
		t.Fatalf("automatic patch on %dx%d: %d, want 8", sp.Width, sp.Height, grid.PatchW)
	}
	ex, err := policies.Open("expert", g, grid, policies.Options{})
	if err != nil || !ex.Info().ReadsState {
		t.Fatalf("expert: %v %+v", err, ex)
	}
	// fresh is an untrained network of Options.Family; a family name is
	// the same network; the seed decides its weights.
	fresh, err := policies.Open("fresh", g, grid, policies.Options{Family: "meanpool", InitSeed: 5})
	if err != nil {
		t.Fatal(err)
	}
	fam, err := policies.Open("meanpool", g, grid, policies.Options{InitSeed: 5})
	if err != nil {
		t.Fatal(err)
	}
	if fresh.Info().Family != "meanpool" || fam.Info().Family != "meanpool" {
		t.Fatalf("families %s %s", fresh.Info().Family, fam.Info().Family)
	}
	a, b := act(t, fresh, grid, sp), act(t, fam, grid, sp)
	for i := range a {
		if a[i] != b[i] {
			t.Errorf("fresh meanpool and meanpool with one seed act %v and %v", a, b)
		}
	}
}

func TestOpenFileAndTemplate(t *testing.T) {
	g := paddle(t)
	sp := g.Spec()
	dir := t.TempDir()
	for _, ps := range []int{6, 7} {
		grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: ps})
		if err != nil {
			t.Fatal(err)
		}
		n, err := nets.New(nets.Config{Family: "meanpool"}, grid, sp.Action, uint64(ps))
		if err != nil {
			t.Fatal(err)
		}
		if err := nets.Save(filepath.Join(dir, "pool-p"+string(rune('0'+ps))+".safetensors"), n, nil); err != nil {
			t.Fatal(err)
		}
	}
	one := filepath.Join(dir, "pool-p6.safetensors")
	// A single file brings its own grid.
	grid, err := policies.GridFor(one, sp, "")
	if err != nil || grid.PatchW != 6 {
		t.Fatalf("GridFor file: %v %v", grid, err)
	}
	if ps, ok := policies.PatchOf(one); !ok || ps != 6 {
		t.Fatalf("PatchOf %d %v", ps, ok)
	}
	if _, err := policies.Open(one, g, grid, policies.Options{}); err != nil {
		t.Fatal(err)
	}
	// The wrong patch size is refused, naming both.
	g7, _ := policies.GridFor("fresh", sp, "7")
	if _, err := policies.Open(one, g, g7, policies.Options{}); err == nil || !strings.Contains(err.Error(), "weights are for patch 6x6") {
		t.Fatalf("wrong patch: %v", err)
	}
	// A template names one file per patch size; a Cache reads each once
	// and hands out copies.
	var cache policies.Cache
	tmpl := filepath.Join(dir, "pool-p{patch}.safetensors")
	for _, gr := range []*patch.Grid{grid, g7, g7} {
		pol, err := cache.Open(tmpl, g, gr, policies.Options{})
		if err != nil {
			t.Fatalf("template at patch %d: %v", gr.PatchW, err)
		}
		if pol.(nets.Net).Grid().PatchW != gr.PatchW {
			t.Fatalf("template at patch %d opened patch %d", gr.PatchW, pol.(nets.Net).Grid().PatchW)
		}
	}
	// A frame size from another game is refused.
	drive, _ := games.Build("drive", games.Setup{})
	dg, _ := policies.GridFor("fresh", drive.Spec(), "6")
	if _, err := policies.Open(one, drive, dg, policies.Options{}); err == nil || !strings.Contains(err.Error(), "frames") {
		t.Fatalf("wrong game: %v", err)
	}
}

func TestBadSources(t *testing.T) {
	g := paddle(t)
	grid, _ := policies.GridFor("fresh", g.Spec(), "")
	for _, c := range []struct {
		src  string
		opt  policies.Options
		want string
	}{
		{"", policies.Options{}, "no policy given"},
		{"expret", policies.Options{}, "not a readable file"},
		{"exec:", policies.Options{}, "names no command"},
		{"exec:'unclosed", policies.Options{}, "exec:"},
		{"tcp://nohost", policies.Options{}, "tcp://HOST:PORT"},
		{"fresh", policies.Options{Family: "cnn"}, "family"},
		{"exec:x", policies.Options{Obs: "pixels"}, "observation"},
		{"exec:x", policies.Options{Dtype: "int8"}, "dtype"},
		{"exec:x", policies.Options{Timeout: -time.Second}, "timeout"},
	} {
		_, err := policies.Open(c.src, g, grid, c.opt)
		var se *policies.SourceError
		if !errors.As(err, &se) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("Open(%q, %+v): %v, want a SourceError with %q", c.src, c.opt, err, c.want)
		}
	}
	// A weights file that is not one is a runtime error, not a usage error.
	_, err := policies.Open("missing.safetensors", g, grid, policies.Options{})
	var se *policies.SourceError
	if err == nil || errors.As(err, &se) {
		t.Errorf("missing weights file: %v", err)
	}
}

func TestFlags(t *testing.T) {
	fs := flag.NewFlagSet("x", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	f := policies.AddFlags(fs, policies.FlagConfig{Default: "expert", InitSeed: true})
	if err := fs.Parse([]string{"--policy", "exec:p", "--policy-timeout", "1m", "--policy-obs", "tokens", "--policy-clamp", "--init-seed", "9"}); err != nil {
		t.Fatal(err)
	}
	o, err := f.Options()
	if err != nil {
		t.Fatal(err)
	}
	if f.Source != "exec:p" || o.Timeout != time.Minute || f.Timeout.Text != "1m" || o.Obs != "tokens" || !o.Clamp || o.InitSeed != 9 || o.Dtype != "uint8" {
		t.Fatalf("flags %+v options %+v", f, o)
	}
	if !f.Given("policy-obs") || f.Given("policy-dtype") {
		t.Fatal("Given")
	}
	for _, args := range [][]string{{"--policy-timeout", "0s"}, {"--policy-obs", "x"}, {"--policy-dtype", "x"}} {
		fs := flag.NewFlagSet("x", flag.ContinueOnError)
		fs.SetOutput(io.Discard)
		f := policies.AddFlags(fs, policies.FlagConfig{})
		if err := fs.Parse(args); err != nil {
			t.Fatal(err)
		}
		if _, err := f.Options(); err == nil || !strings.Contains(err.Error(), args[0]) {
			t.Errorf("%v: %v", args, err)
		}
	}
	if err := fs.Parse([]string{"--policy-timeout", "soon"}); err == nil {
		t.Error("--policy-timeout soon accepted")
	}
}
