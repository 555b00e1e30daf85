package runner

import (
	"path/filepath"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/policies"
	"tilebench/vision/study"
)

// PolicyOptions are the policy options of the study's definition: the
// family of fresh networks and the external-policy settings; logDir
// receives external policies' stderr.
func PolicyOptions(def study.PolicyDef, logDir string) policies.Options {
	o := policies.Options{Family: def.Family, Obs: def.Obs, Dtype: def.Dtype, Clamp: def.Clamp, LogDir: logDir}
	// Normalize checked both durations.
	o.Timeout, _ = parseDuration(def.Timeout)
	o.StartTimeout, _ = parseDuration(def.StartTimeout)
	return o
}

func parseDuration(s string) (time.Duration, error) {
	if s == "" {
		return 0, nil
	}
	return time.ParseDuration(s)
}

// Policies resolves the study's policy (the first of a list) into a
// PolicyFunc safe to call from many workers (policies.Cache: weights
// files are read once per patch size and copied for each worker). An
// untrained network for patch size ps is seeded with p.PolicySeed(ps).
// logDir receives external policies' stderr.
func Policies(p *study.Plan, logDir string) PolicyFunc {
	l := p.Def.PolicyList()[0]
	return PolicyByLabel(p, logDir)[l.Label]
}

// PolicyByLabel resolves every policy of the study, keyed by label (""
// for a study of one unlabelled policy), as Policies does for one; the
// policies share one cache, and an external policy labelled L keeps its
// stderr in logDir/L.
func PolicyByLabel(p *study.Plan, logDir string) map[string]PolicyFunc {
	var cache policies.Cache
	out := map[string]PolicyFunc{}
	for _, l := range p.Def.PolicyList() {
		dir := logDir
		if dir != "" && l.Label != "" {
			dir = filepath.Join(logDir, l.Label)
		}
		base := PolicyOptions(p.Def.Policy, dir)
		src := l.Source
		out[l.Label] = func(ps int, g games.Game, grid *patch.Grid) (vision.Policy, error) {
			opt := base
			opt.InitSeed = p.PolicySeed(ps)
			return cache.Open(src, g, grid, opt)
		}
	}
	return out
}

// DefaultEnv is the EnvFactory of a study on the registered games, with
// the study's policies; logDir receives external policies' stderr.
func DefaultEnv(p *study.Plan, logDir string) EnvFactory {
	pols := PolicyByLabel(p, logDir)
	return func(int) (Env, error) { return NewGameEnvSet(p.Def.Game, pols), nil }
}
