package probe

import (
	"fmt"
	"os"
	"sync"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/policies"
	"tilebench/vision/remote"
)

// gameName is what an external policy is told it plays in a probe (the
// hello's "game" and TILEBENCH_GAME): recorded frames, no game.
const gameName = "recording"

// batcher is a policy that takes several observations in one call: a
// stateless external policy that offered batched messages. ActBatch
// writes actions[i] for obs[i]; len(obs) ≤ BatchSize().
type batcher interface {
	BatchSize() int
	ActBatch(obs []*vision.Observation, actions [][]float64) error
}

// frameOnly is a policy that reads only Observation.Frame, never the
// tokens (an external policy sent frames), so clean frames need not be
// tokenized for it.
type frameOnly interface {
	FrameOnly() bool
}

// packer is a policy that takes frames as packed bytes (an external
// policy sent uint8 frames, remote.Policy): on the clean pass, frames of
// a recording stored that way (frameio.Packed) are read straight into
// the policy's outgoing message (FrameBuffer), with no RGBA frame
// between. PackedFrame gives the layout, (height, width, channels)
// bytes, and whether the policy takes such frames at all.
type packer interface {
	PackedFrame() (shape [3]int, ok bool)
	FrameBuffer(k int) []byte
	ActPacked(obs *vision.Observation, frame []byte, action []float64) error
	ActBatchPacked(obs []*vision.Observation, frames []byte, actions [][]float64) error
}

// fileBatcher is a packer that also takes a batch's frames as stored in
// a file (remote.Policy.ActBatchFile), to move them into its messages
// without reading them.
type fileBatcher interface {
	ActBatchFile(obs []*vision.Observation, f *os.File, off int64, actions [][]float64) error
}

// PolicyFunc makes one worker's policy for one patch size and its grid.
type PolicyFunc func(patchSize int, grid *patch.Grid) (vision.Policy, error)

// Policies resolves the plan's policy source into a PolicyFunc safe to
// call from many workers: weights files are read once per patch size and
// cloned, fresh networks are built from the probe seed, external policies
// get one session per worker and patch size (stderr kept in logDir when
// set). It reuses the study's path template and geometry rules.
func Policies(p *Plan, logDir string) PolicyFunc {
	src := p.Config.Policy
	space := p.Space.Games()
	spec := games.Spec{Name: gameName, Width: p.Width, Height: p.Height, Action: space}
	var mu sync.Mutex
	loaded := map[string]nets.Net{}
	return func(ps int, grid *patch.Grid) (vision.Policy, error) {
		switch {
		case src == "fresh":
			return nets.New(nets.Config{Family: p.Config.Family}, grid, space, p.NetSeed(ps))
		case remote.IsTarget(src):
			cfg := remote.Config{Game: spec, Grid: grid, Obs: p.Config.Obs, Dtype: p.Config.Dtype, Clamp: p.Config.Clamp, LogDir: logDir}
			if p.Config.StartTimeout != "" {
				d, err := time.ParseDuration(p.Config.StartTimeout)
				if err != nil || d <= 0 {
					return nil, fmt.Errorf("policy start timeout %q: want a positive duration such as 30s", p.Config.StartTimeout)
				}
				cfg.HandshakeTimeout = d
			}
			if p.Config.Timeout != "" {
				d, err := time.ParseDuration(p.Config.Timeout)
				if err != nil || d <= 0 {
					return nil, fmt.Errorf("policy timeout %q: want a positive duration such as 5s", p.Config.Timeout)
				}
				cfg.StepTimeout = d
			}
			if logDir != "" {
				if err := os.MkdirAll(logDir, 0o755); err != nil {
					return nil, fmt.Errorf("policy log folder: %w", err)
				}
			}
			return remote.Open(src, cfg)
		}
		path := policies.Expand(src, ps)
		mu.Lock()
		defer mu.Unlock()
		n, ok := loaded[path]
		if !ok {
			var err error
			if n, err = nets.Load(path); err != nil {
				return nil, err
			}
			if err := policies.CheckGeometry(path, n, spec, grid); err != nil {
				return nil, err
			}
			loaded[path] = n
		}
		return n.Clone(), nil
	}
}
