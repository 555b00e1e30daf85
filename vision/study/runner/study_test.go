package runner

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"image"
	"image/color"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"
	"testing"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// fakeEnv plays episodes whose outcome is a pure function of the seeds
// and the cell, so that tests of the runner need no game or network. It
// calls the hook like vision.Episode does, with a small frame.
type fakeEnv struct {
	fail  func(c study.Cell, gameSeed uint64) error
	calls *atomic.Int64
}

type fakePlayer struct {
	c    study.Cell
	env  *fakeEnv
	raw  *image.RGBA
	seen *image.RGBA
}

func (e *fakeEnv) Player(c study.Cell) (Player, error) {
	return &fakePlayer{c: c, env: e, raw: image.NewRGBA(image.Rect(0, 0, 8, 8)), seen: image.NewRGBA(image.Rect(0, 0, 8, 8))}, nil
}

func (e *fakeEnv) Close() error { return nil }

func (p *fakePlayer) Play(gs, ps uint64, hook vision.StepHook) (vision.Result, error) {
	if p.env.calls != nil {
		p.env.calls.Add(1)
	}
	if p.env.fail != nil {
		if err := p.env.fail(p.c, gs); err != nil {
			return vision.Result{}, err
		}
	}
	r := patch.NewRand(patch.DeriveSeed(gs, ps))
	sev := 0.0
	if _, f, ok := ratioOf(p.c.Occlude); ok {
		sev = f
	}
	steps := 60 + r.IntN(30)
	if hook != nil {
		obs := &vision.Observation{Frame: p.seen}
		for t := range steps {
			p.raw.Set(t%8, 0, color.RGBA{R: uint8(t), A: 255})
			hook(t, p.raw, obs, nil, nil)
		}
	}
	ret := 1000 * (1 - sev) * (0.6 + 0.4*r.Float64())
	if p.c.Scramble != "none" {
		ret *= 0.8
	}
	return vision.Result{Seed: gs, Return: ret, Steps: steps, Reason: games.Completed}, nil
}

func fakeFactory(e *fakeEnv) EnvFactory {
	return func(int) (Env, error) { return e, nil }
}

func testPlan(t *testing.T) *study.Plan {
	t.Helper()
	d := study.Definition{Name: "t", Episodes: 7, Seed: 42,
		Patch: study.Axis{"4,8"},
		Axes:  study.Axes{Occlude: study.Axis{"random:0:0.6:0.3,block:0.5"}, Scramble: study.Axis{"none,full"}, Every: study.Axis{"0,10"}},
		Stats: study.StatsDef{Resamples: 200}}
	p, err := study.NewPlan(d)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func runStudy(t *testing.T, p *study.Plan, dir string, opt Options) *Outcome {
	t.Helper()
	opt.Dir = dir
	if opt.Env == nil {
		opt.Env = fakeFactory(&fakeEnv{})
	}
	out, err := Run(context.Background(), p, opt)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func readFile(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestCellsOrderAndDedupe(t *testing.T) {
	p := testPlan(t)
	// 2 patches × occlusions {none, random:0.3, random:0.6, block:0.5} ×
	// scrambles {none (every folded to 0), full every 0, full every 10}.
	if got, want := len(p.Cells), 2*4*3; got != want {
		t.Fatalf("%d cells, want %d", got, want)
	}
	if !p.Cells[0].Clean() || p.Cells[0].Patch != 4 {
		t.Fatalf("first cell %+v: want the clean patch-4 cell", p.Cells[0])
	}
	for i := range p.Cells {
		ref := p.Reference(i)
		if ref < 0 || !p.Cells[ref].Clean() || p.Cells[ref].Patch != p.Cells[i].Patch {
			t.Fatalf("cell %d: reference %d", i, ref)
		}
	}
}

func TestSeedsIndependentOfCellOrder(t *testing.T) {
	p := testPlan(t)
	gs := map[uint64]bool{}
	for e := range p.Def.Episodes {
		s := p.GameSeed(e)
		if s < games.HeldOutSeedStart || s >= games.HeldOutSeedStart+games.SeedRangeLen {
			t.Fatalf("game seed %d outside the held-out range", s)
		}
		gs[s] = true
	}
	if len(gs) != p.Def.Episodes {
		t.Fatalf("game seeds repeat: %v", gs)
	}
	// A pipeline seed depends on the cell's parameters, not its index.
	d := p.Def
	d.Patch = study.Axis{"8"}
	q, err := study.NewPlan(d)
	if err != nil {
		t.Fatal(err)
	}
	for qi, c := range q.Cells {
		for pi, c2 := range p.Cells {
			if c.Key() == c2.Key() && q.PipeSeed(qi, 3) != p.PipeSeed(pi, 3) {
				t.Fatalf("cell %s: pipe seed differs between studies", c.Key())
			}
		}
	}
	if p.PipeSeed(0, 0) == p.PipeSeed(1, 0) || p.PipeSeed(0, 0) == p.PipeSeed(0, 1) {
		t.Fatal("pipe seeds collide")
	}
}

func TestWorkersGiveIdenticalResults(t *testing.T) {
	p := testPlan(t)
	base := t.TempDir()
	var outs [][]byte
	var csvs [][]byte
	for _, w := range []int{1, 2} {
		dir := filepath.Join(base, fmt.Sprint(w))
		runStudy(t, p, dir, Options{Workers: w})
		outs = append(outs, readFile(t, filepath.Join(dir, study.ResultsFile)))
		csvs = append(csvs, readFile(t, filepath.Join(dir, "cells.csv")))
	}
	if !bytes.Equal(outs[0], outs[1]) {
		t.Fatal("results.jsonl differs between 1 and 2 workers")
	}
	if !bytes.Equal(csvs[0], csvs[1]) {
		t.Fatal("cells.csv differs between 1 and 2 workers")
	}
	if n := bytes.Count(outs[0], []byte("\n")); n != p.Units() {
		t.Fatalf("%d records, want %d", n, p.Units())
	}
}

func TestShardsMergeToUnsharded(t *testing.T) {
	p := testPlan(t)
	base := t.TempDir()
	whole := filepath.Join(base, "whole")
	runStudy(t, p, whole, Options{Workers: 2})
	want := readFile(t, filepath.Join(whole, study.ResultsFile))
	wantCSV := readFile(t, filepath.Join(whole, "cells.csv"))
	for _, n := range []int{1, 2, 3} {
		var dirs []string
		for i := range n {
			dir := filepath.Join(base, fmt.Sprintf("s%d-%d", n, i))
			runStudy(t, p, dir, Options{Workers: 1 + i%2, Shard: study.Shard{Index: i, Count: n}})
			dirs = append(dirs, dir)
		}
		out := filepath.Join(base, fmt.Sprintf("merged%d", n))
		mo, err := Merge(out, dirs, true)
		if err != nil {
			t.Fatal(err)
		}
		if mo.Missing != 0 || mo.Episodes != p.Units() {
			t.Fatalf("%d shards: merged %+v", n, mo)
		}
		if got := readFile(t, filepath.Join(out, study.ResultsFile)); !bytes.Equal(got, want) {
			t.Fatalf("%d shards merged: results.jsonl differs from the unsharded run", n)
		}
		if got := readFile(t, filepath.Join(out, "cells.csv")); !bytes.Equal(got, wantCSV) {
			t.Fatalf("%d shards merged: cells.csv differs from the unsharded run", n)
		}
	}
}

func TestResumeAfterCancelAndTruncation(t *testing.T) {
	p := testPlan(t)
	base := t.TempDir()
	whole := filepath.Join(base, "whole")
	runStudy(t, p, whole, Options{Workers: 2})
	want := readFile(t, filepath.Join(whole, study.ResultsFile))

	dir := filepath.Join(base, "cut")
	ctx, cancel := context.WithCancel(context.Background())
	_, err := Run(ctx, p, Options{Dir: dir, Workers: 2, Env: fakeFactory(&fakeEnv{}), Progress: func(done, total int) {
		if done >= 10 {
			cancel()
		}
	}})
	if !errors.Is(err, ErrInterrupted) {
		t.Fatalf("err %v, want ErrInterrupted", err)
	}
	// Simulate a kill mid-write: cut the last record in half.
	rp := filepath.Join(dir, study.ResultsFile)
	data := readFile(t, rp)
	lines := bytes.Count(data, []byte("\n"))
	if lines < 10 || lines >= p.Units() {
		t.Fatalf("%d records after the interruption", lines)
	}
	cut := data[:len(data)-len(data)/(2*lines)]
	if err := os.WriteFile(rp, cut, 0o644); err != nil {
		t.Fatal(err)
	}
	kept := bytes.Count(cut, []byte("\n"))
	var calls atomic.Int64
	out, err := Run(context.Background(), p, Options{Dir: dir, Workers: 2, Resume: true, Env: fakeFactory(&fakeEnv{calls: &calls})})
	if err != nil {
		t.Fatal(err)
	}
	if out.Kept != kept || out.Ran != p.Units()-kept || int(calls.Load()) != p.Units()-kept {
		t.Fatalf("resume kept %d ran %d (played %d), want kept %d ran %d", out.Kept, out.Ran, calls.Load(), kept, p.Units()-kept)
	}
	if got := readFile(t, rp); !bytes.Equal(got, want) {
		t.Fatal("resumed results.jsonl differs from an uninterrupted run")
	}
	// A second resume has nothing to do.
	out, err = Run(context.Background(), p, Options{Dir: dir, Resume: true, Env: fakeFactory(&fakeEnv{})})
	if err != nil || out.Ran != 0 {
		t.Fatalf("second resume: ran %v, err %v", out, err)
	}
}

func TestFailedEpisodesRecordedAndRetried(t *testing.T) {
	p := testPlan(t)
	dir := t.TempDir()
	bad := p.GameSeed(2)
	broken := &fakeEnv{fail: func(c study.Cell, gs uint64) error {
		if c.Occlude == "block:0.5" && gs == bad {
			return errors.New("policy process exited (status 3) at step 17")
		}
		return nil
	}}
	out := runStudy(t, p, dir, Options{Workers: 2, Env: fakeFactory(broken)})
	wantFailed := 0
	for _, c := range p.Cells {
		if c.Occlude == "block:0.5" {
			wantFailed++
		}
	}
	if out.Failed != wantFailed || out.Ran != p.Units() {
		t.Fatalf("outcome %+v, want %d failed of %d", out, wantFailed, p.Units())
	}
	recs, _, err := study.ReadResults(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range recs {
		if r.Failed() != (r.Params.Occlude == "block:0.5" && r.GameSeed == bad) {
			t.Fatalf("record %+v", r)
		}
		if r.Failed() && !strings.Contains(r.Failure, "exited") {
			t.Fatalf("failure reason %q", r.Failure)
		}
	}
	// --resume alone keeps the error episodes: they count, they are not
	// retried away.
	var calls atomic.Int64
	out, err = Run(context.Background(), p, Options{Dir: dir, Resume: true, Env: fakeFactory(&fakeEnv{calls: &calls})})
	if err != nil {
		t.Fatal(err)
	}
	if out.Ran != 0 || out.Failed != wantFailed || calls.Load() != 0 {
		t.Fatalf("resume without retrying errors: %+v, played %d", out, calls.Load())
	}
	out, err = Run(context.Background(), p, Options{Dir: dir, Resume: true, RetryErrors: true, Env: fakeFactory(&fakeEnv{calls: &calls})})
	if err != nil {
		t.Fatal(err)
	}
	if out.Ran != wantFailed || out.Failed != 0 || int(calls.Load()) != wantFailed {
		t.Fatalf("retry: %+v, played %d", out, calls.Load())
	}
	whole := t.TempDir()
	runStudy(t, p, whole, Options{})
	if !bytes.Equal(readFile(t, filepath.Join(dir, study.ResultsFile)), readFile(t, filepath.Join(whole, study.ResultsFile))) {
		t.Fatal("after the retry results differ from a clean run")
	}
}

func TestRefusesOtherStudyAndOverwrite(t *testing.T) {
	p := testPlan(t)
	dir := t.TempDir()
	runStudy(t, p, dir, Options{})
	before := readFile(t, filepath.Join(dir, study.ResultsFile))
	d := p.Def
	d.Episodes = 5
	q, err := study.NewPlan(d)
	if err != nil {
		t.Fatal(err)
	}
	for _, opt := range []Options{{Resume: true}, {}} {
		opt.Dir = dir
		opt.Env = fakeFactory(&fakeEnv{})
		_, err := Run(context.Background(), q, opt)
		if err == nil || strings.Contains(err.Error(), "\n") {
			t.Fatalf("resume=%v: err %v, want a one-line error", opt.Resume, err)
		}
	}
	_, err = Run(context.Background(), p, Options{Dir: dir, Env: fakeFactory(&fakeEnv{})})
	if err == nil || !strings.Contains(err.Error(), "--resume") {
		t.Fatalf("rerun without --resume: %v", err)
	}
	if !bytes.Equal(readFile(t, filepath.Join(dir, study.ResultsFile)), before) {
		t.Fatal("results were changed")
	}
	// Mixed studies to merge.
	other := t.TempDir()
	runStudy(t, q, other, Options{})
	out := filepath.Join(t.TempDir(), "m")
	if _, err := Merge(out, []string{dir, other}, false); err == nil || !strings.Contains(err.Error(), "not the same study") {
		t.Fatalf("merge of two studies: %v", err)
	}
	if _, err := os.Stat(out); !errors.Is(err, os.ErrNotExist) {
		t.Fatal("merge of two studies wrote its output folder")
	}
}

func TestReplayGivesRecordedReturn(t *testing.T) {
	p := testPlan(t)
	dir := t.TempDir()
	runStudy(t, p, dir, Options{Workers: 2})
	for _, ce := range [][2]int{{0, 0}, {5, 3}, {len(p.Cells) - 1, p.Def.Episodes - 1}} {
		fresh, rec, err := Replay(dir, ce[0], ce[1], fakeFactory(&fakeEnv{}))
		if err != nil || rec == nil {
			t.Fatal(err, rec)
		}
		a, _ := study.EncodeRecord(&fresh)
		b, _ := study.EncodeRecord(rec)
		if !bytes.Equal(a, b) {
			t.Fatalf("replay of %v:\n%s\nrecorded\n%s", ce, a, b)
		}
	}
	if _, _, err := Replay(dir, len(p.Cells), 0, fakeFactory(&fakeEnv{})); err == nil {
		t.Fatal("replay of a cell outside the study succeeded")
	}
}

func TestStripsRecorded(t *testing.T) {
	p := testPlan(t)
	dir := t.TempDir()
	runStudy(t, p, dir, Options{Workers: 2})
	for c := range p.Cells {
		img, m := analysis.LoadStrip(dir, c)
		if img == nil {
			t.Fatalf("cell %d: no strip", c)
		}
		if len(m.Steps) != 2 || m.Steps[0] != 0 || m.Steps[1] != 50 {
			// The fake's episodes last 60..89 steps: steps 0 and 50 are kept.
			t.Fatalf("cell %d: strip steps %v", c, m.Steps)
		}
		f := analysis.StripFrame(img, m, 1, 0)
		if f == nil || f.Bounds().Dx() != 8 {
			t.Fatalf("cell %d: frame %v", c, f)
		}
	}
}

func TestShardFromEnv(t *testing.T) {
	env := func(kv ...string) func(string) string {
		m := map[string]string{}
		for i := 0; i < len(kv); i += 2 {
			m[kv[i]] = kv[i+1]
		}
		return func(k string) string { return m[k] }
	}
	cases := []struct {
		env   func(string) string
		count int
		want  study.Shard
		ok    bool
		err   bool
	}{
		{env(), 0, study.Shard{}, false, false},
		{env("SLURM_ARRAY_TASK_ID", "2", "SLURM_ARRAY_TASK_COUNT", "4"), 0, study.Shard{Index: 2, Count: 4}, true, false},
		{env("SLURM_ARRAY_TASK_ID", "3", "SLURM_ARRAY_TASK_COUNT", "3", "SLURM_ARRAY_TASK_MIN", "1"), 0, study.Shard{Index: 2, Count: 3}, true, false},
		{env("SLURM_ARRAY_TASK_ID", "5", "SLURM_ARRAY_TASK_COUNT", "3"), 0, study.Shard{}, false, true},
		{env("JOB_COMPLETION_INDEX", "1"), 3, study.Shard{Index: 1, Count: 3}, true, false},
		{env("JOB_COMPLETION_INDEX", "1"), 0, study.Shard{}, false, true},
	}
	for i, c := range cases {
		got, ok, err := ShardFromEnv(c.env, c.count)
		if (err != nil) != c.err || ok != c.ok || got != c.want {
			t.Errorf("case %d: %v %v %v", i, got, ok, err)
		}
	}
	for _, s := range []string{"3/3", "-1/2", "1/0", "a/b", "1"} {
		if _, err := study.ParseShard(s); err == nil {
			t.Errorf("ParseShard(%q) succeeded", s)
		}
	}
}

// The corruption axis: its ranges expand to canonical corruption lists,
// cells without a corruption keep the keys (and so the seeds) they had
// before the axis existed, and the analysis draws one curve per kind.
func TestCorruptAxis(t *testing.T) {
	d := study.Definition{Name: "c", Episodes: 5, Seed: 4, Patch: study.Axis{"8"},
		Axes:  study.Axes{Corrupt: study.Axis{"blur:s1:s3", "jpeg:40:80:40,shift:3:0+blur:1,none"}},
		Stats: study.StatsDef{Resamples: 100}}
	p, err := study.NewPlan(d)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, c := range p.Cells {
		got = append(got, c.Corrupt)
		if c.Corrupt == "" && strings.Contains(c.Key(), "corrupt") {
			t.Fatalf("uncorrupted cell key %q mentions corrupt", c.Key())
		}
		if c.Corrupt != "" && (c.Clean() || c.Spec().Corrupt != c.Corrupt || !strings.Contains(c.Label(), c.Corrupt)) {
			t.Fatalf("cell %+v: clean %v spec %+v label %q", c, c.Clean(), c.Spec(), c.Label())
		}
	}
	want := []string{"blur:s1", "blur:s2", "blur:s3", "jpeg:40", "jpeg:80", "shift:3:0,blur:1", ""}
	if strings.Join(got, "|") != strings.Join(want, "|") {
		t.Fatalf("cells %q, want %q", got, want)
	}
	if k := (study.Cell{Patch: 8, Occlude: "none", Fill: "black", Scramble: "none", Contrast: 1}).Key(); k !=
		"patch=8 variation= occlude=none fill=black scramble=none every=0 noise_tokens=0 brightness=0 contrast=1 pixel_noise=0" {
		t.Fatalf("clean key changed: %q", k)
	}
	dir := t.TempDir()
	runStudy(t, p, dir, Options{Workers: 2})
	a, err := analysis.Analyze(dir)
	if err != nil {
		t.Fatal(err)
	}
	axes := map[string]int{}
	for _, cv := range a.Curves {
		axes[cv.Axis] = len(cv.Cells)
	}
	// Each curve holds the clean reference and its cells; the two-step
	// list is on none.
	if axes["corrupt blur severity"] != 4 || axes["corrupt jpeg 100−Q"] != 3 || len(axes) != 2 {
		t.Fatalf("curves %v", axes)
	}
	for _, bad := range []string{"blur:s0:s2", "fog:1", "blur:3:1:1", "jpeg:0"} {
		d.Axes.Corrupt = study.Axis{bad}
		if _, err := study.NewPlan(d); err == nil || !strings.Contains(err.Error(), "axes.corrupt") {
			t.Errorf("axis %q: error %v", bad, err)
		}
	}
}

// ratioOf reads "kind:R" (the occlusion ratio the fake player scores by).
func ratioOf(s string) (string, float64, bool) {
	k, v, ok := strings.Cut(s, ":")
	if !ok {
		return k, 0, false
	}
	f, err := strconv.ParseFloat(v, 64)
	return k, f, err == nil
}
