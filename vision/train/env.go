package train

import (
	"errors"
	"fmt"
	"image"
	"math"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
)

// env is one worker's world: a game with its expert, a tokenizer, the
// train-time pipeline, a net, and every buffer a step needs.
type env struct {
	game   games.Game
	expert games.Expert
	space  games.Controls
	grid   *patch.Grid
	tok    *patch.Tokenizer
	pipe   *patch.Pipeline // train-time augmentation
	net    nets.Net
	frame  *image.RGBA
	clean  *patch.TokenSet
	seen   *patch.TokenSet
	obs    vision.Observation
	prev   []float64
	act    []float64
	label  []float64
	out    []float32
	dOut   []float32
	eval   *vision.Episode // clean pipeline, for validation and held-out scores
	fit    *vision.Episode // train pipeline, for ES/CMA-ES fitness
}

func newEnv(s *setup, net nets.Net) (*env, error) {
	g, err := games.Build(s.game, s.opts)
	if err != nil {
		return nil, err
	}
	w, ok := g.(games.WithExpert)
	if !ok {
		return nil, fmt.Errorf("game %s has no scripted expert to learn from", s.game)
	}
	e := &env{game: g, expert: w.Expert(), space: g.Spec().Action, grid: s.grid, net: net}
	e.tok = patch.NewTokenizer(s.grid)
	if e.pipe, err = patch.NewPipeline(s.grid, s.augment); err != nil {
		return nil, fmt.Errorf("augmentation: %w", err)
	}
	clean, err := patch.NewPipeline(s.grid, s.evalSpec)
	if err != nil {
		return nil, fmt.Errorf("evaluation pipeline: %w", err)
	}
	if e.eval, err = vision.NewEpisode(g, e.tok, clean, net); err != nil {
		return nil, err
	}
	if e.fit, err = vision.NewEpisode(g, e.tok, e.pipe, net); err != nil {
		return nil, err
	}
	sp := g.Spec()
	e.frame = image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	e.clean = patch.NewTokenSet(s.grid.N(), s.grid.D())
	e.seen = patch.NewTokenSet(e.pipe.Capacity(), s.grid.D())
	e.prev = make([]float64, e.space.Dim())
	e.act = make([]float64, e.space.Dim())
	e.label = make([]float64, e.space.Dim())
	e.out = make([]float32, net.OutputDim())
	e.dOut = make([]float32, net.OutputDim())
	e.obs = vision.Observation{Tokens: e.seen, Grid: s.grid, PrevAction: e.prev}
	return e, nil
}

// setParams copies p into the worker's net.
func (e *env) setParams(p []float32) { copy(e.net.Params(), p) }

// episodes plays the listed seeds with ep and returns the mean return.
func episodesMean(ep *vision.Episode, seeds []uint64, pipeBase uint64) (float64, error) {
	sum := 0.0
	for i, s := range seeds {
		r, err := ep.Run(s, patch.DeriveSeed(pipeBase, uint64(i), s), nil)
		if err != nil {
			return 0, fmt.Errorf("episode on seed %d: %w", s, err)
		}
		sum += r.Return
	}
	return sum / float64(len(seeds)), nil
}

// round32 makes an action exactly representable as float32, so that the
// actions recorded in a checkpoint replay the same episode.
func round32(a []float64) {
	for i, v := range a {
		a[i] = float64(float32(v))
	}
}

// clampLabel keeps an expert label inside the action bounds (games clamp
// actions anyway; the net's outputs cannot leave them).
func clampLabel(space games.Controls, a []float64) {
	if space.Kind != games.Continuous {
		return
	}
	for i := range a {
		a[i] = math.Max(space.Low[i], math.Min(space.High[i], a[i]))
	}
}

// record appends the current clean frame, previous action and expert
// label to ds.
func (e *env) record(ds *dataset, t int) {
	e.expert.Act(e.label)
	clampLabel(e.space, e.label)
	ds.add(t, e.clean.Data[:e.clean.N*e.clean.D], e.prev, e.label)
}

// rollout plays one DAgger episode (Ross, Gordon & Bagnell 2011): at each
// step the expert labels the clean frame, and the action taken is the
// expert's with probability beta, else the student's (acting on the
// augmented tokens). Every keep-th frame is added to ds, as tokenized
// after the pipeline's frame corruptions (Spec.Corrupt, drawn from
// pipeSeed; the token transforms are drawn afresh per sample); every
// action taken is appended to actions (as float32, for replay).
func (e *env) rollout(gameSeed, pipeSeed, mixSeed uint64, beta float64, keep int, ds *dataset, actions []float32) ([]float32, float64, error) {
	e.game.Reset(gameSeed)
	e.pipe.Reset(pipeSeed)
	e.net.Reset(pipeSeed)
	clear(e.prev)
	mix := patch.NewRand(mixSeed)
	ret := 0.0
	maxSteps := e.game.Spec().StepLimit
	for t := 0; ; t++ {
		e.game.Render(e.frame)
		if err := e.pipe.TokenizeFrame(t, e.tok, e.frame, e.clean); err != nil {
			return actions, ret, err
		}
		if t%keep == 0 {
			e.record(ds, t)
		} else {
			e.expert.Act(e.label)
		}
		if mix.Float64() < beta {
			copy(e.act, e.label)
		} else {
			if err := e.pipe.Apply(t, e.clean, e.seen, nil); err != nil {
				return actions, ret, err
			}
			e.obs.Step = t
			if err := e.net.Act(&e.obs, e.act); err != nil {
				return actions, ret, fmt.Errorf("student: %w", err)
			}
		}
		round32(e.act)
		for _, v := range e.act {
			actions = append(actions, float32(v))
		}
		st, err := e.game.Step(e.act)
		if err != nil {
			return actions, ret, err
		}
		copy(e.prev, e.act)
		ret += st.Reward
		if st.Done || (maxSteps > 0 && t+1 >= 2*maxSteps) {
			return actions, ret, nil
		}
	}
}

// replay rebuilds the frames of a recorded episode from its actions
// (games are deterministic) and the pipeline seed it was collected with
// (for its frame corruptions), adding every keep-th frame to ds.
func (e *env) replay(gameSeed, pipeSeed uint64, actions []float32, keep int, ds *dataset) error {
	e.game.Reset(gameSeed)
	e.pipe.Reset(pipeSeed)
	clear(e.prev)
	dim := e.space.Dim()
	if len(actions)%dim != 0 {
		return errors.New("recorded actions do not fill whole steps")
	}
	for t := 0; t*dim < len(actions); t++ {
		e.game.Render(e.frame)
		if err := e.pipe.TokenizeFrame(t, e.tok, e.frame, e.clean); err != nil {
			return err
		}
		if t%keep == 0 {
			e.record(ds, t)
		}
		for i := range e.act {
			e.act[i] = float64(actions[t*dim+i])
		}
		st, err := e.game.Step(e.act)
		if err != nil {
			return err
		}
		copy(e.prev, e.act)
		if st.Done && (t+1)*dim != len(actions) {
			return fmt.Errorf("replay of seed %d ended after %d steps, the record has %d", gameSeed, t+1, len(actions)/dim)
		}
	}
	return nil
}

// sampleLoss loads sample i of ds (augmented with the pipeline from
// pipeSeed), runs the net forward and backward, and returns the loss: the
// mean over dimensions of ((out−label)/s_j)² for continuous actions, where
// s_j is the spread of dimension j's labels (dataset.spread), so that a
// dimension the expert moves little (steering) weighs as much as one it
// moves a lot (the pedal);
// the class-weighted cross-entropy of the softmax of the logits for
// discrete ones (dataset.setClassWeights).
// scale multiplies the gradient (1/batch size).
func (e *env) sampleLoss(ds *dataset, i int, pipeSeed uint64, scale float32, backward bool) (float64, error) {
	e.pipe.Reset(pipeSeed)
	e.net.Reset(pipeSeed)
	// A net with temporal context first sees the frames before sample i
	// (as far back as its episode goes), forward only: its history holds
	// their pixels, which are inputs, not activations.
	back := min(e.net.Config().Context-1, int(ds.step[i]))
	for j := back; j >= 0; j-- {
		ds.load(i-j, e.clean, e.prev)
		if err := e.pipe.Apply(back-j, e.clean, e.seen, nil); err != nil {
			return 0, err
		}
		e.obs.Step = back - j
		if err := e.net.Forward(&e.obs, e.out); err != nil {
			return 0, err
		}
	}
	lab := ds.labels(i)
	loss := 0.0
	if e.space.Kind == games.Continuous {
		k := float64(len(e.out))
		for j, o := range e.out {
			r := ds.spread(j, e.space)
			d := (float64(o) - float64(lab[j])) / r
			loss += d * d / k
			e.dOut[j] = scale * float32(2*d/(r*k))
		}
	} else {
		c := int(lab[0])
		m := math.Inf(-1)
		for _, o := range e.out {
			m = math.Max(m, float64(o))
		}
		z := 0.0
		for _, o := range e.out {
			z += math.Exp(float64(o) - m)
		}
		w := ds.weight(c)
		loss = -w * (float64(e.out[c]) - m - math.Log(z))
		for j, o := range e.out {
			p := math.Exp(float64(o)-m) / z
			if j == c {
				p--
			}
			e.dOut[j] = scale * float32(w*p)
		}
	}
	if backward {
		e.net.Backward(e.dOut)
	}
	return loss, nil
}
