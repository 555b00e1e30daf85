package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"tilebench/games"
	_ "tilebench/games/all" // the built-in games
	"tilebench/internal/atomicfile"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/study"
)

const playUsage = `play --game drive|paddle [--policy expert] [options]

Plays episodes of a built-in game with a policy and prints one line per
episode (seed, return, steps, how it ended) and a summary. The frames the
policy saw can be kept as an animated GIF (--gif) and as PNG files
(--frames, one folder per episode).

Episodes use seeds S, S+1, ...; the default S is the first held-out seed
(` + "1000000" + `). Training seeds are 0..999999, held-out seeds
1000000..1999999; see docs/games.md.

examples:
  tilebench play --game drive --policy expert --episodes 5
  tilebench play --game paddle --policy expert --episodes 20 --seed 1000000 --variation orchid+drifter --json
  tilebench play --game drive --variation glacier+clutter --episodes 1 --gif drive.gif --frames frames/

options:`

func init() {
	register(&command{name: "play", summary: "play episodes of a built-in game with a policy; record what it saw", run: runPlay})
}

// playEpisode is one episode in the --json output.
type playEpisode struct {
	Seed   uint64  `json:"seed"`
	Return float64 `json:"return"`
	Steps  int     `json:"steps"`
	Reason string  `json:"end"`
}

// playSummary is the --json output.
type playSummary struct {
	Format     int            `json:"format"`
	Command    string         `json:"command"`
	Game       string         `json:"game"`
	Variation  string         `json:"variation"`
	Frame      sizeJSON       `json:"frame"`
	Grid       string         `json:"grid"`
	Policy     string         `json:"policy"`
	ReadsState bool           `json:"reads_state"`
	Episodes   []playEpisode  `json:"episodes"`
	Mean       float64        `json:"mean_return"`
	Min        float64        `json:"min_return"`
	Max        float64        `json:"max_return"`
	Ends       map[string]int `json:"ends"`
	StepsPerS  float64        `json:"steps_per_second"`
	GIF        string         `json:"gif,omitempty"`
	FramesDir  string         `json:"frames_dir,omitempty"`
	Caution    string         `json:"caution"`
}

// playCaution goes with every play result.
const playCaution = "simulated results are not a safety certification: before deploying a policy on a vehicle or robot, defer to the applicable safety standards, local regulations and licensed practice"

// loadPolicy turns a --policy value into a policy for game g whose frames
// are cut on grid. Only the built-in scripted experts are wired here;
// weights files and external processes are added beside "expert".
func loadPolicy(name string, g games.Game, grid *patch.Grid, ext *externalOptions) (vision.Policy, error) {
	if isExternal(name) {
		return openExternal(name, g, grid, ext)
	}
	switch name {
	case "expert":
		pol, ok := vision.NewExpertPolicy(g)
		if !ok {
			return nil, fmt.Errorf("game %s ships no scripted expert", g.Spec().Name)
		}
		return pol, nil
	}
	return nil, usagef("play: --policy %q: want expert, a .safetensors file, exec:... or tcp://...", name)
}

// isWeightsFile reports whether a --policy value names a weights file.
func isWeightsFile(name string) bool { return strings.HasSuffix(name, ".safetensors") }

// loadWeights loads a policy from a weights file for game g. Unless the
// patch size was given on the command line, the file's own grid is used;
// either way the file must fit the game's frames, grid and action space.
func loadWeights(path string, g games.Game, grid *patch.Grid, patchGiven bool) (vision.Policy, *patch.Grid, error) {
	n, err := nets.Load(path)
	if err != nil {
		return nil, nil, fmt.Errorf("play: %w", err)
	}
	if !patchGiven {
		grid = n.Grid()
	}
	if err := errors.Join(study.CheckGeometry(path, n, g.Spec(), grid), study.CheckGame(path, g.Spec())); err != nil {
		return nil, nil, fmt.Errorf("play: %w", err)
	}
	return n, grid, nil
}

// autoPatch picks the patch size for a frame: the first of 8, 7, 6, 12, 4
// that divides both sides, else 8 with padding.
func autoPatch(w, h int) int {
	for _, p := range []int{8, 7, 6, 12, 4} {
		if w%p == 0 && h%p == 0 {
			return p
		}
	}
	return 8
}

func runPlay(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "play", playUsage)
	game := fs.String("game", "", "game to play: "+strings.Join(games.Names(), " or ")+" (e.g. --game drive)")
	policy := fs.String("policy", "expert", "policy: expert (the game's scripted expert, reads the true state), a weights FILE.safetensors, or an external policy exec:COMMAND... / tcp://HOST:PORT (docs/policy-protocol.md) (e.g. --policy 'exec:python3 examples/policy_stdlib.py')")
	episodes := fs.Int("episodes", 5, "number of episodes, 1 to 100000 (e.g. --episodes 20)")
	seed := fs.Uint64("seed", games.HeldOutSeedStart, "seed of the first episode; the next ones count up (e.g. --seed 1000000)")
	variation := fs.String("variation", "", "game variation, names joined with + (e.g. --variation glacier+clutter)")
	size := fs.String("size", "", "frame size WxH instead of the game's default (drive only) (e.g. --size 64x64)")
	patchSz := fs.String("patch", "", "patch size N or WxH the frames are cut into; default a size that divides the frame (e.g. --patch 8)")
	corrupt := fs.String("corrupt", "", corruptFlagHelp)
	gifPath := fs.String("gif", "", "write the frames the policy saw, all episodes in a row, as an animated GIF (e.g. --gif play.gif)")
	framesDir := fs.String("frames", "", "write the frames the policy saw as PNGs, DIR/episode-NNN/frame-NNNNN.png (e.g. --frames out/)")
	fps := fs.Float64("fps", 20, "GIF frames a second, 1 to 100 (e.g. --fps 10)")
	asJSON := fs.Bool("json", false, "print the episodes and summary as one JSON document (\"format\": 1) (e.g. --json)")
	ext := addExternalFlags(fs)
	ov := addOverlayFlags(fs, false)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := ov.parse("play"); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usagef("play: unexpected argument %q (options go before, as --name value)", fs.Arg(0))
	case *game == "":
		return usagef("play: --game is required (%s)", strings.Join(games.Names(), " or "))
	case *episodes < 1 || *episodes > 100000:
		return usagef("play: --episodes %d: want 1 to 100000", *episodes)
	case !(*fps >= 1 && *fps <= 100):
		return usagef("play: --fps %v: want 1 to 100", *fps)
	case *seed > math.MaxUint64-uint64(*episodes):
		return usagef("play: --seed %d: too large for %d episodes", *seed, *episodes)
	}
	if err := checkCorrupt("play", *corrupt); err != nil {
		return err
	}
	if err := checkOutputs(*gifPath, *framesDir); err != nil {
		return usagef("play: %v", err)
	}
	opt := games.Options{Variation: *variation}
	if *size != "" {
		w, h, err := patch.ParseSize(*size)
		if err != nil {
			return usagef("play: --size: %v", err)
		}
		opt.Width, opt.Height = w, h
	}
	g, err := games.New(*game, opt)
	if err != nil {
		return usagef("play: %v", err)
	}
	sp := g.Spec()
	pw := autoPatch(sp.Width, sp.Height)
	ph := pw
	if *patchSz != "" {
		if pw, ph, err = patch.ParseSize(*patchSz); err != nil {
			return usagef("play: --patch: %v", err)
		}
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: pw, PatchH: ph})
	if err != nil {
		return usagef("play: --patch: %v", err)
	}
	var pol vision.Policy
	if isWeightsFile(*policy) {
		pol, grid, err = loadWeights(*policy, g, grid, *patchSz != "")
	} else {
		pol, err = loadPolicy(*policy, g, grid, ext)
	}
	if err != nil {
		return err
	}
	defer closePolicy(pol)
	paint, err := ov.newPainter("play", pol, *policy)
	if err != nil {
		return err
	}
	pipe, err := patch.NewPipeline(grid, patch.Spec{Corrupt: *corrupt})
	if err != nil {
		return fmt.Errorf("play: %w", err)
	}
	ep, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, pol)
	if err != nil {
		return fmt.Errorf("play: %w", err)
	}
	var gw *frameio.GIFWriter
	if *gifPath != "" {
		gw = &frameio.GIFWriter{Delay: int(math.Round(100 / *fps))}
	}

	sum := playSummary{Format: 1, Command: "play", Game: sp.Name, Variation: sp.Variation,
		Frame: sizeJSON{Width: sp.Width, Height: sp.Height, Channels: 3}, Grid: grid.String(),
		Policy: *policy, ReadsState: pol.Info().ReadsState, Ends: map[string]int{},
		GIF: *gifPath, FramesDir: *framesDir, Caution: playCaution}
	for _, r := range []games.EndReason{games.Completed, games.Failed, games.TimeUp} {
		sum.Ends[r.String()] = 0
	}
	prog := newProgress(ctx.stderr, *episodes, "episodes")
	var totalSteps int
	var totalTime float64
	var hookErr error
	for i := 0; i < *episodes; i++ {
		s := *seed + uint64(i)
		var hook vision.StepHook
		var pngs *frameFolder
		if *framesDir != "" {
			dir := filepath.Join(*framesDir, fmt.Sprintf("episode-%03d", i+1))
			if pngs, err = newFrameFolder(dir); err != nil {
				return fmt.Errorf("play: --frames: %w", err)
			}
		}
		if gw != nil || pngs != nil {
			hook = func(t int, _ *image.RGBA, obs *vision.Observation, _ *patch.FrameRecord, _ []float64) {
				frame := obs.Frame
				if paint != nil {
					frame = paint.seen(obs)
				}
				if hookErr == nil && gw != nil {
					hookErr = gw.Add(frame)
				}
				if hookErr == nil && pngs != nil {
					hookErr = pngs.Add(t, frame)
				}
			}
		}
		res, err := ep.Run(s, patch.DeriveSeed(s, patch.StreamKey("play")), hook)
		if err != nil {
			if pngs != nil {
				pngs.Abort()
			}
			return fmt.Errorf("play: episode %d (seed %d): %w", i+1, s, err)
		}
		if hookErr != nil {
			if pngs != nil {
				pngs.Abort()
			}
			return fmt.Errorf("play: episode %d (seed %d): %w", i+1, s, hookErr)
		}
		if pngs != nil {
			if err := pngs.Commit(); err != nil {
				return fmt.Errorf("play: --frames: %w", err)
			}
		}
		totalSteps += res.Steps
		totalTime += res.Duration.Seconds()
		e := playEpisode{Seed: s, Return: res.Return, Steps: res.Steps, Reason: res.Reason.String()}
		sum.Episodes = append(sum.Episodes, e)
		sum.Ends[e.Reason]++
		if !*asJSON {
			fmt.Fprintf(ctx.stdout, "episode %-4d seed %-8d return %10.2f  steps %5d  %s\n", i+1, e.Seed, e.Return, e.Steps, e.Reason)
		}
		prog.Set(i + 1)
	}
	prog.Done()
	sum.Min, sum.Max = math.Inf(1), math.Inf(-1)
	for _, e := range sum.Episodes {
		sum.Mean += e.Return / float64(len(sum.Episodes))
		sum.Min = math.Min(sum.Min, e.Return)
		sum.Max = math.Max(sum.Max, e.Return)
	}
	if totalTime > 0 {
		sum.StepsPerS = float64(totalSteps) / totalTime
	}
	if gw != nil {
		if err := atomicfile.Write(*gifPath, gw.Encode); err != nil {
			return fmt.Errorf("play: --gif: %w", err)
		}
	}
	if *asJSON {
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

// frameFolder writes one episode's PNG frames into a hidden staging
// folder beside dir and renames it to dir when the episode is done, so dir
// only ever holds a whole episode. (Frames are not synced one by one: the
// folder is the unit that appears or not.)
type frameFolder struct {
	dir, stage string
	enc        png.Encoder
	buf        bytes.Buffer
}

func newFrameFolder(dir string) (*frameFolder, error) {
	parent := filepath.Dir(dir)
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return nil, err
	}
	stage, err := os.MkdirTemp(parent, "."+filepath.Base(dir)+".tmp-")
	if err != nil {
		return nil, err
	}
	return &frameFolder{dir: dir, stage: stage, enc: png.Encoder{CompressionLevel: png.BestSpeed}}, nil
}

// Add writes frame t.
func (f *frameFolder) Add(t int, img image.Image) error {
	f.buf.Reset()
	if err := f.enc.Encode(&f.buf, img); err != nil {
		return err
	}
	path := filepath.Join(f.stage, frameio.FrameName(t))
	if err := os.WriteFile(path, f.buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

// Commit replaces dir with the staged frames.
func (f *frameFolder) Commit() error {
	if err := os.RemoveAll(f.dir); err != nil {
		f.Abort()
		return fmt.Errorf("replace %s: %w", f.dir, err)
	}
	if err := os.Rename(f.stage, f.dir); err != nil {
		f.Abort()
		return fmt.Errorf("write %s: %w", f.dir, err)
	}
	return nil
}

// Abort removes the staged frames.
func (f *frameFolder) Abort() { os.RemoveAll(f.stage) }
