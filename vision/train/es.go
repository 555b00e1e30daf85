package train

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
	"time"

	"tilebench/patch"
)

// Fitness scores one parameter vector; higher is better. worker is the
// index (0..Workers−1) of the goroutine calling it, so that a fitness can
// keep one game and one network per worker; gen is the generation, so
// that it can draw its episode seeds per generation. It must not keep
// params, and must give the same result for the same (gen, params)
// whatever the worker.
type Fitness func(worker, gen int, params []float32) (float64, error)

// GenStats summarises one generation of an evolution strategy.
type GenStats struct {
	// Gen is the generation number, from 1.
	Gen int `json:"gen"`
	// Evals is the number of fitness evaluations so far.
	Evals int `json:"evals"`
	// Best and Mean are the best and mean fitness of this generation's
	// population; BestEver is the best seen in any generation.
	Best     float64 `json:"best"`
	Mean     float64 `json:"mean"`
	BestEver float64 `json:"best_ever"`
	// Elapsed is the time since the run (or resumed run) started.
	Elapsed time.Duration `json:"-"`
}

// ESConfig configures the natural-evolution-style ES. The zero value is
// usable; each default is documented on its field.
type ESConfig struct {
	// Pairs is the number of antithetic pairs per generation (the
	// population is 2·Pairs). 0 means 16.
	Pairs int
	// Sigma is the standard deviation of the parameter noise. 0 means 0.05.
	Sigma float64
	// LR is Adam's learning rate on the estimated gradient. 0 means 0.01
	// (Salimans et al. 2017 used Adam with 0.01).
	LR float64
	// WeightDecay is the L2 coefficient added to the gradient (Salimans
	// et al. used 0.005). 0 means none.
	WeightDecay float64
	// Workers is the number of goroutines evaluating fitness. 0 means
	// runtime.GOMAXPROCS(0). Results do not depend on it.
	Workers int
	// Seed is the base of every noise stream.
	Seed uint64
}

func (c ESConfig) withDefaults() ESConfig {
	if c.Pairs == 0 {
		c.Pairs = 16
	}
	if c.Sigma == 0 {
		c.Sigma = 0.05
	}
	if c.LR == 0 {
		c.LR = 0.01
	}
	if c.Workers == 0 {
		c.Workers = runtime.GOMAXPROCS(0)
	}
	return c
}

// Check reports a configuration value out of range.
func (c ESConfig) Check() error {
	c = c.withDefaults()
	switch {
	case c.Pairs < 1:
		return fmt.Errorf("es: %d pairs: want at least 1", c.Pairs)
	case !(c.Sigma > 0) || math.IsInf(c.Sigma, 0):
		return fmt.Errorf("es: sigma %v: want a positive number", c.Sigma)
	case c.Workers < 1:
		return fmt.Errorf("es: %d workers: want at least 1", c.Workers)
	}
	a := Adam{LR: c.LR, WeightDecay: c.WeightDecay}
	return a.Check()
}

// ES is a natural-evolution-style evolution strategy (Salimans et al.
// 2017, Algorithm 2 with their refinements): each generation draws Pairs
// noise vectors ε_j, scores θ+σε_j and θ−σε_j, maps all 2·Pairs scores to
// centred ranks r, estimates the gradient of the expected score as
//
//	g = Σ_j (r⁺_j − r⁻_j)·ε_j / (2·Pairs·σ)
//
// and lets Adam ascend it with L2 weight decay. Each ε_j is drawn from its
// own seed, patch.DeriveSeed(Seed, StreamKey("es-noise"), gen, j), so a
// worker needs only that seed to rebuild the perturbation and the master
// only the seeds and the scores. The gradient is summed in pair order, so
// a run is deterministic for a seed whatever the worker count.
type ES struct {
	cfg ESConfig
	// Theta is the current centre of the search distribution.
	Theta []float32
	// Opt is Adam's state (exported for checkpoints).
	Opt Adam
	// Gen is the number of generations completed; Evals the number of
	// fitness evaluations; BestEver the best score seen.
	Gen, Evals int
	BestEver   float64

	fit    []float64
	shaped []float64
	idx    []int
	grad   []float64
	g32    []float32
	eps    []float64
	work   [][]float32
	wnoise [][]float64
}

// NewES starts an ES at theta0 (copied).
func NewES(cfg ESConfig, theta0 []float32) (*ES, error) {
	if err := cfg.Check(); err != nil {
		return nil, err
	}
	if len(theta0) == 0 {
		return nil, errors.New("es: no parameters")
	}
	cfg = cfg.withDefaults()
	n := len(theta0)
	e := &ES{cfg: cfg, Theta: append([]float32(nil), theta0...), BestEver: math.Inf(-1)}
	e.Opt = Adam{LR: cfg.LR, WeightDecay: cfg.WeightDecay}
	p := 2 * cfg.Pairs
	e.fit = make([]float64, p)
	e.shaped = make([]float64, p)
	e.idx = make([]int, p)
	e.grad = make([]float64, n)
	e.g32 = make([]float32, n)
	e.eps = make([]float64, n)
	e.work = make([][]float32, cfg.Workers)
	e.wnoise = make([][]float64, cfg.Workers)
	for w := range e.work {
		e.work[w] = make([]float32, n)
		e.wnoise[w] = make([]float64, n)
	}
	return e, nil
}

// Config returns the configuration with defaults filled in.
func (e *ES) Config() ESConfig { return e.cfg }

// noise fills eps with the noise vector of pair j of generation gen.
func (e *ES) noise(gen, j int, eps []float64) {
	r := patch.NewRand(patch.DeriveSeed(e.cfg.Seed, patch.StreamKey("es-noise"), uint64(gen), uint64(j)))
	for i := range eps {
		eps[i] = r.NormFloat64()
	}
}

// Step runs one generation: it evaluates the population on the workers,
// then updates Theta. It stops early, returning ctx.Err(), if ctx is
// cancelled; Theta is then unchanged.
func (e *ES) Step(ctx context.Context, f Fitness) (GenStats, error) {
	gen := e.Gen + 1
	pop := len(e.fit)
	sigma := float32(e.cfg.Sigma)
	jobs := make(chan int)
	errs := make([]error, e.cfg.Workers)
	var wg sync.WaitGroup
	for w := 0; w < e.cfg.Workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			x, eps := e.work[w], e.wnoise[w]
			last := -1
			for k := range jobs {
				if errs[w] != nil {
					continue
				}
				j := k / 2
				if j != last {
					e.noise(gen, j, eps)
					last = j
				}
				s := sigma
				if k%2 == 1 {
					s = -sigma
				}
				for i, t := range e.Theta {
					x[i] = t + s*float32(eps[i])
				}
				v, err := f(w, gen, x)
				if err == nil && math.IsNaN(v) {
					err = errors.New("fitness is NaN")
				}
				if err != nil {
					errs[w] = fmt.Errorf("es generation %d member %d: %w", gen, k, err)
					continue
				}
				e.fit[k] = v
			}
		}(w)
	}
	var cerr error
feed:
	for k := 0; k < pop; k++ {
		select {
		case jobs <- k:
		case <-ctx.Done():
			cerr = ctx.Err()
			break feed
		}
	}
	close(jobs)
	wg.Wait()
	if cerr != nil {
		return GenStats{}, cerr
	}
	for _, err := range errs {
		if err != nil {
			return GenStats{}, err
		}
	}
	st := GenStats{Gen: gen, Best: math.Inf(-1)}
	for _, v := range e.fit {
		st.Mean += v
		st.Best = math.Max(st.Best, v)
	}
	st.Mean /= float64(pop)
	CentredRanks(e.shaped, e.fit, e.idx)
	clear(e.grad)
	for j := 0; j < e.cfg.Pairs; j++ {
		w := e.shaped[2*j] - e.shaped[2*j+1]
		if w == 0 {
			continue
		}
		e.noise(gen, j, e.eps)
		for i, v := range e.eps {
			e.grad[i] += w * v
		}
	}
	scale := 1 / (float64(pop) * e.cfg.Sigma)
	for i, g := range e.grad {
		// Adam descends; the ES ascends the score.
		e.g32[i] = float32(-g * scale)
	}
	e.Opt.Step(e.Theta, e.g32)
	e.Gen = gen
	e.Evals += pop
	e.BestEver = math.Max(e.BestEver, st.Best)
	st.Evals, st.BestEver = e.Evals, e.BestEver
	return st, nil
}
