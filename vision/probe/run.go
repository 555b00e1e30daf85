package probe

import (
	"context"
	"errors"
	"fmt"
	"image"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"time"

	"github.com/disintegration/imaging"

	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
	"tilebench/vision/study"
)

// Options control Run. The zero value runs the whole probe on every core
// into Dir.
type Options struct {
	// Dir is the probe folder: it must not exist, be empty, or (with
	// Resume) hold the same probe.
	Dir string
	// Workers is the number of parallel workers; 0 means one per core.
	// Results never depend on it.
	Workers int
	// Resume continues the probe in Dir: finished units are kept, failed
	// ones retried.
	Resume bool
	// Shard restricts the run to the units u = cell·sequences + sequence
	// with u mod Count = Index (study.Shard).
	Shard study.Shard
	// Policy makes the workers' policies; default Policies(plan, Dir/logs).
	Policy PolicyFunc
	// Progress, if set, is called after every finished unit with the
	// units done and the total of this shard, from one goroutine.
	Progress func(done, total int)
	// Command is the command line recorded in probe.json.
	Command string
	// NoReport skips the report at the end.
	NoReport bool
}

// Outcome summarises a run.
type Outcome struct {
	// Total units in this shard; Kept found finished; Ran run now;
	// Failed still failed at the end.
	Total, Kept, Ran, Failed int
	// Frames is the number of frames run now (each twice: clean and
	// transformed).
	Frames int
	// FirstFailure is the reason of the first failed unit, if any.
	FirstFailure string
	Elapsed      time.Duration
}

// ErrInterrupted is returned (wrapped) when the context ends a run early.
var ErrInterrupted = errors.New("probe interrupted")

// topFrames is how many of its most-moved frames a record keeps.
const topFrames = 3

type unit struct{ cell, seq int }

// Run probes the plan's units of opt.Shard not yet finished in opt.Dir,
// appending one synced line per unit to results.jsonl, so a kill loses at
// most the units in flight; at the end it rewrites results.jsonl in
// canonical order (cell, then sequence) and writes the report.
func Run(ctx context.Context, p *Plan, opt Options) (*Outcome, error) {
	start := time.Now()
	if opt.Dir == "" {
		return nil, errors.New("probe: no output folder given")
	}
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	if err := prepareDir(p, opt); err != nil {
		return nil, err
	}
	// An external policy's log folder is made inside Dir when it starts;
	// if the probe cannot start, a Dir made only for it goes again.
	_, statErr := os.Stat(opt.Dir)
	made := errors.Is(statErr, os.ErrNotExist)
	started := false
	defer func() {
		if made && !started {
			os.RemoveAll(opt.Dir)
		}
	}()
	if opt.Policy == nil {
		opt.Policy = Policies(p, filepath.Join(opt.Dir, logsDir))
	}
	src, err := openSource(p)
	if err != nil {
		return nil, err
	}
	defer src.Close()
	if in := src.Info(); in.Width != p.Input.Width || in.Height != p.Input.Height || in.Frames != p.Input.Frames {
		return nil, fmt.Errorf("%s: now %dx%d with %d frames, the probe was planned on %dx%d with %d", in.Name, in.Width, in.Height, in.Frames, p.Input.Width, p.Input.Height, p.Input.Frames)
	}
	// The policies preflight opened serve the first worker that needs
	// them (an external policy may take seconds to start).
	sp, err := preflight(p, opt.Policy)
	if err != nil {
		return nil, err
	}
	defer sp.close()
	if err := os.MkdirAll(opt.Dir, 0o755); err != nil {
		return nil, fmt.Errorf("probe folder: %w", err)
	}
	started = true
	if _, err := os.Stat(filepath.Join(opt.Dir, ProbeFile)); errors.Is(err, os.ErrNotExist) {
		in := &Info{Format: 1, Plan: *p, Command: opt.Command}
		if !opt.Shard.Whole() {
			sh := opt.Shard
			in.Shard = &sh
		}
		if err := writeInfo(opt.Dir, in); err != nil {
			return nil, err
		}
	}
	old, validEnd, err := ReadResults(opt.Dir)
	if err != nil {
		return nil, err
	}
	for _, r := range old {
		if r.Probe != p.Fingerprint || r.Cell < 0 || r.Cell >= len(p.Cells) || r.Sequence < 0 || r.Sequence >= len(p.Sequences) {
			return nil, fmt.Errorf("%s: record for cell %d sequence %d does not belong to probe %s", filepath.Join(opt.Dir, resultsFile), r.Cell, r.Sequence, p.Fingerprint)
		}
	}
	done := map[unit]bool{}
	for k, r := range latest(old) {
		if !r.Failed() {
			done[unit{k[0], k[1]}] = true
		}
	}
	var todo []unit
	total := 0
	ns := len(p.Sequences)
	for c := range p.Cells {
		for s := 0; s < ns; s++ {
			if !opt.Shard.Owns(c*ns + s) {
				continue
			}
			total++
			if !done[unit{c, s}] {
				todo = append(todo, unit{c, s})
			}
		}
	}
	out := &Outcome{Total: total, Kept: total - len(todo)}
	rpath := filepath.Join(opt.Dir, resultsFile)
	rf, err := os.OpenFile(rpath, os.O_WRONLY|os.O_CREATE, 0o644)
	if err != nil {
		return nil, fmt.Errorf("open results: %w", err)
	}
	defer rf.Close()
	if err := rf.Truncate(validEnd); err != nil {
		return nil, fmt.Errorf("results: %w", err)
	}
	if _, err := rf.Seek(validEnd, io.SeekStart); err != nil {
		return nil, fmt.Errorf("results: %w", err)
	}
	if opt.Progress != nil {
		opt.Progress(out.Kept, total)
	}
	runCtx, cancel := context.WithCancel(ctx)
	defer cancel()
	jobs := make(chan unit)
	results := make(chan Record, workers)
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := &worker{p: p, src: src, policy: sp.take(opt.Policy), runners: map[int]*runner{}}
			defer w.close()
			for u := range jobs {
				if runCtx.Err() != nil {
					continue
				}
				results <- w.run(u)
			}
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
	n := out.Kept
	for r := range results {
		if writeErr != nil {
			continue
		}
		b, err := encodeRecord(&r)
		if err == nil {
			_, err = rf.Write(b)
		}
		if err == nil {
			err = rf.Sync()
		}
		if err != nil {
			writeErr = fmt.Errorf("write results: %w", err)
			cancel()
			continue
		}
		out.Ran++
		out.Frames += r.Frames
		n++
		if opt.Progress != nil {
			opt.Progress(n, total)
		}
	}
	out.Elapsed = time.Since(start)
	if writeErr != nil {
		return out, writeErr
	}
	all, _, err := ReadResults(opt.Dir)
	if err != nil {
		return out, err
	}
	recs := sorted(latest(all))
	for _, r := range recs {
		if r.Failed() {
			out.Failed++
			if out.FirstFailure == "" {
				out.FirstFailure = fmt.Sprintf("cell %d sequence %d: %s", r.Cell, r.Sequence, r.Failure)
			}
		}
	}
	if ctx.Err() != nil && out.Kept+out.Ran < total {
		return out, fmt.Errorf("%w: %d of %d units recorded in %s; continue with --resume", ErrInterrupted, out.Kept+out.Ran, total, opt.Dir)
	}
	rf.Close()
	if err := writeResults(opt.Dir, recs); err != nil {
		return out, err
	}
	if !opt.NoReport {
		if err := writeProbeReport(opt.Dir, src); err != nil {
			return out, err
		}
	}
	return out, nil
}

// openSource opens the plan's recording for reading in any order.
func openSource(p *Plan) (frameio.Random, error) {
	return frameio.OpenRandom(p.Config.In, frameio.Options{Width: p.Config.RawWidth, Height: p.Config.RawHeight})
}

// prepareDir refuses a folder that holds something else than this probe.
func prepareDir(p *Plan, opt Options) error {
	entries, err := os.ReadDir(opt.Dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("probe folder: %w", err)
	}
	others := 0
	for _, e := range entries {
		if e.Name() != logsDir { // external policies' stderr, kept from a start that failed
			others++
		}
	}
	if others == 0 {
		return nil
	}
	in, err := ReadInfo(opt.Dir)
	if err != nil {
		return fmt.Errorf("%s is not empty and holds no probe; choose another --out", opt.Dir)
	}
	if !opt.Resume {
		return fmt.Errorf("%s already holds probe %s; continue it with --resume or choose another --out", opt.Dir, in.Plan.Fingerprint)
	}
	if in.Plan.Fingerprint != p.Fingerprint {
		return fmt.Errorf("%s holds a different probe (%s) than the one given (%s); nothing changed", opt.Dir, in.Plan.Fingerprint, p.Fingerprint)
	}
	var stored study.Shard
	if in.Shard != nil {
		stored = *in.Shard
	}
	if stored.String() != opt.Shard.String() {
		return fmt.Errorf("%s holds shard %s of the probe, not shard %s", opt.Dir, stored, opt.Shard)
	}
	return nil
}

// spares holds policies opened by preflight until a worker takes them.
type spares struct {
	mu  sync.Mutex
	pol map[int]vision.Policy
}

// take wraps pf so that a spare policy of the patch size is used first.
func (s *spares) take(pf PolicyFunc) PolicyFunc {
	return func(ps int, grid *patch.Grid) (vision.Policy, error) {
		s.mu.Lock()
		pol, ok := s.pol[ps]
		delete(s.pol, ps)
		s.mu.Unlock()
		if ok {
			return pol, nil
		}
		return pf(ps, grid)
	}
}

// close closes the spares no worker took.
func (s *spares) close() {
	s.mu.Lock()
	defer s.mu.Unlock()
	for ps, pol := range s.pol {
		if cl, ok := pol.(interface{ Close() error }); ok {
			cl.Close()
		}
		delete(s.pol, ps)
	}
}

// preflight builds every cell's pipeline and one policy per patch size
// before anything is written.
func preflight(p *Plan, pf PolicyFunc) (*spares, error) {
	sp := &spares{pol: map[int]vision.Policy{}}
	for _, c := range p.Cells {
		grid, err := p.grid(c.Patch)
		if err != nil {
			sp.close()
			return nil, err
		}
		if _, err := patch.NewPipeline(grid, c.Spec()); err != nil {
			sp.close()
			return nil, fmt.Errorf("cell %s: %w", c.Label(), err)
		}
		if _, ok := sp.pol[c.Patch]; ok {
			continue
		}
		pol, err := pf(c.Patch, grid)
		if err != nil {
			sp.close()
			return nil, fmt.Errorf("policy for patch %d: %w", c.Patch, err)
		}
		sp.pol[c.Patch] = pol
	}
	return sp, nil
}

func (p *Plan) grid(ps int) (*patch.Grid, error) {
	g, err := patch.NewGrid(patch.GridConfig{Width: p.Width, Height: p.Height, PatchW: ps})
	if err != nil {
		return nil, fmt.Errorf("patch %d on %dx%d frames: %w", ps, p.Width, p.Height, err)
	}
	return g, nil
}

// worker runs units with its own policies, one runner per patch size.
type worker struct {
	p       *Plan
	src     frameio.Random
	policy  PolicyFunc
	runners map[int]*runner
}

func (w *worker) close() {
	for _, r := range w.runners {
		r.close()
	}
	w.runners = map[int]*runner{}
}

func (w *worker) run(u unit) Record {
	p := w.p
	c := p.Cells[u.cell]
	sq := p.Sequences[u.seq]
	rec := Record{Format: 1, Probe: p.Fingerprint, Cell: u.cell, Sequence: u.seq, Start: sq.Start, Frames: sq.Len,
		Params: c, PolicySeed: p.PolicySeed(u.seq), PipeSeed: p.PipeSeed(u.cell, u.seq)}
	err := func() (err error) {
		defer func() {
			if r := recover(); r != nil {
				err = fmt.Errorf("panic: %v", r)
			}
		}()
		r, ok := w.runners[c.Patch]
		if !ok {
			if r, err = newRunner(p, w.src, c.Patch, w.policy); err != nil {
				return err
			}
			w.runners[c.Patch] = r
		}
		pipe, err := patch.NewPipeline(r.grid, c.Spec())
		if err != nil {
			return err
		}
		return r.unit(&rec, pipe)
	}()
	if err != nil {
		rec = Record{Format: 1, Probe: rec.Probe, Cell: rec.Cell, Sequence: rec.Sequence, Start: rec.Start, Frames: rec.Frames,
			Params: rec.Params, PolicySeed: rec.PolicySeed, PipeSeed: rec.PipeSeed, Failure: oneLine(err.Error())}
		// A crashed external policy is not reused.
		w.close()
	}
	return rec
}

func oneLine(s string) string {
	s = strings.NewReplacer("\r", " ", "\n", " ").Replace(s)
	if len(s) > 500 {
		s = s[:500] + "…"
	}
	return s
}

// slot holds one observation's buffers.
type slot struct {
	frame  *image.RGBA
	clean  *patch.TokenSet
	tokens *patch.TokenSet
	seen   *image.RGBA
	obs    vision.Observation
	action []float64
}

// runner runs the clean and transformed passes of one patch size.
type runner struct {
	p     *Plan
	src   frameio.Random
	grid  *patch.Grid
	tok   *patch.Tokenizer
	pol   vision.Policy
	batch batcher
	wants bool
	// exact: the grid covers the frame exactly, so the clean tokens
	// reassemble into the frame itself (no assembly needed); frameOnly:
	// the policy reads only the frame (no tokenizing either).
	exact, frameOnly bool
	// packer and packed, when both set: clean frames go from the
	// recording's stored bytes straight into the policy's message.
	packer packer
	packed frameio.Packed
	raw    *image.RGBA
	slots  []slot
	obs    []*vision.Observation
	acts   [][]float64
	zeros  []float64
	clean  []float64 // the clean pass's actions, frames×dim
	closer func() error
}

func newRunner(p *Plan, src frameio.Random, ps int, pf PolicyFunc) (*runner, error) {
	grid, err := p.grid(ps)
	if err != nil {
		return nil, err
	}
	pol, err := pf(ps, grid)
	if err != nil {
		return nil, fmt.Errorf("policy for patch %d: %w", ps, err)
	}
	r := &runner{p: p, src: src, grid: grid, tok: patch.NewTokenizer(grid), pol: pol, wants: pol.Info().WantsFrame}
	if cl, ok := pol.(interface{ Close() error }); ok {
		r.closer = cl.Close
	}
	r.exact = grid.OutW == p.Width && grid.OutH == p.Height && grid.Width == p.Width && grid.Height == p.Height &&
		grid.StrideX == grid.PatchW && grid.StrideY == grid.PatchH
	if fo, ok := pol.(frameOnly); ok && r.exact && r.wants {
		r.frameOnly = fo.FrameOnly()
	}
	B := 1
	if b, ok := pol.(batcher); ok && !p.Config.NoBatch && b.BatchSize() > 1 {
		r.batch, B = b, b.BatchSize()
	}
	if pk, ok := pol.(packer); ok && r.frameOnly && p.Width == p.Input.Width && p.Height == p.Input.Height {
		shape, ok := pk.PackedFrame()
		if ps, isPacked := src.(frameio.Packed); ok && isPacked && shape == [3]int{p.Height, p.Width, ps.Info().Channels} {
			r.packer, r.packed = pk, ps
		}
	}
	dim := p.Space.Dim
	in := p.Input
	r.raw = image.NewRGBA(image.Rect(0, 0, in.Width, in.Height))
	maxTok := grid.N()
	for _, c := range p.Cells {
		if c.Patch == ps {
			pipe, err := patch.NewPipeline(grid, c.Spec())
			if err == nil {
				maxTok = max(maxTok, pipe.Capacity())
			}
		}
	}
	r.zeros = make([]float64, dim)
	r.slots = make([]slot, B)
	r.obs = make([]*vision.Observation, B)
	r.acts = make([][]float64, B)
	for i := range r.slots {
		s := &r.slots[i]
		s.frame = r.raw
		if p.Width != in.Width || p.Height != in.Height {
			s.frame = image.NewRGBA(image.Rect(0, 0, p.Width, p.Height))
		}
		if B > 1 {
			// Batched slots each keep their own frame until the call.
			s.frame = image.NewRGBA(image.Rect(0, 0, p.Width, p.Height))
		}
		s.clean = patch.NewTokenSet(grid.N(), grid.D())
		s.tokens = patch.NewTokenSet(maxTok, grid.D())
		s.seen = image.NewRGBA(image.Rect(0, 0, grid.OutW, grid.OutH))
		s.action = make([]float64, dim)
		s.obs = vision.Observation{Grid: grid}
		r.obs[i] = &s.obs
		r.acts[i] = s.action
	}
	return r, nil
}

func (r *runner) close() {
	if r.closer != nil {
		r.closer()
		r.closer = nil
	}
}

// load reads frame t of the sequence into slot s and builds its
// observation (transformed by pipe, or clean when pipe is nil).
func (r *runner) load(s *slot, start, t int, pipe *patch.Pipeline) error {
	p := r.p
	i := start + t
	if p.Width != p.Input.Width || p.Height != p.Input.Height {
		if err := r.src.ReadFrameAt(i, r.raw); err != nil {
			return err
		}
		// Triangle (bilinear) filter, imaging.Linear; it allocates the
		// result (a library should offer a destination; this one does not).
		rs := imaging.Resize(r.raw, p.Width, p.Height, imaging.Linear)
		copy(s.frame.Pix, rs.Pix) // opaque: NRGBA and RGBA bytes agree
	} else if err := r.src.ReadFrameAt(i, s.frame); err != nil {
		return err
	}
	s.obs.Step = t
	s.obs.Frame = nil
	s.obs.Tokens = s.clean
	if pipe == nil && r.frameOnly {
		// The clean frame is what a frame-only policy sees: no tokens.
		s.obs.Frame = s.frame
	} else {
		if pipe != nil {
			// Frame corruptions (if the cell has any) come first.
			if err := pipe.TokenizeFrame(t, r.tok, s.frame, s.clean); err != nil {
				return fmt.Errorf("frame %d: %w", i, err)
			}
		} else if err := r.tok.Tokenize(s.frame, s.clean); err != nil {
			return fmt.Errorf("frame %d: %w", i, err)
		}
		if pipe != nil {
			if err := pipe.Apply(t, s.clean, s.tokens, nil); err != nil {
				return fmt.Errorf("frame %d: %w", i, err)
			}
			s.obs.Tokens = s.tokens
		}
		if r.wants {
			if pipe == nil && r.exact {
				s.obs.Frame = s.frame // clean tokens reassemble into the frame
			} else {
				if err := r.tok.Assemble(s.obs.Tokens, s.seen); err != nil {
					return fmt.Errorf("frame %d: %w", i, err)
				}
				s.obs.Frame = s.seen
			}
		}
	}
	s.obs.PrevAction = r.prev(start, i)
	return nil
}

// pass runs the policy over the sequence from a fresh state, calling
// each(t, action) in frame order.
func (r *runner) pass(sq Sequence, seed uint64, pipe *patch.Pipeline, pipeSeed uint64, each func(t int, a []float64)) error {
	r.pol.Reset(seed)
	if pipe != nil {
		pipe.Reset(pipeSeed)
	}
	B := len(r.slots)
	for t0 := 0; t0 < sq.Len; t0 += B {
		k := min(B, sq.Len-t0)
		if pipe == nil && r.packer != nil {
			if err := r.actPacked(sq.Start, t0, k); err != nil {
				return err
			}
		} else if err := r.act(sq.Start, t0, k, pipe); err != nil {
			return err
		}
		for j := 0; j < k; j++ {
			a := r.acts[j]
			for _, v := range a {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("frame %d: policy: action holds %v", sq.Start+t0+j, v)
				}
			}
			each(t0+j, a)
		}
	}
	return nil
}

// act loads frames t0..t0+k-1 of the sequence from start and asks the
// policy for their actions (in r.acts).
func (r *runner) act(start, t0, k int, pipe *patch.Pipeline) error {
	for j := 0; j < k; j++ {
		if err := r.load(&r.slots[j], start, t0+j, pipe); err != nil {
			return err
		}
	}
	if r.batch != nil {
		if err := r.batch.ActBatch(r.obs[:k], r.acts[:k]); err != nil {
			return fmt.Errorf("frames %d..%d: policy: %w", start+t0, start+t0+k-1, err)
		}
	} else if err := r.pol.Act(r.obs[0], r.acts[0]); err != nil {
		return fmt.Errorf("frame %d: policy: %w", start+t0, err)
	}
	return nil
}

// actPacked is act for a clean pass of a packer: the k frames' stored
// bytes are read with one read into the policy's message and sent as
// they are.
func (r *runner) actPacked(start, t0, k int) error {
	for j := 0; j < k; j++ {
		s := &r.slots[j]
		s.obs.Step, s.obs.Frame, s.obs.Tokens = t0+j, nil, nil
		s.obs.PrevAction = r.prev(start, start+t0+j)
	}
	if fb, ok := r.packer.(fileBatcher); ok && r.batch != nil {
		// A batch's frames are moved from the file, not read.
		f, off, err := r.packed.Stored(start+t0, k)
		if err != nil {
			return err
		}
		if err := fb.ActBatchFile(r.obs[:k], f, off, r.acts[:k]); err != nil {
			return fmt.Errorf("frames %d..%d: policy: %w", start+t0, start+t0+k-1, err)
		}
		return nil
	}
	buf := r.packer.FrameBuffer(k)
	if buf == nil {
		return fmt.Errorf("frames %d..%d: policy: no room for %d packed frames", start+t0, start+t0+k-1, k)
	}
	if err := r.packed.BytesAt(start+t0, buf); err != nil {
		return err
	}
	if r.batch != nil {
		if err := r.packer.ActBatchPacked(r.obs[:k], buf, r.acts[:k]); err != nil {
			return fmt.Errorf("frames %d..%d: policy: %w", start+t0, start+t0+k-1, err)
		}
	} else if err := r.packer.ActPacked(r.obs[0], buf, r.acts[0]); err != nil {
		return fmt.Errorf("frame %d: policy: %w", start+t0, err)
	}
	return nil
}

// prev is the previous action shown with frame i of a sequence that
// starts at start (zeros, or the recorded action of frame i-1).
func (r *runner) prev(start, i int) []float64 {
	if a := r.p.actions; a != nil && i > start {
		return a.Row(i - 1)
	}
	return r.zeros
}

// unit fills rec with the drift of one cell on one sequence.
func (r *runner) unit(rec *Record, pipe *patch.Pipeline) error {
	p := r.p
	sq := p.Sequences[rec.Sequence]
	dim := p.Space.Dim
	disc := p.Space.Discrete()
	if cap(r.clean) < sq.Len*dim {
		r.clean = make([]float64, sq.Len*dim)
	}
	clean := r.clean[:sq.Len*dim]
	acts := p.actions
	if acts != nil {
		rec.CleanError = make([]float32, sq.Len)
		rec.Error = make([]float32, sq.Len)
	}
	if err := r.pass(sq, rec.PolicySeed, nil, 0, func(t int, a []float64) {
		copy(clean[t*dim:], a)
		if acts != nil {
			rec.CleanError[t] = float32(distance(a, acts.Row(sq.Start+t), disc))
		}
	}); err != nil {
		return err
	}
	rec.Drift = make([]float32, sq.Len)
	if !disc {
		rec.Channel = make([]float64, dim)
	}
	var top []Moved
	if rec.Params.Clean() {
		// The identity transform: the second pass sees the clean input
		// again and measures how reproducible the policy is.
		pipe = nil
	}
	if err := r.pass(sq, rec.PolicySeed, pipe, rec.PipeSeed, func(t int, a []float64) {
		c := clean[t*dim : (t+1)*dim]
		d := distance(a, c, disc)
		rec.Drift[t] = float32(d)
		for i := range rec.Channel {
			rec.Channel[i] += math.Abs(a[i] - c[i])
		}
		if acts != nil {
			rec.Error[t] = float32(distance(a, acts.Row(sq.Start+t), disc))
		}
		top = keepTop(top, t, d, c, a)
	}); err != nil {
		return err
	}
	for i := range rec.Channel {
		rec.Channel[i] /= float64(sq.Len)
	}
	rec.Top = top
	return nil
}

// distance is the L2 norm of a−b, or for discrete actions 1 when the
// choices differ.
func distance(a, b []float64, discrete bool) float64 {
	if discrete {
		if a[0] != b[0] {
			return 1
		}
		return 0
	}
	s := 0.0
	for i := range a {
		d := a[i] - b[i]
		s += d * d
	}
	return math.Sqrt(s)
}

// keepTop keeps the topFrames frames of largest drift (earlier frames
// first among equals); frames with no drift are not kept.
func keepTop(top []Moved, t int, d float64, clean, moved []float64) []Moved {
	if d <= 0 {
		return top
	}
	if len(top) == topFrames && d <= top[len(top)-1].Drift {
		return top
	}
	m := Moved{Frame: t, Drift: d, Clean: append([]float64(nil), clean...), Moved: append([]float64(nil), moved...)}
	i := len(top)
	for i > 0 && top[i-1].Drift < d {
		i--
	}
	top = append(top, Moved{})
	copy(top[i+1:], top[i:])
	top[i] = m
	if len(top) > topFrames {
		top = top[:topFrames]
	}
	return top
}
