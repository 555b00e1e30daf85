package runner

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
	"tilebench/vision/policies"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
	"tilebench/vision/train"
)

// MeasureCosts returns the cost of the study's policy at every patch
// size: FLOPs and parameters from the cost model of vision/nets
// (nets.Estimate) and the median latency per step of Act measured here
// (nets.MeasureLatency, 5 samples of 20 steps on random tokens).
func MeasureCosts(p *study.Plan) ([]analysis.Cost, error) {
	g, err := games.Build(p.Def.Game, games.Setup{Variation: p.Def.Variation})
	if err != nil {
		return nil, err
	}
	sp := g.Spec()
	pol := Policies(p, "")
	var out []analysis.Cost
	for _, ps := range p.Patches() {
		grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: ps})
		if err != nil {
			return nil, fmt.Errorf("patch %d: %w", ps, err)
		}
		vp, err := pol(ps, g, grid)
		if err != nil {
			return nil, err
		}
		n, ok := vp.(nets.Net)
		if !ok {
			return nil, fmt.Errorf("patch %d: the %s policy has no cost model (a sizes study needs a network: fresh, a weights file or --train)", ps, vp.Info().Family)
		}
		c, err := nets.Estimate(n.Config(), grid, sp.Action)
		if err != nil {
			return nil, fmt.Errorf("patch %d: cost: %w", ps, err)
		}
		lat, err := nets.MeasureLatency(n, nets.RandomObservation(grid, sp.Action, p.PolicySeed(ps)), 5, 20)
		if err != nil {
			return nil, fmt.Errorf("patch %d: %w", ps, err)
		}
		out = append(out, analysis.Cost{Patch: ps, Tokens: grid.N(), MFLOP: float64(c.FLOPs) / 1e6, Params: c.Params,
			LatencyUS: float64(lat.Nanoseconds()) / 1e3})
	}
	return out, nil
}

// TrainOptions configure TrainPolicies.
type TrainOptions struct {
	// Method is the training method of vision/train: "clone" (default),
	// "cmaes" or "es".
	Method string
	// Budget is the training time for all patch sizes together, split
	// evenly. Default 3 minutes.
	Budget time.Duration
	// Workers is passed to the trainer (0: every core).
	Workers int
	// Progress, if set, is told which patch size is training.
	Progress func(patchSize int, p train.Progress)
}

// TrainTemplate is where TrainPolicies puts the policies of a study in dir.
func TrainTemplate(dir string) string {
	return filepath.Join(dir, "policies", "p{patch}.safetensors")
}

// TrainPolicies trains one policy of the study's family per patch size
// into TrainTemplate(dir), on training seeds only, skipping patch sizes
// whose file exists (a resumed study keeps the policies it was run with).
func TrainPolicies(ctx context.Context, p *study.Plan, dir string, opt TrainOptions) error {
	if opt.Method == "" {
		opt.Method = train.Clone
	}
	if opt.Budget == 0 {
		opt.Budget = 3 * time.Minute
	}
	ps := p.Patches()
	each := opt.Budget / time.Duration(len(ps))
	for _, s := range ps {
		path := policies.Expand(TrainTemplate(dir), s)
		if _, err := os.Stat(path); err == nil {
			continue
		}
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			return fmt.Errorf("train: %w", err)
		}
		t, err := train.New(train.Config{Game: p.Def.Game, Variation: p.Def.Variation, Patch: s,
			Net: nets.Config{Family: p.Def.Policy.Family, Centre: true}, Method: opt.Method, Budget: each, Workers: opt.Workers,
			Seed: p.PolicySeed(s)})
		if err != nil {
			return fmt.Errorf("train patch %d: %w", s, err)
		}
		var onIter func(train.Progress)
		if opt.Progress != nil {
			onIter = func(pr train.Progress) { opt.Progress(s, pr) }
		}
		res, err := t.Run(ctx, onIter, 0, nil)
		if err != nil {
			return fmt.Errorf("train patch %d: %w", s, err)
		}
		if err := t.WriteWeights(path, t.WeightsMeta(res, nil, nil)); err != nil {
			return fmt.Errorf("train patch %d: %w", s, err)
		}
	}
	return nil
}

// ReferencePolicies looks in folder (testdata/policies) for weights files
// of game and family, one per patch size in patches, named alike (the
// patch size being the only difference). It returns the template with
// "{patch}" in place of the size, or false.
func ReferencePolicies(folder, game, family string, patches []int) (string, bool) {
	files, _ := filepath.Glob(filepath.Join(folder, "*.safetensors"))
	sort.Strings(files)
	tmpl := ""
	for _, ps := range patches {
		found := ""
		for _, f := range files {
			base := filepath.Base(f)
			if !strings.Contains(base, game) || !strings.Contains(base, strconv.Itoa(ps)) {
				continue
			}
			n, err := nets.Load(f)
			if err != nil || n.Config().Family != family || n.Grid().PatchW != ps || n.Grid().PatchH != ps {
				continue
			}
			found = f
			break
		}
		if found == "" {
			return "", false
		}
		dir, base := filepath.Split(found)
		i := strings.LastIndex(base, strconv.Itoa(ps))
		t := dir + base[:i] + "{patch}" + base[i+len(strconv.Itoa(ps)):]
		if tmpl != "" && t != tmpl {
			return "", false
		}
		tmpl = t
	}
	return tmpl, tmpl != ""
}

// CheckDir reports whether Run would accept dir for p (see Options.Dir),
// so that work done before Run (training) is not wasted on a folder
// that holds another study.
func CheckDir(p *study.Plan, dir string, resume bool, shard study.Shard) error {
	if dir == "" {
		return errors.New("study: no output folder given")
	}
	return prepareDir(p, Options{Dir: dir, Resume: resume, Shard: shard})
}
