package main

import (
	"encoding/json"
	"fmt"
	"io"
	"strings"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/invariance"
	"tilebench/vision/nets"
	"tilebench/vision/policies"
)

const verifyUsage = `verify --policy SOURCE --game drive|paddle [--perms 100] [--json]

Checks how a policy's action changes when the token set it sees is
changed, on frames of a game played by the game's scripted expert (a few
held-out seeds, a few frames each). For every frame the policy acts on the
clean tokens and then on each of --perms random draws of:

  permute   the same tokens in another order (each keeps its grid cell)
  scramble  cell contents moved to other cells (positions stay put)
  noise     --noise tokens of uniform noise added
  drop      --drop tokens removed
  corrupt   with --corrupt LIST, the frame corrupted before it is cut
            (once per frame; e.g. shift:8:0:wrap moves whole patches)

and the largest and mean absolute change of the action are reported (for a
discrete game: 1 when the choice changed, 0 when not). A family declared
permutation invariant (attention, meanpool; or an external policy whose
ready message says "invariant": true) must stay within 1e-5 under
permute, else verify exits with status 1 and the figure. For the other
families the numbers measure sensitivity and are not a failure.

The transform options (--occlude, --scramble, photometric shifts, ...)
set a base transform applied to every frame first, so the figures say
how the action moves under a stress the policy already faces.

--policy takes every policy source (docs/policies.md): a weights file
(written by tilebench train), a family name (` + "attention, posattention, mlp, meanpool" + `:
an untrained network with default hyper-parameters and seed --init-seed),
fresh, expert, or an external policy (docs/policy-protocol.md).

examples:
  tilebench verify --policy attention --game paddle
  tilebench verify --policy runs/drive-attn.safetensors --game drive --perms 200 --json
  tilebench verify --policy 'exec:python3 my_policy.py' --game paddle --perms 20

options:`

func init() {
	register(&command{name: "verify", summary: "check a policy's invariance to token order, scrambles, added and dropped tokens", run: runVerify})
}

// verifyOutput is the --json output.
type verifyOutput struct {
	*invariance.Report
	Command   string `json:"command"`
	Policy    string `json:"policy"`
	Variation string `json:"variation"`
	Grid      string `json:"grid"`
	Transform string `json:"transform,omitempty"`
	Caution   string `json:"caution"`
}

// verifyFlags are verify's options.
type verifyFlags struct {
	game, variation, patch            *string
	perms, seeds, frames, noise, drop *int
	seed                              *uint64
	asJSON                            *bool
	pol                               *policies.Flags
	tf                                *transformFlags
	corrupt                           *string
}

func addVerifyFlags(ctx *runContext) (*verifyFlags, func([]string) error) {
	fs := newFlags(ctx, "verify", verifyUsage)
	f := &verifyFlags{
		game:      fs.String("game", "", "game the frames come from: "+strings.Join(games.Names(), " or ")+" (e.g. --game paddle)"),
		variation: fs.String("variation", "", "game variation, names joined with + (e.g. --variation orchid)"),
		perms:     fs.Int("perms", 100, "random draws of each perturbation per frame, 1 to 100000 (e.g. --perms 200)"),
		seeds:     fs.Int("seeds", 3, "expert rollouts frames are taken from (held-out seeds), 1 to 1000 (e.g. --seeds 5)"),
		frames:    fs.Int("frames", 4, "frames taken from each rollout, 10 steps apart, 1 to 1000 (e.g. --frames 8)"),
		noise:     fs.Int("noise", 0, "noise tokens added in the noise test; 0 = a tenth of the tokens (e.g. --noise 5)"),
		drop:      fs.Int("drop", 0, "tokens removed in the drop test; 0 = a tenth of the tokens (e.g. --drop 5)"),
		patch:     fs.String("patch", "", "patch size N or WxH; default a weights file's own, else a size that divides the frame (e.g. --patch 8)"),
		seed:      fs.Uint64("seed", 0, "seed of the perturbations (e.g. --seed 3)"),
		asJSON:    fs.Bool("json", false, "print a machine-readable report (\"format\": 1) (e.g. --json)"),
	}
	f.pol = policies.AddFlags(fs, policies.FlagConfig{InitSeed: true})
	// The base transform keeps one token per cell: noise tokens and
	// duplicates are the noise test's business (--noise).
	// --corrupt is a perturbation here, measured like the others.
	f.tf = addTransformFlags(fs, patch.Spec{}, "noise-tokens", "duplicates", "corrupt")
	f.corrupt = fs.String("corrupt", "", "also measure the action change when frames are corrupted before tokenizing, one chain joined by + as for export (e.g. --corrupt shift:3:0:wrap)")
	return f, func(args []string) error {
		if err := parseFlags(fs, args); err != nil {
			return err
		}
		if fs.NArg() > 0 {
			return usagef("verify: unexpected argument %q (options go before, as --name value)", fs.Arg(0))
		}
		return nil
	}
}

func (f *verifyFlags) check() error {
	switch {
	case f.pol.Source == "":
		return usagef("verify: --policy is required (a weights file, %s, expert, fresh, or exec:/tcp://)", strings.Join(nets.Families, ", "))
	case *f.game == "":
		return usagef("verify: --game is required (%s)", strings.Join(games.Names(), " or "))
	case *f.perms < 1 || *f.perms > 100000:
		return usagef("verify: --perms %d: want 1 to 100000", *f.perms)
	case *f.seeds < 1 || *f.seeds > 1000:
		return usagef("verify: --seeds %d: want 1 to 1000", *f.seeds)
	case *f.frames < 1 || *f.frames > 1000:
		return usagef("verify: --frames %d: want 1 to 1000", *f.frames)
	case *f.noise < 0 || *f.noise > 100000 || *f.drop < 0:
		return usagef("verify: --noise %d --drop %d: want counts ≥ 0 (noise at most 100000)", *f.noise, *f.drop)
	}
	return nil
}

func runVerify(ctx *runContext, args []string) error {
	f, parse := addVerifyFlags(ctx)
	if err := parse(args); err != nil {
		return err
	}
	if err := f.check(); err != nil {
		return err
	}
	if err := checkCorrupt("verify", *f.corrupt); err != nil {
		return err
	}
	spec, err := f.tf.Spec()
	if err != nil {
		return fmt.Errorf("verify: %w", err)
	}
	if spec.Fill == "drop" {
		return usagef("verify: --fill drop: the base transform must keep one token per cell (the drop test is --drop)")
	}
	g, err := games.Build(*f.game, games.Setup{Variation: *f.variation})
	if err != nil {
		return usagef("verify: %v", err)
	}
	pol, grid, err := openPolicy(f.pol, g, *f.patch)
	if err != nil {
		return fmt.Errorf("verify: %w", err)
	}
	defer policies.Close(pol)
	cfg := invariance.Config{Perms: *f.perms, Frames: *f.frames, Noise: *f.noise, Drop: *f.drop, Seed: *f.seed, Corrupt: *f.corrupt}
	if !spec.IsIdentity() {
		if cfg.Pipe, err = patch.NewPipeline(grid, spec); err != nil {
			return usagef("verify: %v", err)
		}
	}
	for i := 0; i < *f.seeds; i++ {
		cfg.Seeds = append(cfg.Seeds, games.HeldOut(i))
	}
	prog := newProgress(ctx.stderr, *f.seeds**f.frames, "frames")
	cfg.Progress = func(done, _ int) { prog.Set(done) }
	rep, err := invariance.Run(g, patch.NewTokenizer(grid), pol, cfg)
	prog.Done()
	if err != nil {
		return fmt.Errorf("verify: %w", err)
	}
	sp := g.Spec()
	if *f.asJSON {
		out := verifyOutput{Report: rep, Command: "verify", Policy: f.pol.Source, Variation: sp.Variation, Grid: grid.String(), Caution: vision.Caution}
		if !spec.IsIdentity() {
			out.Transform = spec.String()
		}
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(out); err != nil {
			return err
		}
	} else {
		printVerify(ctx.stdout, rep, f.pol.Source, grid, sp.Action.Kind == games.Discrete)
		if !spec.IsIdentity() {
			fmt.Fprintf(ctx.stdout, "base transform (before every perturbation): %s\n", spec)
		}
	}
	if err := rep.Err(); err != nil {
		return fmt.Errorf("verify: %w", err)
	}
	return nil
}

func printVerify(w io.Writer, r *invariance.Report, policy string, grid *patch.Grid, discrete bool) {
	what := r.Family
	if k := policies.Kind(policy); k == policies.KindFresh || k == policies.KindFamily {
		what = "an untrained " + r.Family + " network"
	}
	fmt.Fprintf(w, "verify: %s (%s) on %s, %s (%d tokens)\n", policy, what, r.Game, grid, r.Tokens)
	fmt.Fprintf(w, "%d frames from expert rollouts, %d draws of each perturbation per frame\n", r.Frames, r.Perms)
	unit := "largest absolute change over the action's values"
	switch {
	case r.Compared == "output" && discrete:
		unit = "largest absolute change of the network's logits"
	case r.Compared == "output":
		unit = "largest absolute change of the network's output (the action)"
	case discrete:
		unit = "1 when the chosen action changed, 0 when not"
	}
	fmt.Fprintf(w, "change of the action: %s\n\n", unit)
	fmt.Fprintf(w, "%-30s %12s %12s %9s %8s\n", "perturbation", "max", "mean", "measured", "refused")
	row := func(name string, s invariance.Stat) {
		fmt.Fprintf(w, "%-30s %12.4g %12.4g %9d %8d\n", name, s.Max, s.Mean, s.Count, s.Refused)
	}
	row("permute (token order)", r.Permute)
	row("scramble (cell contents)", r.Scramble)
	row(fmt.Sprintf("noise (+%d tokens)", r.Noise), r.Noised)
	row(fmt.Sprintf("drop (-%d tokens)", r.Drop), r.Dropped)
	if r.Corrupted != nil {
		row("corrupt "+r.Corrupt, *r.Corrupted)
	}
	for _, s := range []invariance.Stat{r.Noised, r.Dropped} {
		if s.Refused > 0 {
			fmt.Fprintf(w, "refused: %s\n", s.Reason)
			break
		}
	}
	fmt.Fprintln(w)
	switch {
	case r.Invariant && r.Pass:
		fmt.Fprintf(w, "declared permutation invariant: holds (largest change %.3g ≤ %.0e)\n", r.Permute.Max, r.Tol)
	case r.Invariant:
		fmt.Fprintf(w, "declared permutation invariant: FAILS (largest change %.3g > %.0e)\n", r.Permute.Max, r.Tol)
	default:
		fmt.Fprintf(w, "not declared permutation invariant: the figures above measure its sensitivity\n")
	}
	fmt.Fprintf(w, "caution: %s\n", vision.Caution)
}
