package remote

import (
	"image"
	"math"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
)

// TokenWeights passes the served net's weights on, so that Serve sends
// them with each action.
func (w *netPolicy) TokenWeights(sum, perQuery []float32) (int, int, bool) {
	if r, ok := w.Net.(vision.AttentionReporter); ok {
		return r.TokenWeights(sum, perQuery)
	}
	return 0, 0, false
}

func TestParseWeights(t *testing.T) {
	dst := make([]float32, 4)
	cases := []struct {
		line string
		ok   bool
		kind Kind
		want string
	}{
		{`{"msg":"action","t":0,"action":[1]}`, false, "", ""},
		{`{"msg":"action","t":0,"action":[1],"weights":null}`, false, "", ""},
		{`{"msg":"action","t":0,"action":[1],"weights":[0,0.5,2,1e-3]}`, true, "", ""},
		{`{"msg":"action","t":0,"action":[1],"weights":[0,0.5,2]}`, false, Shape, "3 values, want 4"},
		{`{"msg":"action","t":0,"action":[1],"weights":[0,-0.5,2,1]}`, false, Shape, "value 1 is -0.5"},
		{`{"msg":"action","t":0,"action":[1],"weights":[0,NaN,2,1]}`, false, NonFinite, "value 1 is NaN"},
		{`{"msg":"action","t":0,"action":[1],"weights":[0,1,Infinity,1]}`, false, NonFinite, "value 2 is +Inf"},
		{`{"msg":"action","t":0,"action":[1],"weights":[0,1,1e300,1]}`, false, NonFinite, "beyond float32"},
		{`{"msg":"action","t":0,"action":[1],"weights":"all"}`, false, Shape, "array of numbers"},
	}
	for _, c := range cases {
		var h header
		if err := h.parse([]byte(c.line)); err != nil {
			t.Fatal(err)
		}
		ok, kind, err := parseWeights(&h, 4, dst)
		if ok != c.ok || kind != c.kind || (err == nil) != (c.want == "") || err != nil && !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: ok %v kind %q err %v; want %v %q %q", c.line, ok, kind, err, c.ok, c.kind, c.want)
		}
	}
	var h header
	h.parse([]byte(`{"weights":[0,0.5,2,1e-3]}`))
	parseWeights(&h, 4, dst)
	if dst[1] != 0.5 || dst[2] != 2 || dst[3] != float32(1e-3) {
		t.Fatalf("weights read as %v", dst)
	}
}

func FuzzParseWeights(f *testing.F) {
	for _, s := range []string{
		`{"msg":"action","t":0,"action":[1],"weights":[0,0.5,2]}`, `{"weights":[1,NaN,0]}`,
		`{"weights":[-1,0,0]}`, `{"weights":null}`, `{"weights":[]}`, `{"weights":[1e39,0,0]}`,
	} {
		f.Add([]byte(s), 3)
	}
	f.Fuzz(func(t *testing.T, line []byte, n int) {
		if n < 0 || n > 64 {
			return
		}
		var h header
		if h.parse(line) != nil {
			return
		}
		dst := make([]float32, n)
		ok, kind, err := parseWeights(&h, n, dst)
		if err != nil {
			if ok || kind == "" || strings.Contains(err.Error(), "\n") {
				t.Fatalf("error %q with ok %v kind %q", err, ok, kind)
			}
			return
		}
		if !ok {
			return
		}
		for i, v := range dst {
			if !(v >= 0) || math.IsInf(float64(v), 0) {
				t.Fatalf("weight %d = %v accepted", i, v)
			}
		}
	})
}

// An attention net served over the protocol sends its weights; the
// session reports them per token, equal to the built-in net's.
func TestServedWeightsMatchBuiltIn(t *testing.T) {
	g := &blobs{}
	grid := testGrid(t)
	n, err := nets.New(nets.Config{Family: nets.Attention}, grid, g.Spec().Action, netSeed)
	if err != nil {
		t.Fatal(err)
	}
	for _, obsKind := range []string{ObsTokens, ObsFrame} {
		p, err := open(t, "net:"+nets.Attention, func(c *Config) { c.Obs, c.Dtype = obsKind, Float32 })
		if err != nil {
			t.Fatal(err)
		}
		pipe, err := patch.NewPipeline(grid, patch.Spec{Scramble: "full", Occlude: "random:0.25"})
		if err != nil {
			t.Fatal(err)
		}
		ep, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, p)
		if err != nil {
			t.Fatal(err)
		}
		got := make([]float32, pipe.Capacity())
		want := make([]float32, pipe.Capacity())
		cells := make([]float32, grid.N())
		tok := patch.NewTokenizer(grid)
		frameTokens := patch.NewTokenSet(grid.N(), grid.D())
		act := make([]float64, g.Spec().Action.Dim())
		steps := 0
		_, err = ep.Run(3, 4, func(_ int, _ *image.RGBA, obs *vision.Observation, _ *patch.FrameRecord, _ []float64) {
			_, k, ok := p.TokenWeights(got, nil)
			if !ok || k != obs.Tokens.N {
				t.Fatalf("%s: external weights ok %v for %d tokens, want %d", obsKind, ok, k, obs.Tokens.N)
			}
			if obsKind == ObsTokens {
				n.Act(obs, act)
				n.(vision.AttentionReporter).TokenWeights(want, nil)
				for i := 0; i < k; i++ {
					if math.Abs(float64(got[i]-want[i])) > 1e-6 {
						t.Fatalf("step %d token %d: external weight %v, built-in %v", steps, i, got[i], want[i])
					}
				}
			} else {
				// The served net saw the frame's tokens in grid order;
				// each token gets the weight of the cell it was drawn in.
				tok.Tokenize(obs.Frame, frameTokens)
				n.Act(&vision.Observation{Tokens: frameTokens, Grid: grid, PrevAction: obs.PrevAction}, act)
				n.(vision.AttentionReporter).TokenWeights(cells, nil)
				for i := 0; i < k; i++ {
					c := grid.Index(obs.Tokens.Pos[i])
					if math.Abs(float64(got[i]-cells[c])) > 1e-6 {
						t.Fatalf("step %d token %d (cell %d): external weight %v, built-in %v", steps, i, c, got[i], cells[c])
					}
				}
			}
			steps++
		})
		if err != nil {
			t.Fatal(err)
		}
		if steps == 0 {
			t.Fatal("no steps")
		}
		if err := p.Close(); err != nil {
			t.Fatal(err)
		}
	}
}

// TestRefExampleWeights runs the Python examples for one episode each: every
// action carries weights, and some step's weights are not all zero (the
// examples weigh the cells their hand rule looked at).
func TestRefExampleWeights(t *testing.T) {
	reftest.Need(t, "numpy")
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 12})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ script, obs, dtype string }{
		{"policy_stdlib.py", ObsFrame, Uint8}, {"policy_numpy.py", ObsFrame, Uint8}, {"policy_numpy.py", ObsTokens, Float32},
	} {
		p := examplePolicy(t, c.script, c.obs, c.dtype)(sp, grid).(*Policy)
		pipe, err := patch.NewPipeline(grid, patch.Spec{Scramble: "full"})
		if err != nil {
			t.Fatal(err)
		}
		ep, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, p)
		if err != nil {
			t.Fatal(err)
		}
		w := make([]float32, pipe.Capacity())
		nonzero, steps := 0, 0
		_, err = ep.Run(games.HeldOut(0), 1, func(tt int, _ *image.RGBA, obs *vision.Observation, _ *patch.FrameRecord, _ []float64) {
			_, n, ok := p.TokenWeights(w, nil)
			if !ok || n != obs.Tokens.N {
				t.Fatalf("%s %s step %d: weights ok %v for %d tokens", c.script, c.obs, tt, ok, n)
			}
			for _, v := range w[:n] {
				if v > 0 {
					nonzero++
					break
				}
			}
			steps++
		})
		if err != nil {
			t.Fatal(err)
		}
		p.Close()
		t.Logf("%s %s: weights on %d of %d steps", c.script, c.obs, nonzero, steps)
		if nonzero < steps/2 {
			t.Fatalf("%s %s: weights all zero on %d of %d steps", c.script, c.obs, steps-nonzero, steps)
		}
	}
}
