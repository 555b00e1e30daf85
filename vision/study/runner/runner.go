package runner

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"time"

	"tilebench/internal/atomicfile"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/policies"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// ShardFromEnv takes the shard from a cluster's environment: a Slurm job
// array (SLURM_ARRAY_TASK_ID, minus SLURM_ARRAY_TASK_MIN when set, out of
// SLURM_ARRAY_TASK_COUNT) or a Kubernetes indexed Job (JOB_COMPLETION_INDEX
// out of count, which the Job's completions must give, as
// Kubernetes sets no count variable). ok is false when neither is set.
func ShardFromEnv(getenv func(string) string, count int) (s study.Shard, ok bool, err error) {
	if id := getenv("SLURM_ARRAY_TASK_ID"); id != "" {
		n := getenv("SLURM_ARRAY_TASK_COUNT")
		i, e1 := strconv.Atoi(id)
		c, e2 := strconv.Atoi(n)
		if e1 != nil || e2 != nil {
			return study.Shard{}, false, fmt.Errorf("slurm array: SLURM_ARRAY_TASK_ID=%q SLURM_ARRAY_TASK_COUNT=%q: want whole numbers", id, n)
		}
		if m := getenv("SLURM_ARRAY_TASK_MIN"); m != "" {
			lo, err := strconv.Atoi(m)
			if err != nil {
				return study.Shard{}, false, fmt.Errorf("slurm array: SLURM_ARRAY_TASK_MIN=%q: want a whole number", m)
			}
			i -= lo
		}
		s, err := study.ParseShard(fmt.Sprintf("%d/%d", i, c))
		if err != nil {
			return study.Shard{}, false, fmt.Errorf("slurm array: %w (arrays must be contiguous, e.g. --array=0-7)", err)
		}
		return s, true, nil
	}
	if id := getenv("JOB_COMPLETION_INDEX"); id != "" {
		if count <= 0 {
			return study.Shard{}, false, errors.New("JOB_COMPLETION_INDEX is set: give the number of shards (--shards N, the Job's completions)")
		}
		i, err := strconv.Atoi(id)
		if err != nil {
			return study.Shard{}, false, fmt.Errorf("JOB_COMPLETION_INDEX=%q: want a whole number", id)
		}
		s, err := study.ParseShard(fmt.Sprintf("%d/%d", i, count))
		if err != nil {
			return study.Shard{}, false, fmt.Errorf("indexed job: %w", err)
		}
		return s, true, nil
	}
	return study.Shard{}, false, nil
}

// Options control Run. The zero value but Dir runs the whole study on
// every core into Dir.
type Options struct {
	// Dir is the study folder. It must not exist, be empty, or (with
	// Resume) hold the same study.
	Dir string
	// Workers is the number of parallel workers; 0 means runtime.NumCPU().
	Workers int
	// Resume continues the study already in Dir: recorded episodes are
	// kept, error episodes too unless RetryErrors. Resume on a folder that
	// does not exist starts the study.
	Resume bool
	// RetryErrors, with Resume, plays the error episodes (a policy that
	// crashed, a bad action) again. Default false: an error episode stays
	// recorded and counts at the study's worst return, so that errors that
	// rise with stress are not retried away (survivorship).
	RetryErrors bool
	// Shard restricts the run to one part of the study.
	Shard study.Shard
	// Env makes each worker's games and policies. Default: the
	// registered games with the study's policy (DefaultEnv).
	Env EnvFactory
	// LogDir receives external policies' stderr when Env is the default.
	// Default Dir/logs.
	LogDir string
	// Train, if set, trains the study's policies before the episodes
	// (TrainPolicies); the study's policy must be TrainTemplate(Dir).
	Train *TrainOptions
	// Progress, if set, is called after every finished episode with the
	// number done (including those found on resume) and the total for
	// this shard. Calls come from one goroutine.
	Progress func(done, total int)
	// Command is the command line recorded in study.json for reports.
	Command string
	// NoReport skips writing the report at the end.
	NoReport bool
}

// Outcome summarises a run.
type Outcome struct {
	// Total is the number of episodes in this shard; Kept those found
	// finished in Dir; Ran those played now; Failed those recorded as
	// failed (now or before) that are still failed.
	Total, Kept, Ran, Failed int
	// Steps is the number of game steps played now; Elapsed the wall time.
	Steps   int
	Elapsed time.Duration
	// Analysis is what the report was made from (nil with NoReport).
	Analysis *analysis.Analysis
}

// ErrInterrupted is returned (wrapped) when the context ends a run early.
var ErrInterrupted = errors.New("study interrupted")

type unit struct{ cell, ep int }

type finished struct {
	rec    study.Record
	timing study.Timing
}

// playEpisodes plays the study's episodes (those of opt.Shard not already
// finished in opt.Dir), appending one record per episode to
// results.jsonl, synced to disk, so that a run stopped at any point loses
// at most the episodes in flight. At the end it rewrites results.jsonl in
// canonical order and returns the latest record of every episode. A
// cancelled ctx stops the run after the episodes in flight; the error
// wraps ErrInterrupted.
func playEpisodes(ctx context.Context, p *study.Plan, opt Options) (*Outcome, []study.Record, error) {
	start := time.Now()
	if opt.Env == nil {
		return nil, nil, errors.New("study: no Env")
	}
	if opt.Dir == "" {
		return nil, nil, errors.New("study: no output folder given")
	}
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	if err := prepareDir(p, opt); err != nil {
		return nil, nil, err
	}
	// Check every cell builds (pipeline specs, policy files, geometry)
	// before anything is written.
	if err := preflight(p, opt.Env); err != nil {
		return nil, nil, err
	}
	if err := os.MkdirAll(opt.Dir, 0o755); err != nil {
		return nil, nil, fmt.Errorf("study folder: %w", err)
	}
	if _, err := os.Stat(filepath.Join(opt.Dir, study.InfoFile)); errors.Is(err, os.ErrNotExist) {
		si := &study.Info{Format: 1, Fingerprint: p.Fingerprint, Definition: p.Def, Cells: p.Cells,
			Episodes: p.Def.Episodes, Command: opt.Command}
		if !opt.Shard.Whole() {
			sh := opt.Shard
			si.Shard = &sh
		}
		if err := study.WriteInfo(opt.Dir, si); err != nil {
			return nil, nil, err
		}
	}
	old, validEnd, err := study.ReadResults(opt.Dir)
	if err != nil {
		return nil, nil, err
	}
	for _, r := range old {
		if r.Study != p.Fingerprint || r.Cell < 0 || r.Cell >= len(p.Cells) || r.Episode < 0 || r.Episode >= p.Def.Episodes {
			return nil, nil, fmt.Errorf("%s: record for cell %d episode %d does not belong to study %s", filepath.Join(opt.Dir, study.ResultsFile), r.Cell, r.Episode, p.Fingerprint)
		}
	}
	done := map[unit]bool{}
	for _, r := range study.Latest(old) {
		if !r.Failed() || !opt.RetryErrors {
			done[unit{r.Cell, r.Episode}] = true
		}
	}
	var todo []unit
	total := 0
	for c := range p.Cells {
		for e := 0; e < p.Def.Episodes; e++ {
			if !opt.Shard.Owns(c*p.Def.Episodes + e) {
				continue
			}
			total++
			if !done[unit{c, e}] {
				todo = append(todo, unit{c, e})
			}
		}
	}
	out := &Outcome{Total: total, Kept: total - len(todo)}

	// Drop a line cut short by a kill, then append.
	rpath := filepath.Join(opt.Dir, study.ResultsFile)
	rf, err := os.OpenFile(rpath, os.O_WRONLY|os.O_CREATE, 0o644)
	if err != nil {
		return nil, nil, fmt.Errorf("open results: %w", err)
	}
	defer rf.Close()
	if err := rf.Truncate(validEnd); err != nil {
		return nil, nil, fmt.Errorf("results: %w", err)
	}
	if _, err := rf.Seek(validEnd, io.SeekStart); err != nil {
		return nil, nil, fmt.Errorf("results: %w", err)
	}
	// Timing lines are written before their records: drop those whose
	// record a kill kept from being written (the episode is played again).
	if err := study.ReconcileTimings(opt.Dir, old); err != nil {
		return nil, nil, err
	}
	tf, err := os.OpenFile(filepath.Join(opt.Dir, study.TimingFile), os.O_WRONLY|os.O_CREATE|os.O_APPEND, 0o644)
	if err != nil {
		return nil, nil, fmt.Errorf("open timing: %w", err)
	}
	defer tf.Close()

	if opt.Progress != nil {
		opt.Progress(out.Kept, total)
	}
	// A failed write stops the run: episodes that cannot be recorded are
	// not worth playing.
	runCtx, cancelRun := context.WithCancel(ctx)
	defer cancelRun()
	jobs := make(chan unit)
	results := make(chan finished, workers)
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			worker(runCtx, p, opt, w, jobs, results)
		}()
	}
	go func() {
		defer close(jobs)
		for _, u := range todo {
			select {
			case jobs <- u:
			case <-runCtx.Done():
				return
			}
		}
	}()
	go func() { wg.Wait(); close(results) }()

	var writeErr error
	var ran []study.Record
	n := out.Kept
	for f := range results {
		if writeErr != nil {
			continue
		}
		// The timing line first, then the record, each synced: a kill
		// between them leaves a timing line without its record, which
		// the next run drops (reconcileTimings) before playing the
		// episode again, so that both are recorded or both redone.
		tb, err := jsonLine(f.timing)
		if err == nil {
			_, err = tf.Write(tb)
		}
		if err == nil {
			err = tf.Sync()
		}
		if err != nil {
			writeErr = fmt.Errorf("write timing: %w", err)
			cancelRun()
			continue
		}
		b, err := study.EncodeRecord(&f.rec)
		if err == nil {
			_, err = rf.Write(b)
		}
		if err == nil {
			err = rf.Sync()
		}
		if err != nil {
			writeErr = fmt.Errorf("write results: %w", err)
			cancelRun()
			continue
		}
		ran = append(ran, f.rec)
		out.Ran++
		out.Steps += f.rec.Steps
		n++
		if opt.Progress != nil {
			opt.Progress(n, total)
		}
	}
	out.Elapsed = time.Since(start)
	if writeErr != nil {
		return out, nil, writeErr
	}
	// results.jsonl now holds old (up to validEnd) and then ran.
	latest := study.Latest(append(old, ran...))
	for _, r := range latest {
		if r.Failed() {
			out.Failed++
		}
	}
	if ctx.Err() != nil && out.Kept+out.Ran < total {
		return out, nil, fmt.Errorf("%w: %d of %d episodes recorded in %s; continue with --resume", ErrInterrupted, out.Kept+out.Ran, total, opt.Dir)
	}
	rf.Close()
	if err := study.WriteResults(opt.Dir, latest); err != nil {
		return out, nil, err
	}
	return out, latest, nil
}

// prepareDir refuses a folder that holds something else than this study.
func prepareDir(p *study.Plan, opt Options) error {
	entries, err := os.ReadDir(opt.Dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("study folder: %w", err)
	}
	others := 0
	for _, e := range entries {
		// Policies trained for the study are put there before it starts.
		if e.Name() != "policies" {
			others++
		}
	}
	if others == 0 {
		return nil
	}
	si, err := study.ReadInfo(opt.Dir)
	if err != nil {
		if _, serr := os.Stat(filepath.Join(opt.Dir, study.InfoFile)); serr == nil {
			return fmt.Errorf("%s: %s is corrupt (%v); nothing changed", opt.Dir, study.InfoFile, err)
		}
		return fmt.Errorf("%s is not empty and holds no study; choose another --out", opt.Dir)
	}
	if !opt.Resume {
		return fmt.Errorf("%s already holds study %s; continue it with --resume or choose another --out", opt.Dir, si.Fingerprint)
	}
	if si.Fingerprint != p.Fingerprint {
		if was, now := policyListText(si.Definition), policyListText(p.Def); was != now {
			return fmt.Errorf("%s holds study %s with policies %s; the policies given are %s: a study's policy list cannot change on --resume (start a new study with another --out); nothing changed", opt.Dir, si.Fingerprint, was, now)
		}
		return fmt.Errorf("%s holds a different study (%s, %q) than the one given (%s, %q); nothing changed", opt.Dir, si.Fingerprint, si.Definition.Name, p.Fingerprint, p.Def.Name)
	}
	var stored study.Shard
	if si.Shard != nil {
		stored = *si.Shard
	}
	if stored.String() != opt.Shard.String() {
		return fmt.Errorf("%s holds shard %s of the study, not shard %s", opt.Dir, stored, opt.Shard)
	}
	return nil
}

// policyListText describes a study's policies for messages.
func policyListText(d study.Definition) string {
	if len(d.Policies) == 0 {
		return fmt.Sprintf("%q (one, unlabelled)", d.Policy.Source)
	}
	return "[" + policies.ListString(d.Policies) + "]"
}

// preflight builds a player for every cell once.
func preflight(p *study.Plan, f EnvFactory) (err error) {
	env, err := f(0)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := env.Close(); cerr != nil && err == nil {
			err = cerr
		}
	}()
	for _, c := range p.Cells {
		if _, err := env.Player(c); err != nil {
			return err
		}
	}
	// The floor policy plays after the episodes; a source that cannot
	// open must be refused before the folder is written, not after.
	if be, ok := env.(BaselineEnv); ok && len(p.Cells) > 0 {
		floor := p.Def.Floor
		if floor == "" {
			floor = analysis.DefaultFloor
		}
		c := p.Cells[0]
		if _, _, err := be.Baseline(floor, c.Variation, c.Patch); err != nil {
			return err
		}
	}
	return nil
}

func worker(ctx context.Context, p *study.Plan, opt Options, w int, jobs <-chan unit, results chan<- finished) {
	var env Env
	var envErr error
	lastCell := -1
	var player Player
	defer func() {
		if env != nil {
			env.Close()
		}
	}()
	for u := range jobs {
		if ctx.Err() != nil {
			continue
		}
		rec := study.Record{Format: 1, Study: p.Fingerprint, Cell: u.cell, Episode: u.ep, Params: p.Cells[u.cell],
			GameSeed: p.GameSeed(u.ep), PipeSeed: p.PipeSeed(u.cell, u.ep)}
		if env == nil {
			env, envErr = opt.Env(w)
			lastCell = -1
		}
		var res vision.Result
		err := envErr
		if err == nil && lastCell != u.cell {
			player, err = safePlayer(env, p.Cells[u.cell])
			if err == nil {
				lastCell = u.cell
			}
		}
		if err == nil {
			var strip *stripRecorder
			if u.ep == 0 {
				strip = newStripRecorder(p.Def.Strips)
				strip.withOverlay(p.Def.Overlay, player)
			}
			res, err = safePlay(player, rec.GameSeed, rec.PipeSeed, strip.hook())
			if err == nil && strip != nil {
				// A strip that cannot be written costs the report a
				// picture, not the study an episode.
				_ = strip.write(filepath.Join(opt.Dir, study.StripsDir, fmt.Sprintf("cell-%04d.png", u.cell)))
			}
		}
		if err != nil {
			rec.Failure = oneLine(err.Error())
			rec.End = "error"
			// Start the next episode from fresh games and policies: a
			// crashed policy process is not reused.
			if env != nil {
				env.Close()
			}
			env, envErr, lastCell = nil, nil, -1
		} else {
			rec.Return, rec.Steps, rec.End = res.Return, res.Steps, res.Reason.String()
		}
		secs := res.Duration.Seconds()
		t := study.Timing{Format: 1, Cell: u.cell, Episode: u.ep, Steps: res.Steps, Seconds: secs}
		if secs > 0 {
			t.StepsPerSecond = float64(res.Steps) / secs
		}
		results <- finished{rec: rec, timing: t}
	}
}

func safePlayer(env Env, c study.Cell) (pl Player, err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("building cell %s: panic: %v", c.Label(), r)
		}
	}()
	return env.Player(c)
}

func safePlay(pl Player, gs, ps uint64, hook vision.StepHook) (res vision.Result, err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("panic: %v", r)
		}
	}()
	return pl.Play(gs, ps, hook)
}

func oneLine(s string) string {
	s = strings.ReplaceAll(s, "\r", " ")
	s = strings.ReplaceAll(s, "\n", " ")
	if len(s) > 500 {
		s = s[:500] + "…"
	}
	return s
}

// stripRecorder keeps the raw and the seen frame at chosen steps.
type stripRecorder struct {
	steps []int
	kept  []int
	raw   []*image.RGBA
	seen  []*image.RGBA
	ov    *stripOverlay // nil: no overlay (overlay.go)
}

func newStripRecorder(steps []int) *stripRecorder {
	return &stripRecorder{steps: steps}
}

func (s *stripRecorder) hook() vision.StepHook {
	if s == nil || len(s.steps) == 0 {
		return nil
	}
	return func(t int, raw *image.RGBA, obs *vision.Observation, rec *patch.FrameRecord, _ []float64) {
		for _, st := range s.steps {
			if st == t {
				if s.ov != nil {
					s.keepOverlaid(t, raw, obs, rec)
					return
				}
				s.kept = append(s.kept, t)
				s.raw = append(s.raw, cloneRGBA(raw))
				if obs.Frame != nil {
					s.seen = append(s.seen, cloneRGBA(obs.Frame))
				} else {
					s.seen = append(s.seen, nil)
				}
				return
			}
		}
	}
}

func cloneRGBA(m *image.RGBA) *image.RGBA {
	c := image.NewRGBA(image.Rect(0, 0, m.Bounds().Dx(), m.Bounds().Dy()))
	draw.Draw(c, c.Bounds(), m, m.Bounds().Min, draw.Src)
	return c
}

// write saves the strip as a PNG: the raw frames on the top row, what the
// policy saw below, one column per kept step, on a dark background.
func (s *stripRecorder) write(path string) error {
	if len(s.raw) == 0 {
		return nil
	}
	const gap = 2
	cw, ch := 0, 0
	for i := range s.raw {
		cw = max(cw, s.raw[i].Bounds().Dx())
		ch = max(ch, s.raw[i].Bounds().Dy())
		if s.seen[i] != nil {
			cw = max(cw, s.seen[i].Bounds().Dx())
			ch = max(ch, s.seen[i].Bounds().Dy())
		}
	}
	n := len(s.raw)
	img := image.NewRGBA(image.Rect(0, 0, n*cw+(n+1)*gap, 2*ch+3*gap))
	draw.Draw(img, img.Bounds(), image.NewUniform(stripBackground), image.Point{}, draw.Src)
	for i := range s.raw {
		x := gap + i*(cw+gap)
		draw.Draw(img, image.Rect(x, gap, x+cw, gap+ch), s.raw[i], image.Point{}, draw.Src)
		if s.seen[i] != nil {
			draw.Draw(img, image.Rect(x, 2*gap+ch, x+cw, 2*gap+2*ch), s.seen[i], image.Point{}, draw.Src)
		}
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	meta, err := jsonLine(analysis.StripMeta{Format: 1, Steps: s.kept, Width: cw, Height: ch, Gap: gap, Overlay: s.overlayName()})
	if err != nil {
		return err
	}
	if err := atomicfile.Write(path, func(w io.Writer) error { return png.Encode(w, img) }); err != nil {
		return err
	}
	return atomicfile.WriteBytes(strings.TrimSuffix(path, ".png")+".json", meta)
}

var stripBackground = color.RGBA{R: 24, G: 26, B: 32, A: 255}

func jsonLine(v any) ([]byte, error) {
	b, err := json.Marshal(v)
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

// Replay plays episode ep of cell c of the study in dir again, alone, and
// returns the fresh record and the recorded one (nil if none is
// recorded). Seeds come from the plan, so the fresh record equals the
// recorded one for a reproducible policy.
func Replay(dir string, c, ep int, f EnvFactory) (fresh study.Record, recorded *study.Record, err error) {
	si, err := study.ReadInfo(dir)
	if err != nil {
		return study.Record{}, nil, err
	}
	p, err := si.Plan()
	if err != nil {
		return study.Record{}, nil, err
	}
	if c < 0 || c >= len(p.Cells) {
		return study.Record{}, nil, fmt.Errorf("cell %d: the study has cells 0..%d", c, len(p.Cells)-1)
	}
	if ep < 0 || ep >= p.Def.Episodes {
		return study.Record{}, nil, fmt.Errorf("episode %d: the study has episodes 0..%d", ep, p.Def.Episodes-1)
	}
	recs, _, err := study.ReadResults(dir)
	if err != nil {
		return study.Record{}, nil, err
	}
	for _, r := range study.Latest(recs) {
		if r.Cell == c && r.Episode == ep {
			r := r
			recorded = &r
		}
	}
	env, err := f(0)
	if err != nil {
		return study.Record{}, recorded, err
	}
	defer env.Close()
	pl, err := env.Player(p.Cells[c])
	if err != nil {
		return study.Record{}, recorded, err
	}
	fresh = study.Record{Format: 1, Study: p.Fingerprint, Cell: c, Episode: ep, Params: p.Cells[c],
		GameSeed: p.GameSeed(ep), PipeSeed: p.PipeSeed(c, ep)}
	res, err := safePlay(pl, fresh.GameSeed, fresh.PipeSeed, nil)
	if err != nil {
		fresh.Failure, fresh.End = oneLine(err.Error()), "error"
		return fresh, recorded, nil
	}
	fresh.Return, fresh.Steps, fresh.End = res.Return, res.Steps, res.Reason.String()
	return fresh, recorded, nil
}
