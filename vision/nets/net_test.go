package nets

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/weights"
)

// smallConfigs covers every family and every option on a small grid.
var smallConfigs = []struct {
	name string
	cfg  Config
}{
	{"attention", Config{Family: Attention, KeySize: 4, Queries: 3, QueryDim: 4, ValueSize: 3, Hidden: 5}},
	{"attention-keyhidden-identity", Config{Family: Attention, KeySize: 4, KeyHidden: 6, Value: "identity", Queries: 2, QueryDim: 4, Hidden: 5}},
	{"attention-prev-context", Config{Family: Attention, KeySize: 4, Queries: 3, QueryDim: 6, ValueSize: 3, Hidden: 5, PrevAction: true, Context: 3}},
	{"posattention", Config{Family: PosAttention, KeySize: 4, Queries: 3, QueryDim: 4, ValueSize: 3, Hidden: 5, PrevAction: true}},
	{"meanpool", Config{Family: MeanPool, TokenHidden: 6, Hidden: 5}},
	{"meanpool-prev-context", Config{Family: MeanPool, TokenHidden: 6, Hidden: 5, PrevAction: true, Context: 2}},
	{"mlp", Config{Family: MLP, Hidden: 4}},
	{"mlp-prev", Config{Family: MLP, Hidden: 4, PrevAction: true}},
	{"attention-centre", Config{Family: Attention, KeySize: 4, Queries: 3, QueryDim: 4, ValueSize: 3, Hidden: 5, Centre: true}},
	{"attention-centre-prev-context", Config{Family: Attention, KeySize: 4, Queries: 3, QueryDim: 4, ValueSize: 3, Hidden: 5, PrevAction: true, Context: 2, Centre: true}},
	{"meanpool-centre", Config{Family: MeanPool, TokenHidden: 6, Hidden: 5, Centre: true}},
}

// Every family's parameter gradients (both heads, every option) against
// central differences of a random linear function of the output.
func TestFamilyGradients(t *testing.T) {
	g := testGrid(t, 8, 6, 2) // 4×3 cells of 12 values
	for _, sc := range smallConfigs {
		for _, sp := range []games.Controls{contSpace, discSpace} {
			t.Run(sc.name+"/"+sp.Kind.String(), func(t *testing.T) {
				n := mustNew(t, sc.cfg, g, sp, 7)
				obs := randomObs(g, 8, sp.Dim())
				if sp.Kind == games.Discrete {
					obs.PrevAction[0] = 2
				}
				// Scale up parameters a little so tanh layers leave their
				// linear range and the check sees their curvature.
				for i, v := range n.Params() {
					n.Params()[i] = 2 * v
				}
				out := make([]float32, n.OutputDim())
				r := randSlice(testRand(9), len(out), 1)
				if sc.cfg.Context > 1 {
					// Fill the history with two earlier frames; the check
					// then runs on a clone holding the same history.
					n.Forward(randomObs(g, 10, sp.Dim()), out)
					n.Forward(randomObs(g, 11, sp.Dim()), out)
				}
				// With context, every Forward advances the history, so each
				// loss evaluation starts from a fresh copy of the state.
				loss := func() float64 {
					m := n
					if sc.cfg.Context > 1 {
						m = withHistory(n)
					}
					if err := m.Forward(obs, out); err != nil {
						t.Fatal(err)
					}
					return dotLoss(r, out)
				}
				m := n
				if sc.cfg.Context > 1 {
					m = withHistory(n)
				}
				if err := m.Forward(obs, out); err != nil {
					t.Fatal(err)
				}
				m.ZeroGrads()
				m.Backward(r)
				fdCheck(t, sc.name, n.Params(), m.Grads(), loss)
			})
		}
	}
}

// withHistory returns a net sharing n's parameters storage view and a copy
// of its temporal history.
func withHistory(n Net) Net {
	src := n.(net).base()
	cp := n.Clone().(net)
	c := cp.base()
	c.params = src.params
	for _, b := range c.binds {
		b()
	}
	copy(c.in.hist, src.in.hist)
	c.in.head = src.in.head
	return cp
}

// Invariant families must not change their action when the token set is
// permuted: max |Δaction| ≤ 1e-5. Two permutations: reordering the list
// (each token keeps its cell) and scrambling (token values move to other
// cells). Without temporal context an invariant family ignores cells
// entirely, so both must leave it unchanged; with context it follows each
// cell's history, so only the reordering must. The non-invariant families
// must change under scrambling.
func TestPermutationInvariance(t *testing.T) {
	g := testGrid(t, 112, 80, 8)
	for _, fam := range Families {
		for _, cfg := range []Config{{Family: fam}, {Family: fam, PrevAction: true, Context: 2}, {Family: fam, Centre: true}} {
			for _, scramble := range []bool{false, true} {
				n := mustNew(t, cfg, g, contSpace, 3)
				m := n.Clone()
				obs := randomObs(g, 4, 3)
				prev := randomObs(g, 5, 3)
				a := make([]float64, 3)
				b := make([]float64, 3)
				rng := testRand(6)
				worst := 0.0
				for trial := 0; trial < 10; trial++ {
					perm := rng.Perm(obs.Tokens.N)
					n.Reset(0)
					m.Reset(0)
					if err := n.Act(prev, a); err != nil {
						t.Fatal(err)
					}
					if err := m.Act(permuted(prev, perm, scramble), b); err != nil {
						t.Fatal(err)
					}
					if err := n.Act(obs, a); err != nil {
						t.Fatal(err)
					}
					if err := m.Act(permuted(obs, perm, scramble), b); err != nil {
						t.Fatal(err)
					}
					for i := range a {
						worst = math.Max(worst, math.Abs(a[i]-b[i]))
					}
				}
				inv := n.Info().Invariant
				t.Logf("%s prev=%v context=%d centre=%v scramble=%v: max |Δaction| %.3g", fam, cfg.PrevAction, cfg.Context, cfg.Centre, scramble, worst)
				mustHold := inv && (!scramble || cfg.Context <= 1)
				if mustHold && worst > 1e-5 {
					t.Errorf("%s is declared invariant but its action moved by %.3g", fam, worst)
				}
				if !inv && scramble && worst < 1e-4 {
					t.Errorf("%s is not invariant but its action moved only %.3g when scrambled", fam, worst)
				}
			}
		}
	}
}

// permuted returns obs with token i's values taken from token perm[i];
// its position too unless scramble is set, in which case positions stay.
func permuted(obs *vision.Observation, perm []int, scramble bool) *vision.Observation {
	src := obs.Tokens
	ts := patch.NewTokenSet(src.N, src.D)
	ts.N = src.N
	for i, j := range perm {
		copy(ts.Token(i), src.Token(j))
		ts.Pos[i] = src.Pos[j]
		if scramble {
			ts.Pos[i] = src.Pos[i]
		}
	}
	cp := *obs
	cp.Tokens = ts
	return &cp
}

// Set families accept any number of tokens, including added tokens with no
// cell and none at all; the ordered MLP refuses a wrong count.
func TestTokenCounts(t *testing.T) {
	g := testGrid(t, 32, 32, 8)
	obs := randomObs(g, 1, 3)
	for _, fam := range Families {
		n := mustNew(t, Config{Family: fam}, g, contSpace, 2)
		a := make([]float64, 3)
		for _, count := range []int{0, 5, g.N(), 2*g.N() + 3} {
			o := *obs
			ts := patch.NewTokenSet(count, g.D())
			ts.N = count
			for i := 0; i < count; i++ {
				copy(ts.Token(i), obs.Tokens.Token(i%g.N()))
				ts.Pos[i] = g.Cell(i % g.N())
				if i >= g.N() {
					ts.Pos[i] = patch.NoCell
				}
			}
			o.Tokens = ts
			err := n.Act(&o, a)
			if fam == MLP {
				if (count == g.N()) != (err == nil) {
					t.Errorf("mlp with %d tokens: error %v", count, err)
				}
				continue
			}
			if err != nil {
				t.Fatalf("%s with %d tokens: %v", fam, count, err)
			}
			for i, v := range a {
				if math.IsNaN(v) || v < contSpace.Low[i] || v > contSpace.High[i] {
					t.Fatalf("%s with %d tokens: action %v", fam, count, a)
				}
			}
		}
	}
}

// Continuous actions stay within the bounds; discrete actions are the arg
// max of the logits.
func TestHeads(t *testing.T) {
	g := testGrid(t, 32, 32, 8)
	wide := games.Controls{Kind: games.Continuous, Names: []string{"a", "b"}, Low: []float64{-3, 10}, High: []float64{-2, 50}}
	n := mustNew(t, Config{}, g, wide, 1)
	for i := range n.Params() {
		n.Params()[i] *= 20 // saturate
	}
	a := make([]float64, 2)
	for s := uint64(0); s < 10; s++ {
		if err := n.Act(randomObs(g, s, 2), a); err != nil {
			t.Fatal(err)
		}
		if a[0] < -3 || a[0] > -2 || a[1] < 10 || a[1] > 50 {
			t.Fatalf("action %v outside [-3,-2]×[10,50]", a)
		}
	}
	d := mustNew(t, Config{Family: MeanPool}, g, discSpace, 1)
	out := make([]float32, 3)
	act := make([]float64, 1)
	for s := uint64(0); s < 10; s++ {
		obs := randomObs(g, s, 1)
		obs.PrevAction[0] = 0
		d.Forward(obs, out)
		d.Act(obs, act)
		best := 0
		for i := range out {
			if out[i] > out[best] {
				best = i
			}
		}
		if int(act[0]) != best {
			t.Fatalf("logits %v: act %v, want %d", out, act, best)
		}
	}
	if err := n.Act(randomObs(g, 1, 2), make([]float64, 3)); err == nil {
		t.Error("action buffer of wrong length accepted")
	}
}

func TestNewRejectsBadConfigs(t *testing.T) {
	g := testGrid(t, 32, 32, 8)
	bad := []struct {
		cfg  Config
		sp   games.Controls
		want string
	}{
		{Config{Family: "convnet"}, contSpace, "unknown policy family"},
		{Config{Value: "square"}, contSpace, "value function"},
		{Config{QueryDim: 5}, contSpace, "even"},
		{Config{KeySize: -1}, contSpace, "key size"},
		{Config{Context: 99}, contSpace, "context"},
		{Config{}, games.Controls{Kind: games.Continuous, Names: []string{"x"}, Low: []float64{1}, High: []float64{0}}, "bounds"},
		{Config{}, games.Controls{Kind: games.Discrete, Names: []string{"only"}}, "choices"},
	}
	for _, b := range bad {
		_, err := New(b.cfg, g, b.sp, 1)
		if err == nil || !strings.Contains(err.Error(), b.want) {
			t.Errorf("New(%+v): error %v, want one mentioning %q", b.cfg, err, b.want)
		}
	}
	if _, err := New(Config{}, nil, contSpace, 1); err == nil {
		t.Error("nil grid accepted")
	}
	for _, huge := range []*patch.Grid{testGrid(t, 1<<14, 1<<14, 1), testGrid(t, 4096, 4096, 4)} {
		if _, err := New(Config{Family: MLP}, huge, contSpace, 1); err == nil || !strings.Contains(err.Error(), "large") && !strings.Contains(err.Error(), "more than") {
			t.Errorf("grid %s: error %v, want a refusal as too large", huge, err)
		}
	}
	n := mustNew(t, Config{}, g, contSpace, 1)
	obs := randomObs(testGrid(t, 32, 32, 4), 1, 3)
	if err := n.Act(obs, make([]float64, 3)); err == nil || !strings.Contains(err.Error(), "values") {
		t.Errorf("tokens of the wrong size: error %v", err)
	}
	obs = randomObs(testGrid(t, 64, 32, 8), 1, 3)
	obs.Tokens.N = g.N()
	if err := n.Act(obs, make([]float64, 3)); err == nil || !strings.Contains(err.Error(), "grid of 8x4 cells") {
		t.Errorf("tokens of another grid: error %v", err)
	}
	if err := n.Act(&vision.Observation{}, make([]float64, 3)); err == nil {
		t.Error("observation without tokens accepted")
	}
	p := mustNew(t, Config{PrevAction: true}, g, contSpace, 1)
	obs = randomObs(g, 1, 2)
	if err := p.Act(obs, make([]float64, 3)); err == nil || !strings.Contains(err.Error(), "previous action has 2 values, want 3") {
		t.Errorf("previous action of the wrong length: error %v", err)
	}
}

// Same seed, same parameters; Clone acts the same; Params aliases.
func TestDeterminismAndClone(t *testing.T) {
	g := testGrid(t, 32, 32, 8)
	for _, fam := range Families {
		a := mustNew(t, Config{Family: fam}, g, contSpace, 11)
		b := mustNew(t, Config{Family: fam}, g, contSpace, 11)
		c := mustNew(t, Config{Family: fam}, g, contSpace, 12)
		same, diff := true, false
		for i := range a.Params() {
			same = same && a.Params()[i] == b.Params()[i]
			diff = diff || a.Params()[i] != c.Params()[i]
		}
		if !same || !diff {
			t.Errorf("%s: same seed same params %v, other seed differs %v", fam, same, diff)
		}
		cl := a.Clone()
		obs := randomObs(g, 1, 3)
		x, y := make([]float64, 3), make([]float64, 3)
		a.Act(obs, x)
		cl.Act(obs, y)
		if x[0] != y[0] || x[1] != y[1] || x[2] != y[2] {
			t.Errorf("%s: clone acts %v, original %v", fam, y, x)
		}
		cl.Params()[0] += 1
		if a.Params()[0] == cl.Params()[0] {
			t.Errorf("%s: clone shares parameter storage", fam)
		}
		total := 0
		for _, ts := range a.Tensors() {
			total += len(ts.Data)
		}
		if total != len(a.Params()) {
			t.Errorf("%s: tensors hold %d values, params %d", fam, total, len(a.Params()))
		}
	}
}

func TestSaveLoadRoundTrip(t *testing.T) {
	g := testGrid(t, 48, 32, 8)
	dir := t.TempDir()
	for _, sc := range smallConfigs {
		for _, sp := range []games.Controls{contSpace, discSpace} {
			n := mustNew(t, sc.cfg, g, sp, 5)
			path := filepath.Join(dir, sc.name+sp.Kind.String()+".safetensors")
			if err := Save(path, n, map[string]string{"method": "clone", "seed": "5"}); err != nil {
				t.Fatal(err)
			}
			m, err := Load(path)
			if err != nil {
				t.Fatalf("%s: %v", sc.name, err)
			}
			if m.Config() != n.Config() || m.Grid().String() != n.Grid().String() || m.Space().Kind != sp.Kind {
				t.Fatalf("%s: loaded %+v %s, saved %+v %s", sc.name, m.Config(), m.Grid(), n.Config(), n.Grid())
			}
			for i, v := range n.Params() {
				if m.Params()[i] != v {
					t.Fatalf("%s: parameter %d changed", sc.name, i)
				}
			}
			f, err := weights.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if f.Metadata["method"] != "clone" || f.Metadata["family"] != sc.cfg.Family {
				t.Fatalf("metadata %v", f.Metadata)
			}
		}
	}
	n := mustNew(t, Config{}, g, contSpace, 5)
	if err := Save(filepath.Join(dir, "x"), n, map[string]string{"family": "mlp"}); err == nil {
		t.Error("caller metadata overriding the family accepted")
	}
}

func TestLoadRejects(t *testing.T) {
	g := testGrid(t, 48, 32, 8)
	n := mustNew(t, Config{}, g, contSpace, 5)
	dir := t.TempDir()
	cases := []struct {
		name   string
		change func(f *weights.File)
		want   string
	}{
		{"shape", func(f *weights.File) { f.Tensors[0].Shape = []int{len(f.Tensors[0].Data)} }, "has shape"},
		{"missing", func(f *weights.File) { f.Tensors = f.Tensors[1:] }, "no tensor"},
		{"extra", func(f *weights.File) { f.Add("conv.weight", []int{1}, []float32{0}) }, "does not belong"},
		{"family", func(f *weights.File) { f.Metadata["family"] = "cnn" }, "unknown policy family"},
		{"hyper", func(f *weights.File) { f.Metadata["key_size"] = "8" }, "has shape"},
		{"nometa", func(f *weights.File) { delete(f.Metadata, "patch_w") }, "patch_w"},
		{"format", func(f *weights.File) { f.Metadata["format"] = "7" }, "format"},
		{"bounds", func(f *weights.File) { f.Metadata["action_low"] = "[1,2]" }, "bounds"},
		{"centre", func(f *weights.File) { f.Metadata["centre"] = "maybe" }, `"centre" = "maybe"`},
	}
	for _, c := range cases {
		f, err := ToFile(n, nil)
		if err != nil {
			t.Fatal(err)
		}
		c.change(f)
		path := filepath.Join(dir, c.name)
		if err := weights.WriteFile(path, f); err != nil {
			t.Fatal(err)
		}
		_, err = Load(path)
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error %v, want one line mentioning %q", c.name, err, c.want)
		}
	}
	// Non-finite values: the writer refuses them, so patch the bytes.
	f, _ := ToFile(n, nil)
	f.Tensors[0].Data[0] = 12345.5
	path := filepath.Join(dir, "nan")
	if err := weights.WriteFile(path, f); err != nil {
		t.Fatal(err)
	}
	raw, _ := os.ReadFile(path)
	needle := []byte{0x00, 0xe6, 0x40, 0x46} // 12345.5 as little-endian float32
	i := strings.Index(string(raw), string(needle))
	if i < 0 {
		t.Fatal("value not found in file")
	}
	copy(raw[i:], []byte{0x00, 0x00, 0xc0, 0x7f}) // NaN
	os.WriteFile(path, raw, 0o644)
	if _, err := Load(path); err == nil || !(strings.Contains(err.Error(), "NaN") || strings.Contains(err.Error(), "finite")) {
		t.Errorf("NaN weight: error %v", err)
	}
	n.Params()[3] = float32(math.Inf(1))
	if err := Save(filepath.Join(dir, "inf"), n, nil); err == nil {
		t.Error("saving an infinite weight succeeded")
	}
}

// With Centre, a family sees every token minus the set's mean token: the
// same outputs as the plain family fed those differences by hand, and no
// change at all when one constant is added to every value of every token
// (a uniform brightness shift) beyond float32 rounding of the mean.
func TestCentre(t *testing.T) {
	g := testGrid(t, 16, 12, 4)
	for _, fam := range Families {
		plain := mustNew(t, Config{Family: fam}, g, discSpace, 5)
		cfg := Config{Family: fam, Centre: true}
		cent := mustNew(t, cfg, g, discSpace, 5)
		obs := randomObs(g, 6, 1)
		ts := obs.Tokens
		// The hand-centred set, summed in float64.
		hand := *obs
		hand.Tokens = patch.NewTokenSet(ts.N, ts.D)
		hand.Tokens.N = ts.N
		copy(hand.Tokens.Pos, ts.Pos)
		for j := 0; j < ts.D; j++ {
			s := 0.0
			for i := 0; i < ts.N; i++ {
				s += float64(ts.Data[i*ts.D+j])
			}
			m := float32(s / float64(ts.N))
			for i := 0; i < ts.N; i++ {
				hand.Tokens.Data[i*ts.D+j] = ts.Data[i*ts.D+j] - m
			}
		}
		a := make([]float32, 3)
		b := make([]float32, 3)
		if err := cent.Forward(obs, a); err != nil {
			t.Fatal(err)
		}
		if err := plain.Forward(&hand, b); err != nil {
			t.Fatal(err)
		}
		for i := range a {
			if math.Abs(float64(a[i]-b[i])) > 1e-5 {
				t.Errorf("%s: centred output %v, plain family on hand-centred tokens %v", fam, a, b)
				break
			}
		}
		shifted := *obs
		shifted.Tokens = patch.NewTokenSet(ts.N, ts.D)
		shifted.Tokens.N = ts.N
		copy(shifted.Tokens.Pos, ts.Pos)
		for i, v := range ts.Data[:ts.N*ts.D] {
			shifted.Tokens.Data[i] = v + 0.25
		}
		if err := cent.Forward(obs, a); err != nil {
			t.Fatal(err)
		}
		if err := cent.Forward(&shifted, b); err != nil {
			t.Fatal(err)
		}
		for i := range a {
			if math.Abs(float64(a[i]-b[i])) > 1e-5 {
				t.Errorf("%s: a uniform shift moved the centred output %v → %v", fam, a, b)
				break
			}
		}
		// And the option survives a save and load.
		path := filepath.Join(t.TempDir(), "c.safetensors")
		if err := Save(path, cent, nil); err != nil {
			t.Fatal(err)
		}
		back, err := Load(path)
		if err != nil {
			t.Fatal(err)
		}
		if !back.Config().Centre {
			t.Errorf("%s: centre lost in the weights file", fam)
		}
		// A file written before the key existed loads uncentred.
		f, err := ToFile(cent, nil)
		if err != nil {
			t.Fatal(err)
		}
		delete(f.Metadata, "centre")
		old, err := FromFile(f)
		if err != nil || old.Config().Centre {
			t.Errorf("%s: file without \"centre\": %v, centre %v", fam, err, err == nil && old.Config().Centre)
		}
	}
}
