package remote

import (
	"bufio"
	"os/exec"
	"strings"
	"testing"
	"time"

	"tilebench/games"
	_ "tilebench/games/all"
	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/vision"
)

// randomPolicy picks uniformly among the choices: chance level.
type randomPolicy struct {
	n   int
	rng interface{ IntN(int) int }
}

func (p *randomPolicy) Info() vision.Info { return vision.Info{Family: "random"} }
func (p *randomPolicy) Reset(seed uint64) { p.rng = patch.NewRand(seed) }
func (p *randomPolicy) Act(_ *vision.Observation, a []float64) error {
	a[0] = float64(p.rng.IntN(p.n))
	return nil
}

// paddleScore runs pol on the paddle game for held-out seeds and returns
// the mean return.
func paddleScore(t *testing.T, mk func(games.Spec, *patch.Grid) vision.Policy, seeds int) float64 {
	t.Helper()
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: 120, Height: 80, PatchW: 20})
	if err != nil {
		t.Fatal(err)
	}
	pipe, err := patch.NewPipeline(grid, patch.Spec{})
	if err != nil {
		t.Fatal(err)
	}
	pol := mk(g.Spec(), grid)
	ep, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, pol)
	if err != nil {
		t.Fatal(err)
	}
	var sum float64
	for i := 0; i < seeds; i++ {
		s := games.HeldOut(i)
		res, err := ep.Run(s, patch.DeriveSeed(s, 1), nil)
		if err != nil {
			t.Fatal(err)
		}
		if p, ok := pol.(*Policy); ok {
			if err := p.End(res.Return, res.Steps); err != nil {
				t.Fatal(err)
			}
		}
		sum += res.Return
	}
	if p, ok := pol.(*Policy); ok {
		if err := p.Close(); err != nil {
			t.Fatal(err)
		}
	}
	return sum / float64(seeds)
}

func examplePolicy(t *testing.T, script, obs, dtype string) func(games.Spec, *patch.Grid) vision.Policy {
	return func(sp games.Spec, grid *patch.Grid) vision.Policy {
		p, err := Open("exec:"+reftest.Python+" "+reftest.Root()+"/examples/"+script, Config{
			Game: sp, Grid: grid, Obs: obs, Dtype: dtype, LogDir: t.TempDir(), StepTimeout: 20 * time.Second,
		})
		if err != nil {
			t.Fatal(err)
		}
		return p
	}
}

const exampleSeeds = 3

func chance(t *testing.T) float64 {
	return paddleScore(t, func(sp games.Spec, _ *patch.Grid) vision.Policy {
		return &randomPolicy{n: sp.Action.Choices()}
	}, exampleSeeds)
}

// TestRefExamplePolicyStdlib runs examples/policy_stdlib.py (plain
// Python 3) on the paddle game: it must beat uniformly random choices on
// the same held-out seeds by a clear margin.
func TestRefExamplePolicyStdlib(t *testing.T) {
	reftest.Need(t)
	base := chance(t)
	got := paddleScore(t, examplePolicy(t, "policy_stdlib.py", ObsFrame, Uint8), exampleSeeds)
	t.Logf("stdlib hand rule %.2f, chance %.2f (mean return over %d held-out seeds)", got, base, exampleSeeds)
	if got < base+3 {
		t.Fatalf("stdlib example scores %.2f, chance %.2f: want at least 3 more", got, base)
	}
}

// TestRefExamplePolicyNumpy runs examples/policy_numpy.py with frames
// and with float32 tokens.
func TestRefExamplePolicyNumpy(t *testing.T) {
	reftest.Need(t, "numpy")
	base := chance(t)
	for _, c := range []struct{ obs, dtype string }{{ObsFrame, Uint8}, {ObsTokens, Float32}} {
		got := paddleScore(t, examplePolicy(t, "policy_numpy.py", c.obs, c.dtype), exampleSeeds)
		t.Logf("numpy hand rule (%s/%s) %.2f, chance %.2f", c.obs, c.dtype, got, base)
		if got < base+3 {
			t.Fatalf("numpy example (%s/%s) scores %.2f, chance %.2f: want at least 3 more", c.obs, c.dtype, got, base)
		}
	}
}

// TestRefExamplePolicyNumpyTCP serves examples/policy_numpy.py over TCP
// (--listen on a free port) and plays it through the tcp:// transport.
func TestRefExamplePolicyNumpyTCP(t *testing.T) {
	reftest.Need(t, "numpy")
	cmd := exec.Command(reftest.Python, reftest.Root()+"/examples/policy_numpy.py", "--listen", "127.0.0.1:0", "--sessions", "1")
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer func() { cmd.Process.Kill(); cmd.Wait() }()
	line, err := bufio.NewReader(stderr).ReadString('\n')
	addr, ok := strings.CutPrefix(strings.TrimSpace(line), "policy_numpy: listening on ")
	if err != nil || !ok {
		t.Fatalf("server said %q (%v)", line, err)
	}
	base := chance(t)
	got := paddleScore(t, func(sp games.Spec, grid *patch.Grid) vision.Policy {
		p, err := Open("tcp://"+addr, Config{Game: sp, Grid: grid, StepTimeout: 20 * time.Second})
		if err != nil {
			t.Fatal(err)
		}
		return p
	}, exampleSeeds)
	t.Logf("numpy hand rule over tcp %.2f, chance %.2f", got, base)
	if got < base+3 {
		t.Fatalf("numpy example over tcp scores %.2f, chance %.2f", got, base)
	}
}
