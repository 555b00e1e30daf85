package record

import (
	"bytes"
	"encoding/binary"
	"image"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/games"
	_ "tilebench/games/all"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision/nets"
)

func setup(t testing.TB, name string, patchSize int) (games.Game, *patch.Grid) {
	t.Helper()
	g, err := games.Build(name, games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: patchSize})
	if err != nil {
		t.Fatal(err)
	}
	return g, grid
}

// readArray reads a .npy file of the dataset: its shape and data bytes.
func readArray(t *testing.T, dir, name string) ([]int, []byte) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, name+".npy"))
	if err != nil {
		t.Fatal(err)
	}
	hlen := int(binary.LittleEndian.Uint16(b[8:10]))
	head := string(b[10 : 10+hlen])
	i := strings.Index(head, "'shape': (")
	j := strings.Index(head[i:], ")")
	var dims []int
	for _, f := range strings.Split(head[i+10:i+j], ",") {
		f = strings.TrimSpace(f)
		if f == "" {
			continue
		}
		n := 0
		for _, c := range f {
			n = 10*n + int(c-'0')
		}
		dims = append(dims, n)
	}
	return dims, b[10+hlen:]
}

func f32s(b []byte) []float32 {
	out := make([]float32, len(b)/4)
	for i := range out {
		out[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return out
}

// TestExpertActionsAndBoundaries replays every recorded episode with the
// game and its expert and checks the files row by row: the actions are
// the expert's on those seeds (as float32), previous actions, rewards,
// episode starts, seeds and step indices line up, and the frames are the
// game's own renders (no transforms).
func TestExpertActionsAndBoundaries(t *testing.T) {
	g, grid := setup(t, "paddle", 10)
	dir := filepath.Join(t.TempDir(), "rec")
	m, err := Run(Config{Game: g, Grid: grid, Episodes: 3, Seed: 40, Dir: dir})
	if err != nil {
		t.Fatal(err)
	}
	if !m.Complete || len(m.Episodes) != 3 {
		t.Fatalf("manifest: complete %v, %d episodes", m.Complete, len(m.Episodes))
	}
	sp := g.Spec()
	dims, frames := readArray(t, dir, "frames")
	if want := []int{m.Rows, sp.Height, sp.Width, 3}; !equalInts(dims, want) {
		t.Fatalf("frames shape %v, want %v", dims, want)
	}
	_, acts := readArray(t, dir, "actions")
	_, prevs := readArray(t, dir, "prev_actions")
	_, rews := readArray(t, dir, "rewards")
	_, starts := readArray(t, dir, "episode_starts")
	_, seeds := readArray(t, dir, "seeds")
	_, steps := readArray(t, dir, "steps")
	a, p, r := f32s(acts), f32s(prevs), f32s(rews)
	dim := sp.Action.Dim()
	replay, _ := games.Build("paddle", games.Setup{})
	ex := replay.(games.WithExpert).Expert()
	frame := newRGBA(sp.Width, sp.Height)
	act := make([]float64, dim)
	prev := make([]float64, dim)
	row := 0
	for i, e := range m.Episodes {
		if e.Seed != 40+uint64(i) || e.Start != row {
			t.Fatalf("episode %d: seed %d start %d, want %d and %d", i, e.Seed, e.Start, 40+i, row)
		}
		replay.Reset(e.Seed)
		clear(prev)
		ret := 0.0
		for s := 0; s < e.Steps; s, row = s+1, row+1 {
			replay.Render(frame)
			if !bytes.Equal(packRGB(nil, frame), frames[row*len(frame.Pix)/4*3:(row+1)*len(frame.Pix)/4*3]) {
				t.Fatalf("row %d: frame differs from the game's render", row)
			}
			ex.Act(act)
			for k := range act {
				if a[row*dim+k] != float32(act[k]) || p[row*dim+k] != float32(prev[k]) {
					t.Fatalf("row %d: action %v prev %v, expert %v prev %v", row, a[row*dim:row*dim+dim], p[row*dim:row*dim+dim], act, prev)
				}
			}
			st, err := replay.Step(act)
			if err != nil {
				t.Fatal(err)
			}
			ret += st.Reward
			if r[row] != float32(st.Reward) {
				t.Fatalf("row %d: reward %v, game %v", row, r[row], st.Reward)
			}
			if (starts[row] == 1) != (s == 0) || binary.LittleEndian.Uint64(seeds[8*row:]) != e.Seed ||
				int(binary.LittleEndian.Uint32(steps[4*row:])) != s {
				t.Fatalf("row %d: start %d seed %d step %d", row, starts[row], binary.LittleEndian.Uint64(seeds[8*row:]), binary.LittleEndian.Uint32(steps[4*row:]))
			}
			if st.Done != (s == e.Steps-1) {
				t.Fatalf("row %d: episode ends %v, manifest says step %d is the last", row, st.Done, e.Steps-1)
			}
			copy(prev, act)
		}
		if math.Abs(ret-e.Return) > 1e-9 {
			t.Fatalf("episode %d: return %v, manifest %v", i, ret, e.Return)
		}
	}
}

func newRGBA(w, h int) *image.RGBA { return image.NewRGBA(image.Rect(0, 0, w, h)) }

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func dirBytes(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	out := map[string][]byte{}
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range ents {
		b, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		out[e.Name()] = b
	}
	return out
}

// TestResumeSameBytes: a recording stopped after two episodes, with half
// an episode left in its files, resumed to four episodes, is byte for byte
// the recording made in one go (transforms included, tokens kept).
func TestResumeSameBytes(t *testing.T) {
	g, grid := setup(t, "paddle", 20)
	spec := patch.Spec{Scramble: "full", Occlude: "random:0.3", Fill: "drop", NoiseTokens: 2}
	cfg := Config{Game: g, Grid: grid, Spec: spec, Obs: ObsTokens, Episodes: 4, Seed: 7}
	cfg.Dir = filepath.Join(t.TempDir(), "whole")
	if _, err := Run(cfg); err != nil {
		t.Fatal(err)
	}
	part := cfg
	part.Dir = filepath.Join(t.TempDir(), "part")
	part.Episodes = 2
	if _, err := Run(part); err != nil {
		t.Fatal(err)
	}
	// A run killed in its third episode leaves rows past the manifest's.
	for _, name := range []string{"tokens.npy", "rewards.npy", "actions.npy"} {
		f, err := os.OpenFile(filepath.Join(part.Dir, name), os.O_APPEND|os.O_WRONLY, 0)
		if err != nil {
			t.Fatal(err)
		}
		f.Write(bytes.Repeat([]byte{0xAB}, 1001))
		f.Close()
	}
	part.Episodes, part.Resume = 4, true
	var seen []int
	part.OnEpisode = func(i int, _ Episode) { seen = append(seen, i) }
	if _, err := Run(part); err != nil {
		t.Fatal(err)
	}
	if !equalInts(seen, []int{2, 3}) {
		t.Fatalf("resumed episodes %v, want [2 3]", seen)
	}
	a, b := dirBytes(t, cfg.Dir), dirBytes(t, part.Dir)
	if len(a) != len(b) {
		t.Fatalf("%d files vs %d", len(a), len(b))
	}
	for name, x := range a {
		if !bytes.Equal(x, b[name]) {
			t.Errorf("%s differs after resume", name)
		}
	}
	// Token sets: counts vary (dropped and added tokens), padding cells are
	// (-1, -1), added tokens too.
	_, counts := readArray(t, cfg.Dir, "token_count")
	dims, cells := readArray(t, cfg.Dir, "cells")
	k := dims[1]
	most, noise := 0, 0
	for row := 0; row < dims[0]; row++ {
		n := int(binary.LittleEndian.Uint32(counts[4*row:]))
		most = max(most, n)
		for i := 0; i < k; i++ {
			r := int16(binary.LittleEndian.Uint16(cells[(row*k+i)*4:]))
			if i >= n && r != -1 {
				t.Fatalf("row %d: padding token %d has cell row %d", row, i, r)
			}
			if i < n && r == -1 {
				noise++
			}
		}
	}
	if most >= grid.N() || k != grid.N()+2 || noise != 2*dims[0] {
		t.Fatalf("at most %d tokens of %d cells (capacity %d), %d added tokens in %d rows (want 2 a row)", most, grid.N(), k, noise, dims[0])
	}
}

// TestBadFolders: a folder that exists and is not resumable is refused
// with one line, and nothing in it changes.
func TestBadFolders(t *testing.T) {
	g, grid := setup(t, "paddle", 20)
	base := Config{Game: g, Grid: grid, Episodes: 1}
	oblong, err := patch.NewGrid(patch.GridConfig{Width: 120, Height: 80, PatchW: 20, PatchH: 10})
	if err != nil {
		t.Fatal(err)
	}
	junk := t.TempDir()
	os.WriteFile(filepath.Join(junk, "notes.txt"), []byte("mine"), 0o644)
	done := filepath.Join(t.TempDir(), "done")
	c := base
	c.Dir = done
	if _, err := Run(c); err != nil {
		t.Fatal(err)
	}
	before := dirBytes(t, done)
	cases := []struct {
		name string
		edit func(*Config)
		want string
	}{
		{"exists", func(c *Config) { c.Dir = done }, "exists and is not empty"},
		{"not a recording", func(c *Config) { c.Dir, c.Resume = junk, true }, "not resumable"},
		{"other transforms", func(c *Config) { c.Dir, c.Resume, c.Spec = done, true, patch.Spec{Scramble: "full"} }, "not resumable: it records transforms"},
		{"other seeds", func(c *Config) { c.Dir, c.Resume, c.Seed = done, true, 5 }, "first seed"},
		{"fewer episodes", func(c *Config) { c.Dir, c.Resume, c.Episodes = done, true, 0 }, ""},
		{"held-out seeds", func(c *Config) { c.Dir, c.Seed = t.TempDir(), games.HeldOutSeedStart }, "training range"},
		{"range end", func(c *Config) { c.Dir, c.Seed, c.Episodes = t.TempDir(), games.HeldOutSeedStart-1, 2 }, "training range"},
		{"obs", func(c *Config) { c.Dir, c.Obs = t.TempDir(), "pixels" }, "observation"},
		{"transform off the grid", func(c *Config) { c.Dir, c.Grid, c.Spec = t.TempDir(), oblong, patch.Spec{Rotate: true} }, "transforms: rotate"},
		{"relabel without policy", func(c *Config) { c.Dir, c.Relabel = t.TempDir(), true }, "relabelling"},
	}
	for _, tc := range cases {
		c := base
		tc.edit(&c)
		_, err := Run(c)
		if tc.want == "" {
			if err != nil {
				t.Errorf("%s: %v", tc.name, err)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error %v, want one line with %q", tc.name, err, tc.want)
		}
	}
	if b, _ := os.ReadFile(filepath.Join(junk, "notes.txt")); string(b) != "mine" {
		t.Fatal("a refused folder's file changed")
	}
	after := dirBytes(t, done)
	for name, x := range before {
		if name != ManifestName && !bytes.Equal(x, after[name]) {
			t.Errorf("%s changed by refused runs", name)
		}
	}
}

// TestRelabel: a network drives, the expert labels; the labels are the
// expert's actions in the states the network's actions led to.
func TestRelabel(t *testing.T) {
	g, grid := setup(t, "drive", 16)
	net, err := nets.New(nets.Config{Family: nets.Attention}, grid, g.Spec().Action, 3)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "dagger")
	m, err := Run(Config{Game: g, Grid: grid, Policy: net, PolicySource: "attention", Relabel: true, Episodes: 1, Dir: dir})
	if err != nil {
		t.Fatal(err)
	}
	_, acts := readArray(t, dir, "actions")
	_, labs := readArray(t, dir, "labels")
	a, l := f32s(acts), f32s(labs)
	sp := g.Spec()
	dim := sp.Action.Dim()
	replay, _ := games.Build("drive", games.Setup{})
	ex := replay.(games.WithExpert).Expert()
	replay.Reset(m.Episodes[0].Seed)
	act, lab := make([]float64, dim), make([]float64, dim)
	differ := 0
	for row := 0; row < m.Rows; row++ {
		ex.Act(lab)
		clampLabel(sp.Action, lab)
		for k := range lab {
			if l[row*dim+k] != float32(lab[k]) {
				t.Fatalf("row %d: label %v, expert %v", row, l[row*dim:row*dim+dim], lab)
			}
			if l[row*dim+k] != a[row*dim+k] {
				differ++
			}
			act[k] = float64(a[row*dim+k])
		}
		// The network's actions are float32 values, so the recorded copy
		// replays the episode exactly.
		if _, err := replay.Step(act); err != nil {
			t.Fatal(err)
		}
	}
	if differ == 0 {
		t.Fatal("an untrained network's actions equal the expert's labels")
	}
	if m.Policy != "attention" || !m.Relabel {
		t.Fatalf("manifest policy %q relabel %v", m.Policy, m.Relabel)
	}
}

// TestHeaderIsNumpys: the header of every file is the one NumPy writes
// for its dtype and shape (the same layout frameio's golden tests check
// for uint8).
func TestHeaderIsNumpys(t *testing.T) {
	h := frameio.NPYHeaderOf("<f4", []int{12, 3})
	// What numpy.lib.format.write_array_header_1_0 writes for
	// np.zeros((12, 3), '<f4') with NumPy ≥ 1.23 (from memory: the dict,
	// 21 - len("12") spaces of growth room, padding to 64, newline).
	want := "{'descr': '<f4', 'fortran_order': False, 'shape': (12, 3), }"
	if string(h[:8]) != "\x93NUMPY\x01\x00" || !strings.HasPrefix(string(h[10:]), want) || len(h)%64 != 0 || h[len(h)-1] != '\n' {
		t.Fatalf("header %q", h)
	}
}
