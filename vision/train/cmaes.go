package train

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"time"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"

	"tilebench/patch"
)

// CMAConfig configures CMA-ES (through gonum's optimize.CmaEsChol). The
// zero value is usable; each default is documented on its field.
type CMAConfig struct {
	// Population is λ. 0 means 4+⌊3·ln n⌋ (Hansen's tutorial,
	// arXiv:1604.00772, Table 1, which gonum also uses). The parent number
	// μ = ⌊λ/2⌋ and the recombination weights w_i ∝ ln((λ+1)/2) − ln i
	// are gonum's, and match the same table.
	Population int
	// Sigma is the initial step size σ⁽⁰⁾ (the covariance starts at I).
	// 0 means 0.1, suited to network weights of order 0.1–1.
	Sigma float64
	// Workers is the number of concurrent fitness evaluations
	// (optimize.Settings.Concurrent). 0 means runtime.GOMAXPROCS(0).
	// Results do not depend on it.
	Workers int
	// Seed seeds the sampling stream.
	Seed uint64
	// MaxEvals stops after this many fitness evaluations. 0 means no limit.
	MaxEvals int
	// MaxParams refuses problems with more parameters (CmaEsChol keeps an
	// n×n Cholesky factor). 0 means 5000.
	MaxParams int
}

func (c CMAConfig) withDefaults() CMAConfig {
	if c.Sigma == 0 {
		c.Sigma = 0.1
	}
	if c.Workers == 0 {
		c.Workers = runtime.GOMAXPROCS(0)
	}
	if c.MaxParams == 0 {
		c.MaxParams = 5000
	}
	return c
}

// CMAEval is one remembered fitness evaluation: a hash of the sampled
// point (EvalKey) and the fitness. A checkpoint keeps them all, so that a
// resumed run replays the sampler exactly and skips the games.
type CMAEval struct {
	Key uint64
	F   float64
}

// EvalKey hashes a point's float64 bits (FNV-1a 64, common practice).
func EvalKey(x []float64) uint64 {
	h := uint64(14695981039346656037)
	for _, v := range x {
		b := math.Float64bits(v)
		for k := 0; k < 8; k++ {
			h ^= b & 0xff
			h *= 1099511628211
			b >>= 8
		}
	}
	return h
}

// CMAResult is the outcome of RunCMAES.
type CMAResult struct {
	// Best is the best point found and BestF its fitness.
	Best  []float32
	BestF float64
	// Gens and Evals count generations and fitness evaluations (replayed
	// ones included).
	Gens, Evals int
	// History holds every evaluation, for checkpoints.
	History []CMAEval
	// Status is gonum's termination status.
	Status optimize.Status
}

// newCMA builds the gonum method for n parameters.
//
// gonum v0.17's CmaEsChol draws its samples from N(m, Σ) with Σ its
// Cholesky factor alone: the step size it adapts (from InitStepSize) is
// not applied to the samples. So σ⁽⁰⁾ is passed both as InitStepSize and
// as the initial covariance σ⁽⁰⁾²·I, which makes it the real spread of the
// first generation. (Read from gonum's source; the slow final convergence
// this causes is why the stated tolerances below are modest.)
func newCMA(cfg CMAConfig, n int) *optimize.CmaEsChol {
	m := &optimize.CmaEsChol{
		InitStepSize: cfg.Sigma,
		Population:   cfg.Population,
		Src:          rand.NewPCG(patch.DeriveSeed(cfg.Seed, patch.StreamKey("cmaes"), 1), patch.DeriveSeed(cfg.Seed, patch.StreamKey("cmaes"), 2)),
	}
	if n > 0 {
		d := mat.NewDiagDense(n, nil)
		for i := 0; i < n; i++ {
			d.SetDiag(i, cfg.Sigma*cfg.Sigma)
		}
		var c mat.Cholesky
		if c.Factorize(d) {
			m.InitCholesky = &c
		}
	}
	return m
}

// CMAGen is called after every generation with its statistics and the
// best point so far. Returning an error stops the run with that error.
type CMAGen func(st GenStats, best []float32, history []CMAEval) error

// RunCMAES maximises f from x0 with CMA-ES until ctx is cancelled,
// cfg.MaxEvals is reached, onGen returns an error or gonum reports
// convergence. f is called with gen = 0 always: CMA-ES assumes a fixed
// objective, so a game fitness should use the same episodes throughout.
// replay (from a checkpoint's History) answers evaluations of points
// already scored without calling f, so a resumed run continues exactly.
// On cancellation it returns the result so far together with ctx.Err().
func RunCMAES(ctx context.Context, cfg CMAConfig, x0 []float32, f Fitness, replay []CMAEval, onGen CMAGen) (CMAResult, error) {
	cfg = cfg.withDefaults()
	n := len(x0)
	switch {
	case n == 0:
		return CMAResult{}, errors.New("cma-es: no parameters")
	case n > cfg.MaxParams:
		return CMAResult{}, fmt.Errorf("cma-es: %d parameters is more than the limit of %d (its covariance is n×n); use the es method", n, cfg.MaxParams)
	case cfg.Population < 0 || cfg.Population == 1:
		return CMAResult{}, fmt.Errorf("cma-es: population %d: want 0 (default) or at least 2", cfg.Population)
	case !(cfg.Sigma > 0) || math.IsInf(cfg.Sigma, 0):
		return CMAResult{}, fmt.Errorf("cma-es: sigma %v: want a positive number", cfg.Sigma)
	case cfg.Workers < 1:
		return CMAResult{}, fmt.Errorf("cma-es: %d workers: want at least 1", cfg.Workers)
	}
	known := make(map[uint64]float64, len(replay))
	for _, e := range replay {
		known[e.Key] = e.F
	}
	free := make(chan int, cfg.Workers)
	for w := 0; w < cfg.Workers; w++ {
		free <- w
	}
	bufs := make([][]float32, cfg.Workers)
	for w := range bufs {
		bufs[w] = make([]float32, n)
	}
	var (
		mu       sync.Mutex
		history  = make([]CMAEval, 0, len(replay))
		firstErr error
		genSum   float64
		genN     int
		genBest  = math.Inf(-1)
	)
	problem := optimize.Problem{Func: func(x []float64) float64 {
		key := EvalKey(x)
		mu.Lock()
		v, ok := known[key]
		failed := firstErr != nil
		mu.Unlock()
		if failed {
			return math.Inf(1)
		}
		if !ok {
			w := <-free
			buf := bufs[w]
			for i, xi := range x {
				buf[i] = float32(xi)
			}
			var err error
			v, err = f(w, 0, buf)
			free <- w
			if err == nil && math.IsNaN(v) {
				err = errors.New("fitness is NaN")
			}
			if err != nil {
				mu.Lock()
				if firstErr == nil {
					firstErr = fmt.Errorf("cma-es: %w", err)
				}
				mu.Unlock()
				return math.Inf(1)
			}
		}
		mu.Lock()
		history = append(history, CMAEval{Key: key, F: v})
		genSum += v
		genN++
		genBest = math.Max(genBest, v)
		mu.Unlock()
		return -v
	}}
	start := time.Now()
	res := CMAResult{BestF: math.Inf(-1)}
	best := make([]float32, n)
	copy(best, x0)
	rec := &recorder{fn: func(loc *optimize.Location, op optimize.Operation, st *optimize.Stats) error {
		if op != optimize.MajorIteration {
			return nil
		}
		mu.Lock()
		defer mu.Unlock()
		if firstErr != nil {
			return firstErr
		}
		res.Gens++
		res.Evals = len(history)
		if -loc.F > res.BestF {
			res.BestF = -loc.F
			for i, v := range loc.X {
				best[i] = float32(v)
			}
		}
		gs := GenStats{Gen: res.Gens, Evals: res.Evals, Best: genBest, BestEver: res.BestF, Elapsed: time.Since(start)}
		if genN > 0 {
			gs.Mean = genSum / float64(genN)
		}
		genSum, genN, genBest = 0, 0, math.Inf(-1)
		if onGen != nil {
			if err := onGen(gs, best, history); err != nil {
				return err
			}
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		if cfg.MaxEvals > 0 && res.Evals >= cfg.MaxEvals {
			return errEvalLimit
		}
		return nil
	}}
	x64 := make([]float64, n)
	for i, v := range x0 {
		x64[i] = float64(v)
	}
	settings := &optimize.Settings{
		Concurrent: cfg.Workers,
		Converger:  optimize.NeverTerminate{},
		Recorder:   rec,
	}
	out, err := optimize.Minimize(problem, x64, settings, newCMA(cfg, n))
	if out != nil {
		res.Status = out.Status
		if -out.F > res.BestF && len(out.X) == n {
			res.BestF = -out.F
			for i, v := range out.X {
				best[i] = float32(v)
			}
		}
	}
	res.Best = best
	res.History = history
	res.Evals = len(history)
	if errors.Is(err, errEvalLimit) {
		err = nil
	}
	if err == nil && firstErr != nil {
		err = firstErr
	}
	return res, err
}

var errEvalLimit = errors.New("evaluation limit reached")

type recorder struct {
	fn func(*optimize.Location, optimize.Operation, *optimize.Stats) error
}

func (r *recorder) Init() error { return nil }
func (r *recorder) Record(loc *optimize.Location, op optimize.Operation, st *optimize.Stats) error {
	return r.fn(loc, op, st)
}
