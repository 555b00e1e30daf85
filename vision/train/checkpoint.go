package train

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/stats"
	"tilebench/vision/weights"
)

// Checkpoint layout: the net's tensors (current parameters) and its
// metadata, as a weights file, plus
//
//	train.best                 best-validated parameters
//	train.adam.m, train.adam.v Adam's moments (clone and es)
//	train.x0                   the CMA-ES starting point (cmaes)
//	train.actions              every action taken while collecting (clone)
//
// and the metadata entries train.checkpoint (the run's Config as JSON)
// and train.state (iteration, time used, best validation score, episode
// list, CMA-ES evaluation history, Adam step count).
const (
	keyCkptConfig = "train.checkpoint"
	keyCkptState  = "train.state"
	keyAdamT      = "train.adam.t"
)

func (t *Trainer) checkpointFile() (*weights.File, error) {
	st := t.st
	st.BestVal, st.BestEver = noInf(st.BestVal), noInf(st.BestEver)
	f, err := nets.ToFile(t.net, map[string]string{
		keyCkptConfig: jsonString(t.cfg),
		keyCkptState:  jsonString(st),
		keyAdamT:      strconv.Itoa(t.adam().T),
	})
	if err != nil {
		return nil, err
	}
	f.Add("train.best", []int{len(t.best)}, t.best)
	a := t.adam()
	if len(a.M) > 0 {
		f.Add("train.adam.m", []int{len(a.M)}, a.M)
		f.Add("train.adam.v", []int{len(a.V)}, a.V)
	}
	if t.cfg.Method == CMAES {
		f.Add("train.x0", []int{len(t.x0)}, t.x0)
	}
	if t.cfg.Method == Clone {
		f.Add("train.actions", []int{len(t.acts)}, t.acts)
	}
	return f, nil
}

func (t *Trainer) adam() *Adam {
	if t.es != nil {
		return &t.es.Opt
	}
	return &t.opt
}

// SaveCheckpoint writes the last completed iteration to path atomically.
func (t *Trainer) SaveCheckpoint(path string) error {
	f := t.snap
	if f == nil {
		var err error
		if f, err = t.checkpointFile(); err != nil {
			return err
		}
	}
	return weights.WriteFile(path, f)
}

// Resume rebuilds a trainer from a checkpoint written by SaveCheckpoint,
// so that Run continues exactly where the checkpoint was taken (the same
// bytes as an uninterrupted run with the same iteration limit). budget
// and iters, if not zero, replace the checkpoint's limits.
func Resume(path string, iters int, budget float64) (*Trainer, error) {
	f, err := weights.ReadFile(path)
	if err != nil {
		return nil, err
	}
	t, err := resumeFile(f, iters, budget)
	if err != nil {
		return nil, fmt.Errorf("resume %s: %w", path, err)
	}
	return t, nil
}

func resumeFile(f *weights.File, iters int, budget float64) (*Trainer, error) {
	cj, err := f.Meta(keyCkptConfig)
	if err != nil {
		return nil, errors.New("not a training checkpoint (no " + keyCkptConfig + " entry)")
	}
	sj, err := f.Meta(keyCkptState)
	if err != nil {
		return nil, err
	}
	cfg, st, err := parseCheckpointMeta(cj, sj)
	if err != nil {
		return nil, err
	}
	// The net: its own tensors only.
	nf := &weights.File{Metadata: map[string]string{}}
	extra := map[string]*weights.Tensor{}
	for i := range f.Tensors {
		tt := &f.Tensors[i]
		if strings.HasPrefix(tt.Name, "train.") {
			extra[tt.Name] = tt
			continue
		}
		nf.Tensors = append(nf.Tensors, *tt)
	}
	for k, v := range f.Metadata {
		if !strings.HasPrefix(k, "train") && !strings.HasPrefix(k, "heldout") && k != "game" && k != "caution" && k != "variation" {
			nf.Metadata[k] = v
		}
	}
	net, err := nets.FromFile(nf)
	if err != nil {
		return nil, err
	}
	if iters != 0 {
		cfg.Iters = iters
	}
	if budget != 0 {
		cfg.Budget = secondsToDuration(budget)
	}
	cfg.Init = net
	t, err := New(cfg)
	if err != nil {
		return nil, err
	}
	t.net = net
	for _, e := range t.envs {
		e.setParams(net.Params())
	}
	need := func(name string, n int) ([]float32, error) {
		tt, ok := extra[name]
		if !ok {
			return nil, fmt.Errorf("checkpoint has no %s tensor", name)
		}
		if n >= 0 && len(tt.Data) != n {
			return nil, fmt.Errorf("checkpoint tensor %s has %d values, want %d", name, len(tt.Data), n)
		}
		for i, v := range tt.Data {
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return nil, fmt.Errorf("checkpoint tensor %s: value %d is %v", name, i, v)
			}
		}
		return tt.Data, nil
	}
	np := len(net.Params())
	b, err := need("train.best", np)
	if err != nil {
		return nil, err
	}
	copy(t.best, b)
	t.st = st
	if at, err := f.MetaInt(keyAdamT); err == nil && at > 0 {
		m, err := need("train.adam.m", np)
		if err != nil {
			return nil, err
		}
		v, err := need("train.adam.v", np)
		if err != nil {
			return nil, err
		}
		a := t.adam()
		a.M = append([]float32(nil), m...)
		a.V = append([]float32(nil), v...)
		a.T = at
	}
	switch cfg.Method {
	case ESm:
		copy(t.es.Theta, net.Params())
		t.es.Gen, t.es.Evals, t.es.BestEver = st.Iter, st.Evals, st.BestEver
	case CMAES:
		x0, err := need("train.x0", np)
		if err != nil {
			return nil, err
		}
		copy(t.x0, x0)
	case Clone:
		acts, err := need("train.actions", -1)
		if err != nil {
			return nil, err
		}
		t.acts = append([]float32(nil), acts...)
		if err := t.rebuildData(); err != nil {
			return nil, err
		}
	}
	return t, nil
}

// parseCheckpointMeta reads and checks the two JSON entries of a
// checkpoint.
func parseCheckpointMeta(cj, sj string) (Config, state, error) {
	var cfg Config
	var st state
	if err := json.Unmarshal([]byte(cj), &cfg); err != nil {
		return cfg, st, fmt.Errorf("checkpoint config: %w", err)
	}
	if err := json.Unmarshal([]byte(sj), &st); err != nil {
		return cfg, st, fmt.Errorf("checkpoint state: %w", err)
	}
	st.BestVal, st.BestEver = fromJSONInf(st.BestVal), fromJSONInf(st.BestEver)
	switch {
	case st.Iter < 0 || st.Evals < 0 || st.Stale < 0:
		return cfg, st, fmt.Errorf("checkpoint state: negative counts (iteration %d, evaluations %d)", st.Iter, st.Evals)
	case !(st.Elapsed >= 0) || math.IsInf(st.Elapsed, 0):
		return cfg, st, fmt.Errorf("checkpoint state: time used %v s", st.Elapsed)
	case math.IsNaN(st.BestVal) || math.IsNaN(st.BestEver):
		return cfg, st, errors.New("checkpoint state: score is NaN")
	}
	for _, e := range st.Episodes {
		if e.Steps < 0 || e.Steps > 1<<24 {
			return cfg, st, fmt.Errorf("checkpoint state: episode of %d steps", e.Steps)
		}
	}
	for _, h := range st.History {
		if _, err := strconv.ParseUint(h.Key, 10, 64); err != nil {
			return cfg, st, fmt.Errorf("checkpoint state: evaluation key %q: not a number", h.Key)
		}
		if math.IsNaN(h.F) {
			return cfg, st, errors.New("checkpoint state: NaN fitness in history")
		}
	}
	return cfg, st, nil
}

// rebuildData replays the recorded episodes to rebuild the aggregated
// data set, in parallel, appending in episode order.
func (t *Trainer) rebuildData() error {
	dim := t.s.space.Dim()
	offs := make([]int, len(t.st.Episodes)+1)
	for i, e := range t.st.Episodes {
		if e.Steps < 0 {
			return errors.New("checkpoint episode with negative length")
		}
		offs[i+1] = offs[i] + e.Steps*dim
	}
	if offs[len(offs)-1] != len(t.acts) {
		return fmt.Errorf("checkpoint lists %d action values for its episodes, holds %d", offs[len(offs)-1], len(t.acts))
	}
	parts := make([]*dataset, len(t.st.Episodes))
	err := t.parallel(len(parts), func(w, i int) error {
		parts[i] = newDataset(t.s.grid, t.ds.adim, t.ds.ldim)
		// Episode i was collected with pipeline seed "clone-pipe" i
		// (collect), which also draws its frame corruptions.
		return t.envs[w].replay(t.st.Episodes[i].Seed, patch.DeriveSeed(t.cfg.Seed, patch.StreamKey("clone-pipe"), uint64(i)),
			t.acts[offs[i]:offs[i+1]], t.cfg.Clone.Keep, parts[i])
	})
	if err != nil {
		return err
	}
	for _, p := range parts {
		t.ds.appendFrom(p)
	}
	t.ds.setSpread()
	if t.s.space.Kind == games.Discrete {
		t.ds.setClassWeights(t.s.space.Choices())
	}
	return nil
}

// WeightsMeta returns the training metadata for the final weights file:
// game, method, seed, hyper-parameters, augmentation, iterations and the
// held-out score (mean and IQM over n episodes) with the expert's beside.
func (t *Trainer) WeightsMeta(res Result, heldOut, expert []float64) map[string]string {
	method := t.cfg.Method
	if method == Clone {
		method = "bc" // the spelling docs/weights-format.md documents
	}
	hyper := map[string]any{"budget_s": t.cfg.Budget.Seconds(), "iters": res.Iters, "stopped": res.Stopped, "workers": t.cfg.Workers,
		"val_episodes": t.cfg.ValEpisodes, "best_val": res.BestVal}
	switch t.cfg.Method {
	case Clone:
		hyper["clone"] = t.cfg.Clone
	case ESm:
		hyper["es"] = t.es.Config()
		hyper["fitness_episodes"] = t.cfg.FitnessEpisodes
	case CMAES:
		hyper["cmaes"] = t.cfg.CMA.withDefaults()
		hyper["fitness_episodes"] = t.cfg.FitnessEpisodes
	}
	m := map[string]string{
		weights.KeyGame:   t.cfg.Game,
		weights.KeyMethod: method,
		weights.KeySeed:   strconv.FormatUint(t.cfg.Seed, 10),
		"train_hyper":     jsonString(hyper),
		"train_augment":   jsonString(t.cfg.Augment),
		"caution":         vision.Caution,
	}
	if t.cfg.Variation != "" {
		m["variation"] = t.cfg.Variation
	}
	if len(heldOut) > 0 {
		m[weights.KeyHeldOutScore] = strconv.FormatFloat(mean(heldOut), 'g', -1, 64)
		m[weights.KeyHeldOutEpisodes] = strconv.Itoa(len(heldOut))
		m["heldout_iqm"] = strconv.FormatFloat(stats.IQM(heldOut), 'g', -1, 64)
		m["heldout_returns"] = jsonString(heldOut)
	}
	if len(expert) > 0 {
		m["heldout_expert_score"] = strconv.FormatFloat(mean(expert), 'g', -1, 64)
		m["heldout_expert_iqm"] = strconv.FormatFloat(stats.IQM(expert), 'g', -1, 64)
	}
	return m
}

// WriteWeights writes the best weights to path (atomically) with meta.
func (t *Trainer) WriteWeights(path string, meta map[string]string) error {
	return nets.Save(path, t.Net(), meta)
}
