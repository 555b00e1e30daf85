package study

import (
	"errors"
	"fmt"
	"os"
	"strconv"
	"strings"
	"sync"
	"time"

	"tilebench/games"
	_ "tilebench/games/all" // the built-in games
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/remote"
	"tilebench/vision/weights"
)

// external opens an external policy over the protocol of vision/remote
// (docs/policy-protocol.md), keeping its stderr in logDir.
func external(source string, def PolicyDef, g games.Game, grid *patch.Grid, logDir string) (vision.Policy, error) {
	cfg := remote.Config{Game: g.Spec(), Grid: grid, LogDir: logDir}
	if def.Timeout != "" {
		d, err := time.ParseDuration(def.Timeout)
		if err != nil {
			return nil, fmt.Errorf("policy timeout %q: %w", def.Timeout, err)
		}
		cfg.StepTimeout = d
	}
	if def.StartTimeout != "" {
		d, err := time.ParseDuration(def.StartTimeout)
		if err != nil {
			return nil, fmt.Errorf("policy start timeout %q: %w", def.StartTimeout, err)
		}
		cfg.HandshakeTimeout = d
	}
	if logDir != "" {
		if err := os.MkdirAll(logDir, 0o755); err != nil {
			return nil, fmt.Errorf("policy log folder: %w", err)
		}
	}
	return remote.Open(source, cfg)
}

// PolicyPath is the weights file for patch size ps: source with every
// "{patch}" replaced by ps.
func PolicyPath(source string, ps int) string {
	return strings.ReplaceAll(source, "{patch}", strconv.Itoa(ps))
}

// Policies resolves the study's policy into a PolicyFunc safe to call
// from many workers: weights files are read once per patch size and
// cloned for each worker. logDir receives external policies' stderr.
func Policies(p *Plan, logDir string) PolicyFunc {
	def := p.Def.Policy
	var mu sync.Mutex
	loaded := map[string]nets.Net{}
	return func(ps int, g games.Game, grid *patch.Grid) (vision.Policy, error) {
		src := def.Source
		switch {
		case src == "expert":
			pol, ok := vision.NewExpertPolicy(g)
			if !ok {
				return nil, fmt.Errorf("game %s ships no scripted expert", g.Spec().Name)
			}
			return pol, nil
		case src == "fresh":
			return nets.New(nets.Config{Family: def.Family}, grid, g.Spec().Action, p.PolicySeed(ps))
		case remote.IsTarget(src):
			return external(src, def, g, grid, logDir)
		}
		path := PolicyPath(src, ps)
		mu.Lock()
		n, ok := loaded[path]
		mu.Unlock()
		if !ok {
			var err error
			n, err = nets.Load(path)
			if err != nil {
				return nil, err
			}
			if err := errors.Join(CheckGeometry(path, n, g.Spec(), grid), CheckGame(path, g.Spec())); err != nil {
				return nil, err
			}
			mu.Lock()
			loaded[path] = n
			mu.Unlock()
		}
		return n.Clone(), nil
	}
}

// CheckGeometry refuses a net whose patch grid or action space does not
// fit the game's frame and the study's patch size.
func CheckGeometry(path string, n nets.Net, sp games.Spec, grid *patch.Grid) error {
	ng := n.Grid()
	if ng.Width != sp.Width || ng.Height != sp.Height {
		return fmt.Errorf("%s: weights are for %dx%d frames, game %s renders %dx%d", path, ng.Width, ng.Height, sp.Name, sp.Width, sp.Height)
	}
	if ng.PatchW != grid.PatchW || ng.PatchH != grid.PatchH || ng.Channels != grid.Channels ||
		ng.StrideX != grid.StrideX || ng.StrideY != grid.StrideY || ng.Edge != grid.Edge {
		return fmt.Errorf("%s: weights are for patch %dx%d stride %dx%d (%s), this run cuts frames at patch %dx%d stride %dx%d (%s)",
			path, ng.PatchW, ng.PatchH, ng.StrideX, ng.StrideY, ng.Edge, grid.PatchW, grid.PatchH, grid.StrideX, grid.StrideY, grid.Edge)
	}
	a, b := n.Space(), sp.Action
	if a.Kind != b.Kind || a.Dim() != b.Dim() || a.Choices() != b.Choices() {
		return fmt.Errorf("%s: weights are for a %s action space of %d values, game %s takes %s actions of %d", path, a.Kind, a.Dim(), sp.Name, b.Kind, b.Dim())
	}
	return nil
}

// CheckGame refuses a weights file whose metadata names another game than
// the one played. Files without the key pass; probing recorded frames, which
// come from no built-in game, does not call it.
func CheckGame(path string, sp games.Spec) error {
	if g, ok := weightsGame(path); ok && g != sp.Name {
		return fmt.Errorf("%s: weights were trained on game %s, this run plays %s", path, g, sp.Name)
	}
	return nil
}

// DefaultEnv is the EnvFactory of a study on the built-in games, with
// the study's policy; logDir receives external policies' stderr.
func DefaultEnv(p *Plan, logDir string) EnvFactory {
	pol := Policies(p, logDir)
	return func(int) (Env, error) { return NewGameEnv(p.Def.Game, pol), nil }
}

// PatchOfPolicy returns the patch size a single weights file (a source
// that is not expert, fresh, external, or a {patch} template) was made
// for, so that a study of that file needs no patch list.
func PatchOfPolicy(source string) (int, bool) {
	if source == "" || source == "expert" || source == "fresh" || strings.Contains(source, "{patch}") ||
		remote.IsTarget(source) {
		return 0, false
	}
	n, err := nets.Load(source)
	if err != nil {
		return 0, false
	}
	g := n.Grid()
	if g.PatchW != g.PatchH {
		return 0, false
	}
	return g.PatchW, true
}

// weightsGame returns the game a weights file says it was trained on
// (metadata key weights.KeyGame), when the file can be read and says so.
func weightsGame(path string) (string, bool) {
	f, err := weights.ReadFile(path)
	if err != nil {
		return "", false
	}
	g, ok := f.Metadata[weights.KeyGame]
	return g, ok && g != ""
}
