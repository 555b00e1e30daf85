package train

import (
	"fmt"
	"runtime"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
)

// HeldOutReturns plays net on the held-out episodes games.HeldOut(from)
// … games.HeldOut(from+n−1) of game (clean tokens, no augmentation),
// exactly as Trainer.HeldOut scores a run trained with seed, and returns
// each episode's return. It is how a shipped weights file's recorded
// score can be re-checked. workers 0 means runtime.GOMAXPROCS(0).
func HeldOutReturns(net nets.Net, game, variation string, seed uint64, from, n, workers int) ([]float64, error) {
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	if n <= 0 || from < 0 {
		return nil, fmt.Errorf("held-out episodes %d..%d: want a non-empty range from 0", from, from+n-1)
	}
	g, err := games.Build(game, games.Setup{Variation: variation})
	if err != nil {
		return nil, err
	}
	sp := g.Spec()
	ng := net.Grid()
	if ng.Width != sp.Width || ng.Height != sp.Height {
		return nil, fmt.Errorf("the policy expects %dx%d frames, game %s renders %dx%d", ng.Width, ng.Height, game, sp.Width, sp.Height)
	}
	s := &setup{game: game, opts: games.Setup{Variation: variation}, grid: ng, space: sp.Action}
	t := &Trainer{cfg: Config{Seed: seed}}
	for w := 0; w < workers; w++ {
		e, err := newEnv(s, net.Clone())
		if err != nil {
			return nil, err
		}
		t.envs = append(t.envs, e)
	}
	seeds := make([]uint64, n)
	for i := range seeds {
		seeds[i] = games.HeldOut(from + i)
	}
	return t.scoreFrom(net.Params(), seeds, "heldout", from)
}

// scoreFrom is score with episode indices starting at from (the pipeline
// seed of episode i is derived from i, so a sub-range replays exactly).
func (t *Trainer) scoreFrom(params []float32, seeds []uint64, stream string, from int) ([]float64, error) {
	out := make([]float64, len(seeds))
	for _, e := range t.envs {
		e.setParams(params)
	}
	base := patch.DeriveSeed(t.cfg.Seed, patch.StreamKey(stream))
	err := t.parallel(len(seeds), func(w, i int) error {
		r, err := t.envs[w].eval.Run(seeds[i], patch.DeriveSeed(base, uint64(from+i)), nil)
		out[i] = r.Return
		return err
	})
	return out, err
}
