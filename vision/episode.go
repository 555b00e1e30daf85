package vision

import (
	"fmt"
	"image"
	"time"

	"tilebench/games"
	"tilebench/patch"
)

// Episode joins a game, a tokenizer, a transform pipeline and a policy, and
// runs episodes with buffers allocated once.
type Episode struct {
	Game     games.Game
	Tok      *patch.Tokenizer
	Pipe     *patch.Pipeline
	Policy   Policy
	frame    *image.RGBA
	seen     *image.RGBA
	clean    *patch.TokenSet
	tokens   *patch.TokenSet
	action   []float64
	prev     []float64
	obs      Observation
	record   patch.FrameRecord
	wantsPix bool
	blind    bool
}

// StepHook, if set on a run, is called after the policy acted at every
// step with the raw game frame, the observation the policy saw (its Frame
// filled, whatever the policy asked for) and the pipeline's record.
type StepHook func(t int, raw *image.RGBA, obs *Observation, rec *patch.FrameRecord, action []float64)

// Result is the outcome of one episode.
type Result struct {
	Seed     uint64
	Return   float64
	Steps    int
	Reason   games.EndReason
	Duration time.Duration
}

// NewEpisode checks that the pieces fit and allocates the buffers.
func NewEpisode(g games.Game, tok *patch.Tokenizer, pipe *patch.Pipeline, pol Policy) (*Episode, error) {
	sp := g.Spec()
	gr := tok.Grid()
	if gr.Width != sp.Width || gr.Height != sp.Height {
		return nil, fmt.Errorf("patch grid is for %dx%d frames, game %s renders %dx%d", gr.Width, gr.Height, sp.Name, sp.Width, sp.Height)
	}
	e := &Episode{Game: g, Tok: tok, Pipe: pipe, Policy: pol}
	e.frame = image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	e.seen = image.NewRGBA(image.Rect(0, 0, gr.OutW, gr.OutH))
	e.clean = patch.NewTokenSet(gr.N(), gr.D())
	e.tokens = patch.NewTokenSet(pipe.Capacity(), gr.D())
	e.action = make([]float64, sp.Action.Dim())
	e.prev = make([]float64, sp.Action.Dim())
	info := pol.Info()
	e.wantsPix = info.WantsFrame
	e.blind = info.Blind && !info.WantsFrame
	e.obs = Observation{Tokens: e.tokens, Grid: gr, PrevAction: e.prev}
	return e, nil
}

// Run plays one episode: the game from gameSeed, the pipeline and the
// policy from pipeSeed. hook may be nil. For a policy whose Info says
// Blind, and no hook, frames are neither rendered nor tokenized: the
// policy's observation then holds empty tokens.
func (e *Episode) Run(gameSeed, pipeSeed uint64, hook StepHook) (Result, error) {
	start := time.Now()
	e.Game.Reset(gameSeed)
	e.Pipe.Reset(pipeSeed)
	e.Policy.Reset(pipeSeed)
	clear(e.prev)
	res := Result{Seed: gameSeed}
	maxSteps := e.Game.Spec().StepLimit
	blind := e.blind && hook == nil
	if blind {
		e.tokens.N = 0
	}
	for t := 0; ; t++ {
		e.obs.Step, e.obs.Frame = t, nil
		var rec *patch.FrameRecord
		if !blind {
			if hook != nil {
				rec = &e.record
			}
			if err := e.observe(t, hook != nil, rec); err != nil {
				return res, fmt.Errorf("step %d: %w", t, err)
			}
		}
		if err := e.Policy.Act(&e.obs, e.action); err != nil {
			return res, fmt.Errorf("step %d: policy: %w", t, err)
		}
		if hook != nil {
			e.obs.Frame = e.seen
			hook(t, e.frame, &e.obs, rec, e.action)
		}
		st, err := e.Game.Step(e.action)
		if err != nil {
			return res, fmt.Errorf("step %d: %w", t, err)
		}
		copy(e.prev, e.action)
		res.Return += st.Reward
		res.Steps = t + 1
		if st.Done {
			res.Reason = st.Reason
			break
		}
		if maxSteps > 0 && t+1 >= maxSteps*2 {
			// A game that ignores its own step limit is a bug; stop anyway.
			res.Reason = games.TimeUp
			break
		}
	}
	res.Duration = time.Since(start)
	if ender, ok := e.Policy.(EpisodeEnder); ok {
		if err := ender.End(res.Return, res.Steps); err != nil {
			return res, fmt.Errorf("episode end: policy: %w", err)
		}
	}
	return res, nil
}

// observe renders step t's frame, tokenizes and transforms it into the
// observation (rec, if not nil, gets the pipeline's record), and
// reassembles the frame the policy sees when it or a hook wants it.
func (e *Episode) observe(t int, hooked bool, rec *patch.FrameRecord) error {
	e.Game.Render(e.frame)
	if err := e.Pipe.TokenizeFrame(t, e.Tok, e.frame, e.clean); err != nil {
		return err
	}
	if err := e.Pipe.Apply(t, e.clean, e.tokens, rec); err != nil {
		return err
	}
	if e.wantsPix || hooked {
		if err := e.Tok.Assemble(e.tokens, e.seen); err != nil {
			return err
		}
	}
	if e.wantsPix {
		e.obs.Frame = e.seen
	}
	return nil
}

// EpisodeEnder is implemented by policies that want to hear how an
// episode ended (external policies pass it on to their process). The
// episode loop calls End after the last step.
type EpisodeEnder interface {
	End(ret float64, steps int) error
}
