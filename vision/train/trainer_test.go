package train

import (
	"context"
	"errors"
	"path/filepath"
	"reflect"
	"testing"

	"tilebench/games"
	_ "tilebench/games/all"
	"tilebench/patch"
	"tilebench/vision/nets"
)

// tiny returns a small, fast configuration on drive.
func tiny(method string, workers int) Config {
	return Config{
		Game: "drive", Patch: 4, Method: method, Seed: 11, Workers: workers, Iters: 2, Patience: -1,
		Net:         nets.Config{KeySize: 4, Queries: 4, QueryDim: 4, ValueSize: 4, Hidden: 8},
		ValEpisodes: 1, FitnessEpisodes: 1, ValEvery: 2,
		Clone:   CloneConfig{EpisodesPerRound: 1, Epochs: 1, Batch: 32, Keep: 8},
		ES:      ESConfig{Pairs: 1},
		CMA:     CMAConfig{Population: 2},
		Augment: patch.Spec{Occlude: "random:0.25"},
	}
}

func runTo(t *testing.T, tr *Trainer, stopAfter int) []float32 {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	_, err := tr.Run(ctx, func(p Progress) {
		if stopAfter > 0 && p.Iter >= stopAfter {
			cancel()
		}
	}, 0, nil)
	if stopAfter > 0 {
		if !errors.Is(err, context.Canceled) && err != nil {
			t.Fatal(err)
		}
	} else if err != nil {
		t.Fatal(err)
	}
	return append([]float32(nil), tr.net.Params()...)
}

// TestResumeContinuesExactly: for every method, a run interrupted after
// one iteration, checkpointed and resumed, ends with the same parameter
// bytes as an uninterrupted run of two iterations.
func TestResumeContinuesExactly(t *testing.T) {
	for _, m := range []string{Clone, ESm, CMAES} {
		t.Run(m, func(t *testing.T) {
			full, err := New(tiny(m, 2))
			if err != nil {
				t.Fatal(err)
			}
			want := runTo(t, full, 0)
			part, err := New(tiny(m, 2))
			if err != nil {
				t.Fatal(err)
			}
			runTo(t, part, 1)
			path := filepath.Join(t.TempDir(), "run.ckpt")
			if err := part.SaveCheckpoint(path); err != nil {
				t.Fatal(err)
			}
			res, err := Resume(path, 0, 0)
			if err != nil {
				t.Fatal(err)
			}
			if res.st.Iter != 1 {
				t.Fatalf("checkpoint holds iteration %d, want 1", res.st.Iter)
			}
			got := runTo(t, res, 0)
			if !reflect.DeepEqual(got, want) {
				t.Fatalf("resumed run differs from the uninterrupted one")
			}
			if !reflect.DeepEqual(res.best, full.best) {
				t.Fatalf("best weights differ after resume")
			}
		})
	}
}

// TestCloneSameAcrossWorkerCounts: the gradient is summed over a fixed
// number of shards in a fixed order, so 1 and 2 workers give the same bytes.
func TestCloneSameAcrossWorkerCounts(t *testing.T) {
	a, err := New(tiny(Clone, 1))
	if err != nil {
		t.Fatal(err)
	}
	b, err := New(tiny(Clone, 2))
	if err != nil {
		t.Fatal(err)
	}
	if pa, pb := runTo(t, a, 0), runTo(t, b, 0); !reflect.DeepEqual(pa, pb) {
		t.Fatal("1 and 2 workers gave different weights")
	}
	c := tiny(Clone, 2)
	c.Seed++
	cc, _ := New(c)
	if reflect.DeepEqual(runTo(t, cc, 0), a.net.Params()) {
		t.Fatal("another seed gave the same weights")
	}
}

func TestNewRejectsBadConfig(t *testing.T) {
	bad := []func(*Config){
		func(c *Config) { c.Method = "sgd" },
		func(c *Config) { c.Game = "chess" },
		func(c *Config) { c.Patch = 500 },
		func(c *Config) { c.Net.Family = "cnn" },
		func(c *Config) { c.Clone.BetaDecay = 2 },
		func(c *Config) { c.Augment.Occlude = "random:7" },
		func(c *Config) { c.Method = CMAES; c.Net = nets.Config{} }, // ~15k parameters: too many for CMA-ES
	}
	for i, f := range bad {
		c := tiny(Clone, 1)
		f(&c)
		if _, err := New(c); err == nil {
			t.Errorf("bad config %d accepted", i)
		}
	}
}

// TestDatasetLossless: the data set stores bytes, and the tokenizer maps
// byte b to float32(b)/255, so a stored sample loads back bit for bit.
// TestInitMustFit: starting weights from another game or patch size are
// refused with an error naming them.
func TestInitMustFit(t *testing.T) {
	g, _ := patch.NewGrid(patch.GridConfig{Width: 120, Height: 80, PatchW: 5})
	paddleNet, err := nets.New(nets.Config{}, g, games.Controls{Kind: games.Discrete, Names: []string{"l", "s", "r"}}, 1)
	if err != nil {
		t.Fatal(err)
	}
	c := tiny(ESm, 1)
	c.Init = paddleNet
	c.Net = nets.Config{}
	if _, err := New(c); err == nil {
		t.Fatal("paddle weights accepted for drive")
	}
}

func TestDatasetLossless(t *testing.T) {
	g, _ := patch.NewGrid(patch.GridConfig{Width: 8, Height: 8, PatchW: 4})
	ds := newDataset(g, 1, 1)
	src := patch.NewTokenSet(g.N(), g.D())
	for i := range src.Data {
		src.Data[i] = float32(i*37%256) / 255
	}
	ds.add(0, src.Data, []float64{0.25}, []float64{-0.5})
	dst := patch.NewTokenSet(g.N(), g.D())
	prev := []float64{0}
	ds.load(0, dst, prev)
	if !reflect.DeepEqual(dst.Data, src.Data) || prev[0] != 0.25 || ds.labels(0)[0] != -0.5 || dst.Pos[3] != g.Cell(3) {
		t.Fatal("sample did not load back exactly")
	}
}

func TestSeedsStayOffHeldOut(t *testing.T) {
	tr, err := New(tiny(ESm, 1))
	if err != nil {
		t.Fatal(err)
	}
	for gen := 0; gen < 50; gen++ {
		for _, s := range tr.fitnessSeeds(gen) {
			if s >= games.Train(ValidationStart) {
				t.Fatalf("fitness seed %d is outside the training slice", s)
			}
		}
	}
}

// TestClassWeights: balanced weights n/(K·n_c) (common practice), worked
// by hand for labels (1, 1, 1, 0) of 3 choices: 4/3, 4/9, and 1 for the
// absent choice.
func TestClassWeights(t *testing.T) {
	g, _ := patch.NewGrid(patch.GridConfig{Width: 4, Height: 4, PatchW: 4})
	ds := newDataset(g, 1, 1)
	tok := make([]float32, g.N()*g.D())
	for _, c := range []float64{1, 1, 1, 0} {
		ds.add(0, tok, []float64{0}, []float64{c})
	}
	ds.setClassWeights(3)
	for c, want := range []float64{4.0 / 3, 4.0 / 9, 1} {
		if got := ds.weight(c); got != want {
			t.Fatalf("weight(%d) = %v, want %v", c, got, want)
		}
	}
}

// TestSampleLossDoesNotAllocate: the per-sample training path
// (dequantise, augment, forward, backward) allocates nothing.
func TestSampleLossDoesNotAllocate(t *testing.T) {
	c := tiny(Clone, 1)
	c.Iters = 1
	tr, err := New(c)
	if err != nil {
		t.Fatal(err)
	}
	runTo(t, tr, 0)
	e := tr.envs[0]
	tr.ds.setSpread()
	e.sampleLoss(tr.ds, 1, 3, 1, true)
	allocs := testing.AllocsPerRun(20, func() {
		if _, err := e.sampleLoss(tr.ds, 1, 3, 1, true); err != nil {
			t.Fatal(err)
		}
	})
	if allocs != 0 {
		t.Fatalf("%v allocations per sample", allocs)
	}
}

// Early stopping waits for MinIters iterations (12 rounds by default for
// behaviour cloning, none for ES), then stops after Patience validations
// without improvement (8 for cloning, 4 for ES); a negative Patience
// never stops.
func TestEarlyStopRule(t *testing.T) {
	clone := Config{Method: Clone}.withDefaults()
	es := Config{Method: ESm}.withDefaults()
	if clone.Patience != 8 || clone.MinIters != 12 || es.Patience != 4 || es.MinIters != 0 {
		t.Fatalf("defaults: clone patience %d, min iters %d; es %d, %d", clone.Patience, clone.MinIters, es.Patience, es.MinIters)
	}
	for _, c := range []struct {
		cfg         Config
		iter, stale int
		want        bool
	}{
		{clone, 5, 5, false},   // still warming up
		{clone, 11, 11, false}, // one round short
		{clone, 12, 8, true},
		{clone, 12, 7, false},
		{es, 20, 4, true},
		{es, 3, 3, false},
		{Config{Method: Clone, Patience: -1}.withDefaults(), 100, 100, false},
		{Config{Method: Clone, MinIters: -1}.withDefaults(), 8, 8, true},
	} {
		if got := c.cfg.earlyStop(state{Iter: c.iter, Stale: c.stale}); got != c.want {
			t.Errorf("%s patience %d min %d, iter %d stale %d: stop %v, want %v", c.cfg.Method, c.cfg.Patience, c.cfg.MinIters, c.iter, c.stale, got, c.want)
		}
	}
}
