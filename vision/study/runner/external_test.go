package runner

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/vision"
	"tilebench/vision/remote"
	"tilebench/vision/study"
)

// The test binary doubles as an external policy process: with
// STUDY_FAKE_POLICY set it serves the protocol on stdin/stdout (the
// helper-process pattern of os/exec's tests). In "crash" mode it exits
// with status 3 at step 17 of every episode whose seed is divisible by 3.
func TestMain(m *testing.M) {
	if dir := os.Getenv(killRunEnv); dir != "" {
		os.Exit(killRunHelper(dir))
	}
	if mode := os.Getenv("STUDY_FAKE_POLICY"); mode != "" {
		err := remote.Serve(os.Stdin, os.Stdout, &fakeRemote{crash: mode == "crash"}, remote.ServeOptions{Name: "fake"})
		if err != nil {
			os.Exit(1)
		}
		os.Exit(0)
	}
	os.Exit(m.Run())
}

type fakeRemote struct {
	crash bool
	seed  uint64
}

func (f *fakeRemote) Info() vision.Info { return vision.Info{Family: "external", Label: "fake"} }
func (f *fakeRemote) Reset(seed uint64) { f.seed = seed }
func (f *fakeRemote) Act(obs *vision.Observation, a []float64) error {
	if f.crash && f.seed%3 == 0 && obs.Step == 17 {
		os.Exit(3)
	}
	a[0] = math.Sin(float64(obs.Step)/10 + float64(f.seed%7))
	a[1] = 0.6
	return nil
}

func TestExternalPolicyCrashMarksEpisodesFailed(t *testing.T) {
	if testing.Short() {
		t.Skip("starts policy processes")
	}
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	p, err := study.NewPlan(study.Definition{Name: "ext", Game: "drive", Episodes: 6, Seed: 5,
		Policy: study.PolicyDef{Source: "exec:'" + exe + "'", Timeout: "10s"}, Patch: study.Axis{"16"},
		Axes: study.Axes{Occlude: study.Axis{"random:0.3"}}, Stats: study.StatsDef{Resamples: 200}, Strips: []int{}})
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "s")
	t.Setenv("STUDY_FAKE_POLICY", "crash")
	out, err := Run(context.Background(), p, Options{Dir: dir, Workers: 2, Env: DefaultEnv(p, filepath.Join(dir, study.LogsDir))})
	if err != nil {
		t.Fatal(err)
	}
	wantFailed := 0
	for c := range p.Cells {
		for e := 0; e < p.Def.Episodes; e++ {
			if p.PipeSeed(c, e)%3 == 0 {
				wantFailed++
			}
		}
	}
	if wantFailed == 0 || wantFailed == p.Units() {
		t.Fatalf("seeds give %d crashes of %d: pick another study seed", wantFailed, p.Units())
	}
	if out.Failed != wantFailed || out.Ran != p.Units() {
		t.Fatalf("outcome %+v, want %d failed", out, wantFailed)
	}
	recs, _, _ := study.ReadResults(dir)
	for _, r := range recs {
		crashed := r.PipeSeed%3 == 0
		if r.Failed() != crashed {
			t.Fatalf("record %+v: crashed %v", r, crashed)
		}
		if crashed && (!strings.Contains(r.Failure, "step 17") || r.End != "error") {
			t.Fatalf("failure %q end %q: want the step named", r.Failure, r.End)
		}
		if !crashed && r.Steps == 0 {
			t.Fatalf("record %+v", r)
		}
	}
	// The policy fixed, --resume --retry-errors retries exactly the
	// failed episodes.
	t.Setenv("STUDY_FAKE_POLICY", "ok")
	out, err = Run(context.Background(), p, Options{Dir: dir, Resume: true, RetryErrors: true, Workers: 2, Env: DefaultEnv(p, filepath.Join(dir, study.LogsDir))})
	if err != nil {
		t.Fatal(err)
	}
	if out.Ran != wantFailed || out.Failed != 0 || out.Kept != p.Units()-wantFailed {
		t.Fatalf("resume %+v", out)
	}
}
