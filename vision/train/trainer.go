package train

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"runtime"
	"strconv"
	"sync"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
	"tilebench/vision/weights"
)

// Methods.
const (
	Clone = "clone"
	CMAES = "cmaes"
	ESm   = "es"
)

// CloneConfig configures behaviour cloning with DAgger. The zero value is
// usable; each default is documented on its field.
type CloneConfig struct {
	// EpisodesPerRound is the number of episodes collected per DAgger
	// round. 0 means 4.
	EpisodesPerRound int
	// Epochs is the number of passes over the aggregated data after each
	// round. 0 means 2.
	Epochs int
	// Batch is the minibatch size. 0 means 64.
	Batch int
	// LR is Adam's learning rate. 0 means 3e-3.
	LR float64
	// BetaDecay is p in the mixing schedule β_i = p^i of Ross et al.
	// (2011, §4): round 0 follows the expert alone (β = 1), round i takes
	// the expert's action with probability p^i at each step, the
	// student's otherwise. 0 means 0.5.
	BetaDecay float64
	// Keep records every Keep-th visited frame (1 = every frame). 0
	// means 2 (consecutive frames are nearly identical; halves memory).
	// A net with temporal context (Context k > 1) always records every
	// frame, and each sample is fed after the k−1 frames before it.
	Keep int
}

func (c CloneConfig) withDefaults() CloneConfig {
	def := func(v *int, d int) {
		if *v == 0 {
			*v = d
		}
	}
	def(&c.EpisodesPerRound, 4)
	def(&c.Epochs, 2)
	def(&c.Batch, 64)
	def(&c.Keep, 2)
	if c.LR == 0 {
		c.LR = 3e-3
	}
	if c.BetaDecay == 0 {
		c.BetaDecay = 0.5
	}
	return c
}

// Config is everything a training run needs. The zero value (plus Game)
// trains the default attention policy at patch 8 by behaviour cloning.
type Config struct {
	// Game is the game name ("drive", "paddle"); Variation its variation.
	Game      string
	Variation string
	// Patch is the square patch size in pixels. 0 means 8.
	Patch int
	// Net is the family and its hyper-parameters (nets.Config defaults).
	Net nets.Config
	// Augment is the train-time pipeline (occlusion, scrambling, noise
	// tokens); the zero Spec trains on clean tokens.
	Augment patch.Spec
	// Method is "clone" (default), "cmaes" or "es".
	Method string
	// Seed seeds initial weights and every stream of the run.
	Seed uint64
	// Iters stops after this many iterations (DAgger rounds or
	// generations). 0 means no limit (Budget decides). Use Iters for
	// runs that must be reproducible: a time budget ends wherever the
	// machine's speed puts it.
	Iters int
	// Budget stops at the first iteration boundary after this much
	// training time (summed across resumed runs). 0 means 5 minutes.
	Budget time.Duration
	// Patience stops when the validation score has not improved for this
	// many validations (early stopping). 0 means 8 for clone (its
	// validation score, over a few episodes, is noisy from round to round;
	// the best weights are kept anyway) and 4 for cmaes and es; negative
	// disables it.
	Patience int
	// MinIters is the number of iterations before early stopping may
	// stop a run: behaviour cloning often plateaus for its first DAgger
	// rounds (on paddle, at the never-catching level for up to about 8)
	// before the student starts to learn. 0 means 12 for clone and none
	// for cmaes and es; negative means none.
	MinIters int
	// Workers is the number of goroutines. 0 means runtime.GOMAXPROCS(0);
	// at most vision.MaxWorkers() unless ForceWorkers is set.
	Workers int
	// ForceWorkers accepts a Workers count above vision.MaxWorkers().
	ForceWorkers bool `json:"-"`
	// ValEvery validates every ValEvery iterations. 0 means 1 for clone,
	// 5 for cmaes and es.
	ValEvery int
	// ValEpisodes is the number of validation episodes (seeds
	// games.Train(ValidationStart+i)). 0 means 8.
	ValEpisodes int
	// FitnessEpisodes is k, the episodes averaged by the ES/CMA-ES
	// fitness. 0 means 2.
	FitnessEpisodes int
	// HeldOutEpisodes is the number of held-out episodes scored at the
	// end (games.HeldOut(i)). 0 means 50.
	HeldOutEpisodes int
	// Init, if not nil, holds starting weights (e.g. behaviour-cloned)
	// of the same family, geometry and action space.
	Init nets.Net `json:"-"`
	// Clone, ES and CMA configure the methods.
	Clone CloneConfig
	ES    ESConfig
	CMA   CMAConfig
}

func (c Config) withDefaults() Config {
	def := func(v *int, d int) {
		if *v == 0 {
			*v = d
		}
	}
	def(&c.Patch, 8)
	if c.Method == "" {
		c.Method = Clone
	}
	if c.Budget == 0 {
		c.Budget = 5 * time.Minute
	}
	if c.Method == Clone {
		def(&c.Patience, 8)
		def(&c.MinIters, 12)
	}
	def(&c.Patience, 4)
	def(&c.Workers, runtime.GOMAXPROCS(0))
	if c.Method == Clone {
		def(&c.ValEvery, 1)
	} else {
		def(&c.ValEvery, 5)
	}
	def(&c.ValEpisodes, 8)
	def(&c.FitnessEpisodes, 2)
	def(&c.HeldOutEpisodes, 50)
	c.Net = c.Net.Resolved()
	c.Clone = c.Clone.withDefaults()
	c.ES.Workers = c.Workers
	c.ES.Seed = patch.DeriveSeed(c.Seed, patch.StreamKey("es"))
	c.CMA.Workers = c.Workers
	c.CMA.Seed = patch.DeriveSeed(c.Seed, patch.StreamKey("cmaes"))
	c.CMA.MaxEvals = 0
	return c
}

// earlyStop reports whether st, after a validation, ends the run by
// early stopping: Patience validations without improvement, and at least
// MinIters iterations done.
func (c Config) earlyStop(st state) bool {
	return c.Patience > 0 && st.Stale >= c.Patience && st.Iter >= c.MinIters
}

// setup is the resolved, fixed part of a run.
type setup struct {
	game     string
	opts     games.Setup
	grid     *patch.Grid
	space    games.Controls
	augment  patch.Spec
	evalSpec patch.Spec
}

// Progress is reported after every iteration.
type Progress struct {
	Method string `json:"method"`
	// Iter is the iteration (DAgger round or generation) just finished.
	Iter int `json:"iter"`
	// Best and Mean: for ES/CMA-ES the best and mean fitness of the
	// generation; for clone the mean return of this round's episodes
	// (Mean) and the best validation score so far (Best).
	Best float64 `json:"best"`
	Mean float64 `json:"mean"`
	// Val is the validation score measured at this iteration (NaN when
	// none was measured); BestVal the best so far.
	Val     float64 `json:"val"`
	BestVal float64 `json:"best_val"`
	// Loss is the last epoch's mean training loss (clone only).
	Loss float64 `json:"loss"`
	// Samples is the size of the aggregated data set (clone only).
	Samples int `json:"samples"`
	// Evals counts fitness evaluations (ES/CMA-ES).
	Evals int `json:"evals"`
	// Elapsed and Left are training time used and left in the budget.
	Elapsed time.Duration `json:"-"`
	Left    time.Duration `json:"-"`
}

// Result is the outcome of Run.
type Result struct {
	// Iters is the number of iterations done; Stopped says why it ended
	// ("iterations", "budget", "early-stop", "converged").
	Iters   int
	Stopped string
	// BestVal is the best validation score; the returned net holds the
	// weights that reached it.
	BestVal float64
	Elapsed time.Duration
}

// state is the part of a run that a checkpoint saves (besides tensors).
type state struct {
	Iter     int       `json:"iter"`
	Elapsed  float64   `json:"elapsed_s"`
	BestVal  float64   `json:"best_val"`
	Stale    int       `json:"stale"`
	Evals    int       `json:"evals"`
	BestEver float64   `json:"best_ever"`
	Episodes []episode `json:"episodes,omitempty"`
	History  []histRec `json:"history,omitempty"`
}

type episode struct {
	Seed  uint64 `json:"seed"`
	Steps int    `json:"steps"`
}

type histRec struct {
	Key string  `json:"k"`
	F   float64 `json:"f"`
}

// Trainer runs one training job. Build it with New or Resume.
type Trainer struct {
	cfg   Config
	s     *setup
	net   nets.Net // current parameters
	best  []float32
	x0    []float32 // CMA-ES start (replay needs it)
	envs  []*env
	opt   Adam
	es    *ES
	st    state
	acts  []float32 // clone: every recorded action, episode after episode
	ds    *dataset
	snap  *weights.File
	start time.Time
}

// New checks cfg and builds a trainer.
func New(cfg Config) (*Trainer, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	cfg = cfg.withDefaults()
	switch cfg.Method {
	case Clone, CMAES, ESm:
	default:
		return nil, fmt.Errorf("training method %q: want clone, cmaes or es", cfg.Method)
	}
	if cfg.Workers < 1 || cfg.ValEpisodes < 1 || cfg.FitnessEpisodes < 1 || cfg.HeldOutEpisodes < 0 || cfg.Iters < 0 || cfg.Budget < 0 {
		return nil, errors.New("train: workers, episodes, iterations and budget must be positive")
	}
	cc := cfg.Clone
	if cc.EpisodesPerRound < 1 || cc.Epochs < 1 || cc.Batch < 1 || cc.Keep < 1 || !(cc.BetaDecay > 0 && cc.BetaDecay < 1) {
		return nil, fmt.Errorf("clone settings %+v: episodes, epochs, batch and keep must be ≥ 1 and beta decay in (0,1)", cc)
	}
	if cfg.Net.Context > 1 && cfg.Method == Clone {
		// Each sample is fed with the k−1 frames before it, so every
		// frame is recorded.
		cfg.Clone.Keep = 1
	}
	g, err := games.Build(cfg.Game, games.Setup{Variation: cfg.Variation})
	if err != nil {
		return nil, err
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: cfg.Patch})
	if err != nil {
		return nil, err
	}
	s := &setup{game: cfg.Game, opts: games.Setup{Variation: cfg.Variation}, grid: grid, space: sp.Action, augment: cfg.Augment}
	var net nets.Net
	if cfg.Init != nil {
		net = cfg.Init.Clone()
		if net.Grid().N() != grid.N() || net.Grid().D() != grid.D() || net.Config().Family != cfg.Net.Family ||
			net.Space().Kind != sp.Action.Kind || net.Space().Dim() != sp.Action.Dim() || net.Space().Choices() != sp.Action.Choices() {
			return nil, fmt.Errorf("starting weights (%s, %s) do not fit game %s at patch %d with family %s",
				net.Config().Family, net.Grid(), cfg.Game, cfg.Patch, cfg.Net.Family)
		}
		cfg.Net = net.Config()
		cfg.Init = nil
	} else if net, err = nets.New(cfg.Net, grid, sp.Action, patch.DeriveSeed(cfg.Seed, patch.StreamKey("init"))); err != nil {
		return nil, err
	}
	t := &Trainer{cfg: cfg, s: s, net: net, st: state{BestVal: math.Inf(-1), BestEver: math.Inf(-1)}}
	t.best = append([]float32(nil), net.Params()...)
	t.x0 = append([]float32(nil), net.Params()...)
	if err := t.init(); err != nil {
		return nil, err
	}
	return t, nil
}

// init builds the per-worker environments and the method's optimiser.
func (t *Trainer) init() error {
	t.envs = make([]*env, t.cfg.Workers)
	for w := range t.envs {
		e, err := newEnv(t.s, t.net.Clone())
		if err != nil {
			return err
		}
		t.envs[w] = e
	}
	t.opt = Adam{LR: t.cfg.Clone.LR}
	if t.cfg.Method == ESm {
		es, err := NewES(t.cfg.ES, t.net.Params())
		if err != nil {
			return err
		}
		t.es = es
	}
	if t.cfg.Method == CMAES && len(t.net.Params()) > t.cfg.CMA.withDefaults().MaxParams {
		return fmt.Errorf("cma-es: the policy has %d parameters, more than %d (its covariance is n×n); use --method es", len(t.net.Params()), t.cfg.CMA.withDefaults().MaxParams)
	}
	if t.cfg.Method == Clone {
		adim := t.s.space.Dim()
		t.ds = newDataset(t.s.grid, adim, adim)
	}
	return nil
}

// Config returns the resolved configuration.
func (t *Trainer) Config() Config { return t.cfg }

// Net returns a copy of the best weights so far (by validation score).
func (t *Trainer) Net() nets.Net {
	n := t.net.Clone()
	copy(n.Params(), t.best)
	return n
}

// parallel runs job(worker, i) for i in [0, n) on the workers.
func (t *Trainer) parallel(n int, job func(w, i int) error) error {
	var next int
	var mu sync.Mutex
	errs := make([]error, len(t.envs))
	var wg sync.WaitGroup
	for w := range t.envs {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for {
				mu.Lock()
				i := next
				next++
				mu.Unlock()
				if i >= n {
					return
				}
				if err := job(w, i); err != nil {
					errs[w] = err
					return
				}
			}
		}(w)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// score plays the params on seeds under the clean pipeline and returns
// every return.
func (t *Trainer) score(params []float32, seeds []uint64, stream string) ([]float64, error) {
	return t.scoreFrom(params, seeds, stream, 0)
}

func mean(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// validate scores params on the validation slice and keeps them if best.
func (t *Trainer) validate(params []float32) (float64, error) {
	seeds := make([]uint64, t.cfg.ValEpisodes)
	for i := range seeds {
		seeds[i] = games.Train(ValidationStart + i)
	}
	r, err := t.score(params, seeds, "validate")
	if err != nil {
		return 0, err
	}
	v := mean(r)
	if v > t.st.BestVal {
		t.st.BestVal = v
		t.st.Stale = 0
		copy(t.best, params)
	} else {
		t.st.Stale++
	}
	return v, nil
}

// HeldOut scores the best weights on n held-out episodes (games.HeldOut
// seeds, clean pipeline) and returns every return.
func (t *Trainer) HeldOut(n int) ([]float64, error) {
	seeds := make([]uint64, n)
	for i := range seeds {
		seeds[i] = games.HeldOut(i)
	}
	return t.score(t.best, seeds, "heldout")
}

// ExpertHeldOut scores the game's scripted expert on the same n held-out
// episodes, for comparison.
func (t *Trainer) ExpertHeldOut(n int) ([]float64, error) {
	out := make([]float64, n)
	err := t.parallel(n, func(w, i int) error {
		e := t.envs[w]
		e.game.Reset(games.HeldOut(i))
		ret := 0.0
		for s := 0; s < 2*e.game.Spec().StepLimit; s++ {
			e.expert.Act(e.act)
			st, err := e.game.Step(e.act)
			if err != nil {
				return err
			}
			ret += st.Reward
			if st.Done {
				break
			}
		}
		out[i] = ret
		return nil
	})
	return out, err
}

// Run trains until the iteration limit, the budget, early stopping or
// ctx's cancellation. onIter (may be nil) is called after every
// iteration, and checkpoint (may be nil) every `every` iterations with
// the trainer, ready for SaveCheckpoint. On cancellation Run returns
// ctx.Err() and the trainer holds the last completed iteration, so
// SaveCheckpoint then writes a checkpoint that resumes exactly.
func (t *Trainer) Run(ctx context.Context, onIter func(Progress), every int, checkpoint func() error) (Result, error) {
	t.start = time.Now()
	done0 := time.Duration(t.st.Elapsed * float64(time.Second))
	elapsed := func() time.Duration { return done0 + time.Since(t.start) }
	t.snapshot(elapsed())
	stop := func() string {
		switch {
		case t.cfg.Iters > 0 && t.st.Iter >= t.cfg.Iters:
			return "iterations"
		case elapsed() >= t.cfg.Budget:
			return "budget"
		case t.cfg.earlyStop(t.st):
			return "early-stop"
		}
		return ""
	}
	iter := func(p Progress) error {
		p.Method = t.cfg.Method
		p.BestVal = t.st.BestVal
		p.Elapsed = elapsed()
		p.Left = max(0, t.cfg.Budget-p.Elapsed)
		t.snapshot(p.Elapsed)
		if onIter != nil {
			onIter(p)
		}
		if checkpoint != nil && every > 0 && t.st.Iter%every == 0 {
			if err := checkpoint(); err != nil {
				return err
			}
		}
		return nil
	}
	var why string
	var err error
	switch t.cfg.Method {
	case Clone:
		why, err = t.runClone(ctx, stop, iter)
	case ESm:
		why, err = t.runES(ctx, stop, iter)
	case CMAES:
		why, err = t.runCMA(ctx, stop, iter)
	}
	res := Result{Iters: t.st.Iter, Stopped: why, BestVal: t.st.BestVal, Elapsed: elapsed()}
	if err != nil {
		return res, err
	}
	if math.IsInf(t.st.BestVal, -1) {
		// Never validated (a limit hit before the first validation).
		if _, err := t.validate(t.net.Params()); err != nil {
			return res, err
		}
		res.BestVal = t.st.BestVal
	}
	return res, nil
}

func (t *Trainer) runClone(ctx context.Context, stop func() string, iter func(Progress) error) (string, error) {
	cc := t.cfg.Clone
	for {
		if why := stop(); why != "" {
			return why, nil
		}
		if err := ctx.Err(); err != nil {
			return "", err
		}
		round := t.st.Iter
		beta := math.Pow(cc.BetaDecay, float64(round))
		// Collect: episodes on training seeds, in parallel, then appended
		// in episode order so the data set does not depend on timing.
		n := cc.EpisodesPerRound
		parts := make([]*dataset, n)
		acts := make([][]float32, n)
		rets := make([]float64, n)
		for _, e := range t.envs {
			e.setParams(t.net.Params())
		}
		err := t.parallel(n, func(w, i int) error {
			k := round*n + i
			seed := games.Train(int(patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("clone-seed"), uint64(k)) % ValidationStart))
			parts[i] = newDataset(t.s.grid, t.ds.adim, t.ds.ldim)
			var err error
			acts[i], rets[i], err = t.envs[w].rollout(seed,
				patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("clone-pipe"), uint64(k)),
				patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("clone-mix"), uint64(k)),
				beta, cc.Keep, parts[i], nil)
			if err != nil {
				return fmt.Errorf("collect episode %d: %w", k, err)
			}
			return nil
		})
		if err != nil {
			return "", err
		}
		if err := ctx.Err(); err != nil {
			return "", err
		}
		for i := 0; i < n; i++ {
			k := round*n + i
			seed := games.Train(int(patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("clone-seed"), uint64(k)) % ValidationStart))
			t.ds.appendFrom(parts[i])
			t.st.Episodes = append(t.st.Episodes, episode{Seed: seed, Steps: len(acts[i]) / t.s.space.Dim()})
			t.acts = append(t.acts, acts[i]...)
		}
		t.ds.setSpread()
		if t.s.space.Kind == games.Discrete {
			t.ds.setClassWeights(t.s.space.Choices())
		}
		var loss float64
		for ep := 0; ep < cc.Epochs; ep++ {
			if loss, err = t.epoch(ctx, round, ep); err != nil {
				// The in-memory state is now mid-round; SaveCheckpoint
				// writes the snapshot of the last completed round.
				return "", err
			}
		}
		t.st.Iter++
		p := Progress{Iter: t.st.Iter, Mean: mean(rets), Loss: loss, Samples: t.ds.n, Val: math.NaN()}
		if t.st.Iter%t.cfg.ValEvery == 0 {
			if p.Val, err = t.validate(t.net.Params()); err != nil {
				return "", err
			}
		}
		p.Best = t.st.BestVal
		if err := iter(p); err != nil {
			return "", err
		}
	}
}

// shards is the fixed number of gradient shards of a minibatch: each is
// summed by one worker and the shards are added in order, so results are
// the same bytes for any worker count.
const shards = 8

// epoch runs one pass of minibatch Adam over the data set.
func (t *Trainer) epoch(ctx context.Context, round, ep int) (float64, error) {
	ds := t.ds
	order := make([]int, ds.n)
	for i := range order {
		order[i] = i
	}
	rng := patch.NewRand(patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("clone-shuffle"), uint64(round), uint64(ep)))
	rng.Shuffle(len(order), func(i, j int) { order[i], order[j] = order[j], order[i] })
	params := t.net.Params()
	np := len(params)
	sg := make([][]float32, shards)
	for i := range sg {
		sg[i] = make([]float32, np)
	}
	sl := make([]float64, shards)
	grad := make([]float32, np)
	b := t.cfg.Clone.Batch
	total := 0.0
	for lo := 0; lo < len(order); lo += b {
		if err := ctx.Err(); err != nil {
			return 0, err
		}
		batch := order[lo:min(lo+b, len(order))]
		scale := 1 / float32(len(batch))
		for _, e := range t.envs {
			e.setParams(params)
		}
		err := t.parallel(shards, func(w, s int) error {
			e := t.envs[w]
			e.net.ZeroGrads()
			l := 0.0
			for j := s; j < len(batch); j += shards {
				i := batch[j]
				v, err := e.sampleLoss(ds, i, patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("clone-aug"), uint64(round), uint64(ep), uint64(i)), scale, true)
				if err != nil {
					return err
				}
				l += v
			}
			copy(sg[s], e.net.Grads())
			sl[s] = l
			return nil
		})
		if err != nil {
			return 0, err
		}
		clear(grad)
		for s := 0; s < shards; s++ {
			for i, g := range sg[s] {
				grad[i] += g
			}
			total += sl[s]
		}
		t.opt.Step(params, grad)
	}
	return total / float64(max(1, len(order))), nil
}

func (ds *dataset) appendFrom(o *dataset) {
	ds.step = append(ds.step, o.step...)
	ds.pix = append(ds.pix, o.pix...)
	ds.prev = append(ds.prev, o.prev...)
	ds.label = append(ds.label, o.label...)
	ds.n += o.n
}

// fitnessSeeds returns the training seeds of generation gen's episodes.
func (t *Trainer) fitnessSeeds(gen int) []uint64 {
	k := t.cfg.FitnessEpisodes
	s := make([]uint64, k)
	for i := range s {
		s[i] = games.Train(int(patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("fitness-seed"), uint64(gen), uint64(i)) % ValidationStart))
	}
	return s
}

func (t *Trainer) fitness(w, gen int, params []float32) (float64, error) {
	e := t.envs[w]
	e.setParams(params)
	return episodesMean(e.fit, t.fitnessSeeds(gen), patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("fitness-pipe"), uint64(gen)))
}

func (t *Trainer) runES(ctx context.Context, stop func() string, iter func(Progress) error) (string, error) {
	for {
		if why := stop(); why != "" {
			return why, nil
		}
		gs, err := t.es.Step(ctx, t.fitness)
		if err != nil {
			return "", err
		}
		t.st.Iter = t.es.Gen
		t.st.Evals = t.es.Evals
		t.st.BestEver = t.es.BestEver
		copy(t.net.Params(), t.es.Theta)
		p := Progress{Iter: gs.Gen, Best: gs.Best, Mean: gs.Mean, Evals: gs.Evals, Val: math.NaN()}
		if t.st.Iter%t.cfg.ValEvery == 0 {
			if p.Val, err = t.validate(t.es.Theta); err != nil {
				return "", err
			}
		}
		if err := iter(p); err != nil {
			return "", err
		}
	}
}

var errStopCMA = errors.New("stop")

func (t *Trainer) runCMA(ctx context.Context, stop func() string, iter func(Progress) error) (string, error) {
	replay := make([]CMAEval, 0, len(t.st.History))
	for _, h := range t.st.History {
		k, err := strconv.ParseUint(h.Key, 10, 64)
		if err != nil {
			return "", fmt.Errorf("checkpoint history: %w", err)
		}
		replay = append(replay, CMAEval{Key: k, F: h.F})
	}
	resumeAt := t.st.Iter
	var why string
	fit := func(w, _ int, p []float32) (float64, error) {
		if err := ctx.Err(); err != nil {
			return 0, err // stop mid-generation; the snapshot is the last whole one
		}
		return t.fitness(w, 0, p)
	}
	onGen := func(gs GenStats, best []float32, hist []CMAEval) error {
		if gs.Gen <= resumeAt {
			return nil // replayed generation
		}
		t.st.Iter = gs.Gen
		t.st.Evals = gs.Evals
		t.st.BestEver = gs.BestEver
		t.st.History = t.st.History[:0]
		for _, h := range hist {
			t.st.History = append(t.st.History, histRec{Key: strconv.FormatUint(h.Key, 10), F: h.F})
		}
		copy(t.net.Params(), best)
		p := Progress{Iter: gs.Gen, Best: gs.Best, Mean: gs.Mean, Evals: gs.Evals, Val: math.NaN()}
		if t.st.Iter%t.cfg.ValEvery == 0 {
			v, err := t.validate(best)
			if err != nil {
				return err
			}
			p.Val = v
		}
		if err := iter(p); err != nil {
			return err
		}
		if why = stop(); why != "" {
			return errStopCMA
		}
		return nil
	}
	if why = stop(); why != "" {
		return why, nil
	}
	res, err := RunCMAES(ctx, t.cfg.CMA, t.x0, fit, replay, onGen)
	if errors.Is(err, errStopCMA) {
		return why, nil
	}
	if err != nil {
		return "", err
	}
	_ = res
	return "converged", nil
}

// snapshot keeps, in memory, a checkpoint of the last completed
// iteration, which SaveCheckpoint writes.
func (t *Trainer) snapshot(elapsed time.Duration) {
	t.st.Elapsed = elapsed.Seconds()
	f, err := t.checkpointFile()
	if err == nil {
		t.snap = f
	}
}

func jsonString(v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		panic("train: " + err.Error()) // only finite numbers reach here
	}
	return string(b)
}

// noInf maps ±Inf (a score not yet measured) to ∓MaxFloat64 for JSON,
// which has no infinities; fromJSONInf maps it back.
func noInf(v float64) float64 {
	switch {
	case math.IsInf(v, -1):
		return -math.MaxFloat64
	case math.IsInf(v, 1):
		return math.MaxFloat64
	}
	return v
}

func fromJSONInf(v float64) float64 {
	switch v {
	case -math.MaxFloat64:
		return math.Inf(-1)
	case math.MaxFloat64:
		return math.Inf(1)
	}
	return v
}
