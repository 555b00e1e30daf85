// Package play plays episodes of a game with a policy through a transform
// pipeline, as "tilebench play" does, and keeps what the policy saw: an
// animated GIF and one PNG folder per episode, each written whole or not
// at all.
package play

import (
	"errors"
	"fmt"
	"image"
	"math"
	"path/filepath"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
)

// Config says what to play. Game, Grid and Policy are required.
type Config struct {
	Game   games.Game
	Grid   *patch.Grid
	Policy vision.Policy
	// Spec is the transform pipeline between the game and the policy.
	// Default: none.
	Spec patch.Spec
	// Episodes is the number of episodes. Default 1.
	Episodes int
	// Seed is the game seed of the first episode; episode i plays seed
	// Seed+i, with pipeline and policy seed
	// DeriveSeed(Seed+i, StreamKey("play")).
	Seed uint64
	// GIF, if set, receives every frame the policy saw, episodes in a row.
	GIF *frameio.GIFWriter
	// FramesDir, if set, receives the frames the policy saw as PNGs,
	// FramesDir/episode-NNN/frame-NNNNN.png.
	FramesDir string
	// Picture, if set, gives the picture recorded for a step in place of
	// the frame the policy saw (for example that frame with the policy's
	// attention drawn on a copy); it must not change obs.
	Picture func(obs *vision.Observation) *image.RGBA
	// OnEpisode, if set, is called after each episode (i from 0).
	OnEpisode func(i int, e Episode)
}

// Episode is the outcome of one episode.
type Episode struct {
	Seed   uint64  `json:"seed"`
	Return float64 `json:"return"`
	Steps  int     `json:"steps"`
	Reason string  `json:"end"`
}

// Summary is the outcome of a run.
type Summary struct {
	Episodes []Episode
	// Mean, Min and Max are of the episodes' returns.
	Mean, Min, Max float64
	// Ends counts the episodes by how they ended (every EndReason listed).
	Ends map[string]int
	// StepsPerSecond is the steps played over the time spent in episodes.
	StepsPerSecond float64
}

// PipeSeed is the pipeline and policy seed of the episode on game seed s.
func PipeSeed(s uint64) uint64 { return patch.DeriveSeed(s, patch.StreamKey("play")) }

// Run plays the episodes. A failing episode ends the run with an error
// naming it; its PNG folder is not written.
func Run(cfg Config) (*Summary, error) {
	if cfg.Game == nil || cfg.Grid == nil || cfg.Policy == nil {
		return nil, errors.New("play: Game, Grid and Policy are required")
	}
	if cfg.Episodes <= 0 {
		cfg.Episodes = 1
	}
	if cfg.Seed > math.MaxUint64-uint64(cfg.Episodes) {
		return nil, fmt.Errorf("play: seed %d: too large for %d episodes", cfg.Seed, cfg.Episodes)
	}
	pipe, err := patch.NewPipeline(cfg.Grid, cfg.Spec)
	if err != nil {
		return nil, fmt.Errorf("play: %w", err)
	}
	ep, err := vision.NewEpisode(cfg.Game, patch.NewTokenizer(cfg.Grid), pipe, cfg.Policy)
	if err != nil {
		return nil, fmt.Errorf("play: %w", err)
	}
	sum := &Summary{Ends: map[string]int{}}
	for _, r := range []games.EndReason{games.Completed, games.Failed, games.TimeUp} {
		sum.Ends[r.String()] = 0
	}
	var steps int
	var secs float64
	for i := 0; i < cfg.Episodes; i++ {
		res, err := playOne(ep, &cfg, i)
		if err != nil {
			return nil, err
		}
		steps += res.Steps
		secs += res.Duration.Seconds()
		e := Episode{Seed: res.Seed, Return: res.Return, Steps: res.Steps, Reason: res.Reason.String()}
		sum.Episodes = append(sum.Episodes, e)
		sum.Ends[e.Reason]++
		if cfg.OnEpisode != nil {
			cfg.OnEpisode(i, e)
		}
	}
	sum.Mean, sum.Min, sum.Max = summarise(sum.Episodes)
	if secs > 0 {
		sum.StepsPerSecond = float64(steps) / secs
	}
	return sum, nil
}

// summarise returns the mean, least and largest return.
func summarise(eps []Episode) (mean, lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, e := range eps {
		mean += e.Return / float64(len(eps))
		lo = math.Min(lo, e.Return)
		hi = math.Max(hi, e.Return)
	}
	return mean, lo, hi
}

// playOne plays episode i, recording what the policy saw.
func playOne(ep *vision.Episode, cfg *Config, i int) (vision.Result, error) {
	s := cfg.Seed + uint64(i)
	var pngs *frameFolder
	if cfg.FramesDir != "" {
		var err error
		if pngs, err = newFrameFolder(filepath.Join(cfg.FramesDir, fmt.Sprintf("episode-%03d", i+1))); err != nil {
			return vision.Result{}, fmt.Errorf("play: frames: %w", err)
		}
	}
	var hook vision.StepHook
	var hookErr error
	if cfg.GIF != nil || pngs != nil {
		hook = func(t int, _ *image.RGBA, obs *vision.Observation, _ *patch.FrameRecord, _ []float64) {
			frame := obs.Frame
			if cfg.Picture != nil {
				frame = cfg.Picture(obs)
			}
			if hookErr == nil && cfg.GIF != nil {
				hookErr = cfg.GIF.Add(frame)
			}
			if hookErr == nil && pngs != nil {
				hookErr = pngs.Add(t, frame)
			}
		}
	}
	res, err := ep.Run(s, PipeSeed(s), hook)
	if err == nil {
		err = hookErr
	}
	if err != nil {
		if pngs != nil {
			pngs.Abort()
		}
		return res, fmt.Errorf("play: episode %d (seed %d): %w", i+1, s, err)
	}
	if pngs != nil {
		if err := pngs.Commit(); err != nil {
			return res, fmt.Errorf("play: frames: %w", err)
		}
	}
	return res, nil
}
