package runner

import (
	"bytes"
	"context"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"tilebench/vision"
	"tilebench/vision/study"
)

// killRunEnv makes the test binary run the kill test's study into the
// folder it names, to be killed by the test.
const killRunEnv = "STUDY_KILL_RUN"

// killPlan is the study of the kill tests: testPlan's, built without a T.
func killPlan() (*study.Plan, error) {
	return study.NewPlan(study.Definition{Name: "t", Episodes: 7, Seed: 42,
		Patch: study.Axis{"4,8"},
		Axes:  study.Axes{Occlude: study.Axis{"random:0:0.6:0.3,block:0.5"}, Scramble: study.Axis{"none,full"}, Every: study.Axis{"0,10"}},
		Stats: study.StatsDef{Resamples: 200}})
}

// slowEnv is fakeEnv with a pause per episode, so that a kill lands
// among the writes.
type slowEnv struct{ fakeEnv }

func (e *slowEnv) Player(c study.Cell) (Player, error) {
	pl, err := e.fakeEnv.Player(c)
	return slowPlayer{pl}, err
}

type slowPlayer struct{ Player }

func (s slowPlayer) Play(gs, ps uint64, hook vision.StepHook) (vision.Result, error) {
	time.Sleep(2 * time.Millisecond)
	return s.Player.Play(gs, ps, hook)
}

func killRunHelper(dir string) int {
	p, err := killPlan()
	if err != nil {
		return 2
	}
	_, err = Run(context.Background(), p, Options{Dir: dir, Workers: 2, Resume: true, NoReport: true,
		Env: func(int) (Env, error) { return &slowEnv{}, nil }})
	if err != nil {
		return 1
	}
	return 0
}

// timingUnits counts the timing lines of dir per episode.
func timingUnits(t *testing.T, dir string) map[unit]int {
	t.Helper()
	n := map[unit]int{}
	for _, tm := range study.ReadTimings(dir) {
		n[unit{tm.Cell, tm.Episode}]++
	}
	return n
}

// checkOneTimingPerRecord fails unless dir's timing.jsonl holds exactly
// one line for each episode its results.jsonl records.
func checkOneTimingPerRecord(t *testing.T, dir string) {
	t.Helper()
	recs, _, err := study.ReadResults(dir)
	if err != nil {
		t.Fatal(err)
	}
	tu := timingUnits(t, dir)
	for _, r := range recs {
		if tu[unit{r.Cell, r.Episode}] != 1 {
			t.Fatalf("cell %d episode %d: %d timing lines, want 1", r.Cell, r.Episode, tu[unit{r.Cell, r.Episode}])
		}
	}
	if len(tu) != len(recs) {
		t.Fatalf("%d timed episodes, %d records", len(tu), len(recs))
	}
}

// A kill between the timing write and the record write (timing first)
// leaves a timing line without its record; the resumed run plays the
// episode again and keeps one timing line for it. Before, the record came
// first and a kill lost its timing line for good; a resumed episode would
// now be timed twice without the reconciliation.
func TestTimingAndRecordBothOrNeither(t *testing.T) {
	p := testPlan(t)
	dir := filepath.Join(t.TempDir(), "s")
	runStudy(t, p, dir, Options{Workers: 2})
	want := readFile(t, filepath.Join(dir, study.ResultsFile))
	// The state a kill after the timing write leaves: the last record
	// missing, its timing line present.
	rp := filepath.Join(dir, study.ResultsFile)
	lines := bytes.SplitAfter(want, []byte("\n"))
	os.WriteFile(rp, bytes.Join(lines[:len(lines)-2], nil), 0o644)
	out := runStudy(t, p, dir, Options{Workers: 2, Resume: true})
	if out.Ran != 1 {
		t.Fatalf("resume ran %d episodes, want 1", out.Ran)
	}
	if got := readFile(t, rp); !bytes.Equal(got, want) {
		t.Fatal("resumed results differ")
	}
	checkOneTimingPerRecord(t, dir)
}

// SIGKILL at random points of a run, many times over, then --resume: the
// results are byte-identical to an uninterrupted run's and every recorded
// episode is timed exactly once.
func TestKillAtRandomPoints(t *testing.T) {
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	p := testPlan(t)
	base := t.TempDir()
	whole := filepath.Join(base, "whole")
	runStudy(t, p, whole, Options{Workers: 2})
	want := readFile(t, filepath.Join(whole, study.ResultsFile))
	rounds := 8
	if testing.Short() {
		rounds = 4
	}
	rng := rand.New(rand.NewPCG(7, 11))
	cut := 0
	defer func() { t.Logf("%d of %d folders were cut short by the kills", cut, rounds) }()
	for round := range rounds {
		dir := filepath.Join(base, "k", string(rune('a'+round)))
		// Up to three kills per folder, at random times in the run.
		for range 1 + rng.IntN(3) {
			cmd := exec.Command(exe, "-test.run=^$")
			cmd.Env = append(os.Environ(), killRunEnv+"="+dir)
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			time.Sleep(time.Duration(20+rng.IntN(100)) * time.Millisecond)
			cmd.Process.Signal(syscall.SIGKILL)
			cmd.Wait()
		}
		if _, err := os.Stat(filepath.Join(dir, study.InfoFile)); err != nil {
			continue // killed before it began
		}
		if recs, _, _ := study.ReadResults(dir); len(recs) < p.Units() {
			cut++
		}
		runStudy(t, p, dir, Options{Workers: 2, Resume: true})
		if got := readFile(t, filepath.Join(dir, study.ResultsFile)); !bytes.Equal(got, want) {
			t.Fatalf("round %d: resumed results differ from an uninterrupted run", round)
		}
		checkOneTimingPerRecord(t, dir)
	}
}

// A study.json that does not parse is reported as corrupt, not as a
// folder that "holds no study".
func TestCorruptStudyFile(t *testing.T) {
	p := testPlan(t)
	dir := filepath.Join(t.TempDir(), "s")
	runStudy(t, p, dir, Options{})
	os.WriteFile(filepath.Join(dir, study.InfoFile), []byte(`{"format": 1, "finger`), 0o644)
	_, err := Run(context.Background(), p, Options{Dir: dir, Resume: true, Env: fakeFactory(&fakeEnv{})})
	if err == nil || !bytes.Contains([]byte(err.Error()), []byte("study.json is corrupt")) {
		t.Fatalf("corrupt study.json: %v", err)
	}
}
