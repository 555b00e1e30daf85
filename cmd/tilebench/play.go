package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"

	"tilebench/games"
	_ "tilebench/games/all" // the built-in games
	"tilebench/internal/atomicfile"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
	"tilebench/vision/play"
	"tilebench/vision/policies"
)

const playUsage = `play --game drive|paddle [--policy expert] [options]

Plays episodes of a built-in game with a policy and prints one line per
episode (seed, return, steps, how it ended) and a summary. The transform
options (--occlude, --scramble, ...) change what the policy sees; the
frames it saw can be kept as an animated GIF (--gif) and as PNG files
(--frames, one folder per episode).

Episodes use seeds S, S+1, ...; the default S is the first held-out seed
(` + "1000000" + `). Training seeds are 0..999999, held-out seeds
1000000..1999999; see docs/games.md.

examples:
  tilebench play --game drive --policy expert --episodes 5
  tilebench play --game paddle --policy expert --episodes 20 --seed 1000000 --variation orchid+drifter --json
  tilebench play --game drive --variation tarn+clutter --episodes 1 --gif drive.gif --frames frames/
  tilebench play --game drive --policy testdata/policies/drive-attention-p8.safetensors --occlude random:0.3 --gif seen.gif

options:`

func init() {
	register(&command{name: "play", summary: "play episodes of a built-in game with a policy; record what it saw", run: runPlay})
}

// playSummary is the --json output.
type playSummary struct {
	Format     int            `json:"format"`
	Command    string         `json:"command"`
	Game       string         `json:"game"`
	Variation  string         `json:"variation"`
	Frame      sizeJSON       `json:"frame"`
	Grid       string         `json:"grid"`
	Spec       string         `json:"transform,omitempty"`
	Policy     string         `json:"policy"`
	ReadsState bool           `json:"reads_state"`
	Episodes   []play.Episode `json:"episodes"`
	Mean       float64        `json:"mean_return"`
	Min        float64        `json:"min_return"`
	Max        float64        `json:"max_return"`
	Ends       map[string]int `json:"ends"`
	StepsPerS  float64        `json:"steps_per_second"`
	GIF        string         `json:"gif,omitempty"`
	FramesDir  string         `json:"frames_dir,omitempty"`
	Caution    string         `json:"caution"`
}

// playFlags are play's options.
type playFlags struct {
	game, variation, size, patch, gif, frames *string
	episodes                                  *int
	seed                                      *uint64
	fps                                       *float64
	asJSON                                    *bool
	pol                                       *policies.Flags
	tf                                        *transformFlags
	ov                                        *overlayFlags
}

func addPlayFlags(ctx *runContext) (*playFlags, func([]string) error) {
	fs := newFlags(ctx, "play", playUsage)
	f := &playFlags{
		game:      fs.String("game", "", "game to play: "+strings.Join(games.Names(), " or ")+" (e.g. --game drive)"),
		episodes:  fs.Int("episodes", 5, "number of episodes, 1 to 100000 (e.g. --episodes 20)"),
		seed:      fs.Uint64("seed", games.HeldOutSeedStart, "seed of the first episode; the next ones count up (e.g. --seed 1000000)"),
		variation: fs.String("variation", "", "game variation, names joined with + (e.g. --variation tarn+clutter)"),
		size:      fs.String("size", "", "frame size WxH instead of the game's default (drive only) (e.g. --size 64x64)"),
		patch:     fs.String("patch", "", "patch size N or WxH the frames are cut into; default a weights file's own, else a size that divides the frame (e.g. --patch 8)"),
		gif:       fs.String("gif", "", "write the frames the policy saw, all episodes in a row, as an animated GIF (e.g. --gif play.gif)"),
		frames:    fs.String("frames", "", "write the frames the policy saw as PNGs, DIR/episode-NNN/frame-NNNNN.png (e.g. --frames out/)"),
		fps:       fs.Float64("fps", 20, "GIF frames a second, 1 to 100 (e.g. --fps 10)"),
		asJSON:    fs.Bool("json", false, "print the episodes and summary as one JSON document (\"format\": 1) (e.g. --json)"),
	}
	f.pol = policies.AddFlags(fs, policies.FlagConfig{Default: policies.Expert, InitSeed: true})
	f.tf = addTransformFlags(fs, patch.Spec{})
	f.ov = addOverlayFlags(fs, false)
	return f, func(args []string) error {
		if err := parseFlags(fs, args); err != nil {
			return err
		}
		if err := f.ov.parse("play"); err != nil {
			return err
		}
		if fs.NArg() > 0 {
			return usagef("play: unexpected argument %q (options go before, as --name value)", fs.Arg(0))
		}
		return nil
	}
}

func (f *playFlags) check() error {
	switch {
	case *f.game == "":
		return usagef("play: --game is required (%s)", strings.Join(games.Names(), " or "))
	case *f.episodes < 1 || *f.episodes > 100000:
		return usagef("play: --episodes %d: want 1 to 100000", *f.episodes)
	case !(*f.fps >= 1 && *f.fps <= 100):
		return usagef("play: --fps %v: want 1 to 100", *f.fps)
	case *f.seed > math.MaxUint64-uint64(*f.episodes):
		return usagef("play: --seed %d: too large for %d episodes", *f.seed, *f.episodes)
	}
	return nil
}

// openGame is the game of --game, --variation and --size.
func openGame(name, variation, size string) (games.Game, error) {
	opt := games.Setup{Variation: variation}
	if size != "" {
		w, h, err := patch.ParseSize(size)
		if err != nil {
			return nil, usagef("--size: %v", err)
		}
		opt.Width, opt.Height = w, h
	}
	g, err := games.Build(name, opt)
	if err != nil {
		return nil, usagef("%v", err)
	}
	return g, nil
}

// openPolicy opens the --policy of f for g on the grid of --patch.
func openPolicy(f *policies.Flags, g games.Game, patchSize string) (vision.Policy, *patch.Grid, error) {
	opt, err := f.Options()
	if err != nil {
		return nil, nil, err
	}
	grid, err := policies.GridFor(f.Source, g.Spec(), patchSize)
	if err != nil {
		return nil, nil, err
	}
	pol, err := policies.Open(f.Source, g, grid, opt)
	if err != nil {
		return nil, nil, err
	}
	return pol, grid, nil
}

func runPlay(ctx *runContext, args []string) error {
	f, parse := addPlayFlags(ctx)
	if err := parse(args); err != nil {
		return err
	}
	if err := f.check(); err != nil {
		return err
	}
	spec, err := f.tf.Spec()
	if err != nil {
		return fmt.Errorf("play: %w", err)
	}
	if err := checkOutputs(*f.gif, *f.frames); err != nil {
		return usagef("play: %v", err)
	}
	g, err := openGame(*f.game, *f.variation, *f.size)
	if err != nil {
		return fmt.Errorf("play: %w", err)
	}
	pol, grid, err := openPolicy(f.pol, g, *f.patch)
	if err != nil {
		return fmt.Errorf("play: %w", err)
	}
	defer policies.Close(pol)
	paint, err := f.ov.newPainter("play", pol, f.pol.Source)
	if err != nil {
		return err
	}
	cfg := play.Config{Game: g, Grid: grid, Policy: pol, Spec: spec, Episodes: *f.episodes, Seed: *f.seed, FramesDir: *f.frames}
	if paint != nil {
		cfg.Picture = paint.seen
	}
	if *f.gif != "" {
		cfg.GIF = &frameio.GIFWriter{Delay: int(math.Round(100 / *f.fps))}
	}
	prog := newProgress(ctx.stderr, *f.episodes, "episodes")
	cfg.OnEpisode = func(i int, e play.Episode) {
		if !*f.asJSON {
			fmt.Fprintf(ctx.stdout, "episode %-4d seed %-8d return %10.2f  steps %5d  %s\n", i+1, e.Seed, e.Return, e.Steps, e.Reason)
		}
		prog.Set(i + 1)
	}
	res, err := play.Run(cfg)
	prog.Done()
	if err != nil {
		return err
	}
	if cfg.GIF != nil {
		if err := atomicfile.Write(*f.gif, cfg.GIF.Encode); err != nil {
			return fmt.Errorf("play: --gif: %w", err)
		}
	}
	sp := g.Spec()
	sum := playSummary{Format: 1, Command: "play", Game: sp.Name, Variation: sp.Variation,
		Frame: sizeJSON{Width: sp.Width, Height: sp.Height, Channels: 3}, Grid: grid.String(),
		Policy: f.pol.Source, ReadsState: pol.Info().ReadsState, Episodes: res.Episodes, Mean: res.Mean, Min: res.Min,
		Max: res.Max, Ends: res.Ends, StepsPerS: res.StepsPerSecond, GIF: *f.gif, FramesDir: *f.frames, Caution: vision.Caution}
	if !spec.IsIdentity() {
		sum.Spec = spec.String()
	}
	if *f.asJSON {
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(sum)
	}
	printPlaySummary(ctx.stdout, &sum)
	return nil
}

func printPlaySummary(w io.Writer, s *playSummary) {
	who := s.Policy
	if s.ReadsState {
		who += " (reads the game state, not pixels)"
	}
	v := s.Variation
	if v == "" {
		v = "default"
	}
	fmt.Fprintf(w, "%s, variation %s, policy %s, %s\n", s.Game, v, who, s.Grid)
	if s.Spec != "" {
		fmt.Fprintf(w, "transform: %s\n", s.Spec)
	}
	var ends []string
	for _, r := range []games.EndReason{games.Completed, games.Failed, games.TimeUp} {
		ends = append(ends, fmt.Sprintf("%s %d", r, s.Ends[r.String()]))
	}
	noun := "episodes"
	if len(s.Episodes) == 1 {
		noun = "episode"
	}
	fmt.Fprintf(w, "%d %s: mean return %.2f (min %.2f, max %.2f); %s; %.0f steps/s\n",
		len(s.Episodes), noun, s.Mean, s.Min, s.Max, strings.Join(ends, ", "), s.StepsPerS)
	if s.GIF != "" {
		fmt.Fprintf(w, "wrote %s\n", s.GIF)
	}
	if s.FramesDir != "" {
		fmt.Fprintf(w, "wrote frames under %s\n", s.FramesDir)
	}
	fmt.Fprintf(w, "caution: %s\n", s.Caution)
}
