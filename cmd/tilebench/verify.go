package main

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"slices"
	"strings"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/invariance"
	"tilebench/vision/nets"
)

const verifyUsage = `verify --policy FILE|FAMILY|exec:...|tcp://... --game drive|paddle [--perms 100] [--json]

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

--policy takes a weights file (written by tilebench train), a family name
(` + "attention, posattention, mlp, meanpool" + `: an untrained network with
default hyper-parameters and seed --init-seed), or an external policy
(docs/policy-protocol.md).

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
	Caution   string `json:"caution"`
}

func runVerify(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "verify", verifyUsage)
	policy := fs.String("policy", "", "weights file, family name or external policy (e.g. --policy attention)")
	game := fs.String("game", "", "game the frames come from: "+strings.Join(games.Names(), " or ")+" (e.g. --game paddle)")
	variation := fs.String("variation", "", "game variation, names joined with + (e.g. --variation orchid)")
	perms := fs.Int("perms", 100, "random draws of each perturbation per frame, 1 to 100000 (e.g. --perms 200)")
	seeds := fs.Int("seeds", 3, "expert rollouts frames are taken from (held-out seeds), 1 to 1000 (e.g. --seeds 5)")
	frames := fs.Int("frames", 4, "frames taken from each rollout, 10 steps apart, 1 to 1000 (e.g. --frames 8)")
	noise := fs.Int("noise", 0, "noise tokens added in the noise test; 0 = a tenth of the tokens (e.g. --noise 5)")
	drop := fs.Int("drop", 0, "tokens removed in the drop test; 0 = a tenth of the tokens (e.g. --drop 5)")
	patchSz := fs.String("patch", "", "patch size N or WxH for a family name or an external policy; default a size that divides the frame (e.g. --patch 8)")
	initSeed := fs.Uint64("init-seed", 1, "parameter seed of an untrained family network (e.g. --init-seed 7)")
	seed := fs.Uint64("seed", 0, "seed of the perturbations (e.g. --seed 3)")
	corrupt := fs.String("corrupt", "", "also measure the action change when frames are corrupted before tokenizing, one list as for export (e.g. --corrupt shift:3:0:wrap)")
	asJSON := fs.Bool("json", false, "print a machine-readable report (\"format\": 1) (e.g. --json)")
	ext := addExternalFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usagef("verify: unexpected argument %q (options go before, as --name value)", fs.Arg(0))
	case *policy == "":
		return usagef("verify: --policy is required (a weights file, %s, or exec:/tcp://)", strings.Join(nets.Families, ", "))
	case *game == "":
		return usagef("verify: --game is required (%s)", strings.Join(games.Names(), " or "))
	case *perms < 1 || *perms > 100000:
		return usagef("verify: --perms %d: want 1 to 100000", *perms)
	case *seeds < 1 || *seeds > 1000:
		return usagef("verify: --seeds %d: want 1 to 1000", *seeds)
	case *frames < 1 || *frames > 1000:
		return usagef("verify: --frames %d: want 1 to 1000", *frames)
	case *noise < 0 || *noise > 100000 || *drop < 0:
		return usagef("verify: --noise %d --drop %d: want counts ≥ 0 (noise at most 100000)", *noise, *drop)
	}
	if err := checkCorrupt("verify", *corrupt); err != nil {
		return err
	}
	g, err := games.New(*game, games.Options{Variation: *variation})
	if err != nil {
		return usagef("verify: %v", err)
	}
	sp := g.Spec()
	grid, err := verifyGrid(sp, *patchSz)
	if err != nil {
		return err
	}
	var pol vision.Policy
	switch {
	case isExternal(*policy):
		if pol, err = openExternal(*policy, g, grid, ext); err != nil {
			return fmt.Errorf("verify: %w", err)
		}
		defer closePolicy(pol)
	case slices.Contains(nets.Families, *policy):
		n, err := nets.New(nets.Config{Family: *policy}, grid, sp.Action, *initSeed)
		if err != nil {
			return usagef("verify: %v", err)
		}
		pol = n
	default:
		if _, serr := os.Stat(*policy); serr != nil {
			return usagef("verify: --policy %q: not a family (%s), not exec:/tcp://, and not a readable file", *policy, strings.Join(nets.Families, ", "))
		}
		if *patchSz != "" {
			return usagef("verify: --patch applies to family names and external policies; a weights file brings its own")
		}
		n, err := nets.Load(*policy)
		if err != nil {
			return fmt.Errorf("verify: %w", err)
		}
		grid = n.Grid()
		if grid.Width != sp.Width || grid.Height != sp.Height {
			return fmt.Errorf("verify: %s expects %dx%d frames, game %s renders %dx%d", *policy, grid.Width, grid.Height, sp.Name, sp.Width, sp.Height)
		}
		if a := n.Space(); a.Kind != sp.Action.Kind || a.Dim() != sp.Action.Dim() || a.Choices() != sp.Action.Choices() {
			return fmt.Errorf("verify: %s was built for %s actions of %d values, game %s takes %s actions of %d", *policy, a.Kind, a.Dim(), sp.Name, sp.Action.Kind, sp.Action.Dim())
		}
		pol = n
	}
	cfg := invariance.Config{Perms: *perms, Frames: *frames, Noise: *noise, Drop: *drop, Seed: *seed, Corrupt: *corrupt}
	for i := 0; i < *seeds; i++ {
		cfg.Seeds = append(cfg.Seeds, games.HeldOut(i))
	}
	prog := newProgress(ctx.stderr, *seeds**frames, "frames")
	cfg.Progress = func(done, _ int) { prog.Set(done) }
	rep, err := invariance.Run(g, patch.NewTokenizer(grid), pol, cfg)
	prog.Done()
	if err != nil {
		return fmt.Errorf("verify: %w", err)
	}
	if *asJSON {
		out := verifyOutput{Report: rep, Command: "verify", Policy: *policy, Variation: sp.Variation, Grid: grid.String(), Caution: playCaution}
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(out); err != nil {
			return err
		}
	} else {
		printVerify(ctx.stdout, rep, *policy, grid, sp.Action.Kind == games.Discrete)
	}
	if err := rep.Err(); err != nil {
		return fmt.Errorf("verify: %w", err)
	}
	return nil
}

// verifyGrid is the grid for a family name or an external policy.
func verifyGrid(sp games.Spec, patchSz string) (*patch.Grid, error) {
	pw := autoPatch(sp.Width, sp.Height)
	ph := pw
	if patchSz != "" {
		var err error
		if pw, ph, err = patch.ParseSize(patchSz); err != nil {
			return nil, usagef("verify: --patch: %v", err)
		}
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: pw, PatchH: ph})
	if err != nil {
		return nil, usagef("verify: --patch: %v", err)
	}
	return grid, nil
}

func printVerify(w io.Writer, r *invariance.Report, policy string, grid *patch.Grid, discrete bool) {
	fmt.Fprintf(w, "verify: %s (%s) on %s, %s (%d tokens)\n", policy, r.Family, r.Game, grid, r.Tokens)
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
	fmt.Fprintf(w, "caution: %s\n", playCaution)
}
