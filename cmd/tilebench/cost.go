package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"strings"
	"text/tabwriter"

	"tilebench/games"
	_ "tilebench/games/all" // register the built-in games
	"tilebench/patch"
	"tilebench/vision/nets"
)

func init() {
	register(&command{name: "cost", summary: "compute cost of a policy family per patch size: parameters, FLOPs, memory, latency", run: runCost})
}

const costUsage = `cost [options]

For the frame size and action space of --game, and each patch size of
--patch, prints the cost of one step of a --family policy: its parameter
count, FLOPs per step (2·m·k·n for each m×k by k×n matrix product of the
forward pass, as in Golub & Van Loan; elementwise work not counted), the
activation memory of one forward pass, and the median latency per step
measured on this machine (one goroutine, random tokens).

  tilebench cost --game drive --family attention --patch 4,6,8,12,16
  tilebench cost --game paddle --family meanpool --patch 5,10,20 --json
  tilebench cost --game drive --family attention --key-size 32 --queries 8 --patch 8 --layers

options:`

// costRow is one patch size of the cost table.
type costRow struct {
	Patch       string           `json:"patch"`
	Cols        int              `json:"cols"`
	Rows        int              `json:"rows"`
	Tokens      int              `json:"tokens"`
	TokenDim    int              `json:"token_dim"`
	Params      int              `json:"params"`
	FLOPs       int64            `json:"flops"`
	ActBytes    int64            `json:"activation_bytes"`
	LatencyNS   int64            `json:"latency_ns,omitempty"`
	Layers      []nets.LayerCost `json:"layers"`
	Description string           `json:"grid"`
}

// costFlags are cost's options.
type costFlags struct {
	fs                       *flag.FlagSet
	game, variation, patches string
	edge                     string
	cfg                      nets.Config
	reps, steps              int
	layers, asJSON           bool
}

func addCostFlags(ctx *runContext) *costFlags {
	fs := newFlags(ctx, "cost", costUsage)
	f := &costFlags{fs: fs}
	c := &f.cfg
	fs.StringVar(&f.game, "game", "drive", "game whose frame size and action space to use: "+strings.Join(games.Names(), ", "))
	fs.StringVar(&f.variation, "variation", "", "game variation (\"\" is the default)")
	fs.StringVar(&c.Family, "family", nets.Attention, "policy family: "+strings.Join(nets.Families, ", "))
	fs.StringVar(&f.patches, "patch", "4,6,8,12,16", "comma-separated patch `SIZES`, each N or WxH")
	fs.StringVar(&f.edge, "edge", "pad", "what to do when the patch size does not divide the frame: pad, crop or strict")
	fs.IntVar(&c.KeySize, "key-size", 0, "key size (attention families; 0 = default 16)")
	fs.IntVar(&c.KeyHidden, "key-hidden", 0, "width of a hidden layer in the key function (0 = linear key)")
	fs.StringVar(&c.Value, "value", "", "value function: linear (default) or identity")
	fs.IntVar(&c.ValueSize, "value-size", 0, "width of a linear value (0 = default 16)")
	fs.IntVar(&c.Queries, "queries", 0, "number of queries (0 = default 16)")
	fs.IntVar(&c.Hidden, "hidden", 0, "width of the head's hidden layer (0 = default 32)")
	fs.IntVar(&c.TokenHidden, "token-hidden", 0, "width of meanpool's per-token layer (0 = default 32)")
	fs.IntVar(&c.Context, "context", 0, "frames of temporal context per token (0 or 1 = current frame only)")
	fs.BoolVar(&c.PrevAction, "prev-action", false, "give the policy the previous action")
	fs.BoolVar(&c.Centre, "centre", true, "subtract the token set's mean token from every token, as tilebench train does by default (--centre=false: off)")
	fs.IntVar(&f.reps, "reps", 15, "latency samples per patch size (median reported); 0 skips the latency measurement")
	fs.IntVar(&f.steps, "steps", 20, "policy steps per latency sample")
	fs.BoolVar(&f.layers, "layers", false, "also print the cost of every layer")
	fs.BoolVar(&f.asJSON, "json", false, "print a machine-readable summary (\"format\": 1) instead of the table")
	alias(fs, "key", "key-size") // cost's name before train and cost agreed
	return f
}

func runCost(ctx *runContext, args []string) error {
	f := addCostFlags(ctx)
	if err := parseFlags(f.fs, args); err != nil {
		return err
	}
	if f.fs.NArg() > 0 {
		return usagef("cost: unexpected argument %q", f.fs.Arg(0))
	}
	if f.reps < 0 || f.steps < 1 || f.reps > nets.MaxLatencySamples || f.steps > nets.MaxLatencySteps {
		return usagef("cost: --reps %d --steps %d: want reps 0..%d and steps 1..%d", f.reps, f.steps, nets.MaxLatencySamples, nets.MaxLatencySteps)
	}
	e, err := patch.ParseEdge(f.edge)
	if err != nil {
		return usagef("cost: --edge: %v", err)
	}
	g, err := games.Build(f.game, games.Setup{Variation: f.variation})
	if err != nil {
		return usagef("cost: --game: %v", err)
	}
	var sizes [][2]int
	for _, s := range strings.Split(f.patches, ",") {
		w, h, err := patch.ParseSize(s)
		if err != nil {
			return usagef("cost: --patch: %v", err)
		}
		sizes = append(sizes, [2]int{w, h})
	}
	spec := g.Spec()
	rows, err := f.measure(ctx, spec, sizes, e)
	if err != nil {
		return err
	}
	if f.asJSON {
		cfg := f.cfg.Resolved()
		out := map[string]any{"format": 1, "game": spec.Name, "frame": []int{spec.Width, spec.Height}, "family": cfg.Family,
			"config": cfg, "action": spec.Action.Kind.String(), "flop_rule": "2·m·k·n per matrix product of the forward pass",
			"latency": map[string]any{"statistic": "median per step", "samples": f.reps, "steps_per_sample": f.steps}, "sizes": rows}
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", " ")
		return enc.Encode(out)
	}
	f.print(ctx.stdout, spec, rows)
	return nil
}

// measure fills one row per patch size: the cost model's counts and,
// unless --reps 0, the measured latency.
func (f *costFlags) measure(ctx *runContext, spec games.Spec, sizes [][2]int, e patch.Edge) ([]costRow, error) {
	var rows []costRow
	prog := newProgress(ctx.stderr, len(sizes), "measuring")
	defer prog.Done()
	for i, sz := range sizes {
		grid, err := patch.NewGrid(patch.GridConfig{Width: spec.Width, Height: spec.Height, PatchW: sz[0], PatchH: sz[1], Edge: e})
		if err != nil {
			return nil, usagef("cost: --patch %dx%d: %v", sz[0], sz[1], err)
		}
		c, err := nets.Estimate(f.cfg, grid, spec.Action)
		if err != nil {
			return nil, usagef("cost: %v", err)
		}
		row := costRow{Patch: fmt.Sprintf("%dx%d", sz[0], sz[1]), Cols: grid.Cols, Rows: grid.Rows, Tokens: c.Tokens, TokenDim: c.TokenDim,
			Params: c.Params, FLOPs: c.FLOPs, ActBytes: c.ActivationBytes, Layers: c.Layers, Description: grid.String()}
		if f.reps > 0 {
			n, err := nets.New(f.cfg, grid, spec.Action, 1)
			if err != nil {
				return nil, usagef("cost: %v", err)
			}
			d, err := nets.MeasureLatency(n, nets.RandomObservation(grid, spec.Action, 2), f.reps, f.steps)
			if err != nil {
				return nil, err
			}
			row.LatencyNS = d.Nanoseconds()
		}
		rows = append(rows, row)
		prog.Set(i + 1)
	}
	return rows, nil
}

// print writes the cost table (and, with --layers, every layer's cost).
func (f *costFlags) print(w io.Writer, spec games.Spec, rows []costRow) {
	fmt.Fprintf(w, "%s policy on %s (%dx%d frames, %s actions)\n", f.cfg.Resolved().Family, spec.Name, spec.Width, spec.Height, spec.Action.Kind)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "patch\tgrid\ttokens\ttoken dim\tparams\tMFLOP/step\tactivations KiB\tlatency µs\t")
	for _, r := range rows {
		lat := "-"
		if r.LatencyNS > 0 {
			lat = fmt.Sprintf("%.1f", float64(r.LatencyNS)/1e3)
		}
		fmt.Fprintf(tw, "%s\t%dx%d\t%d\t%d\t%d\t%.3f\t%.1f\t%s\t\n", r.Patch, r.Cols, r.Rows, r.Tokens, r.TokenDim, r.Params,
			float64(r.FLOPs)/1e6, float64(r.ActBytes)/1024, lat)
	}
	tw.Flush()
	if f.layers {
		for _, r := range rows {
			fmt.Fprintf(w, "\npatch %s layers:\n", r.Patch)
			tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
			fmt.Fprintln(tw, "  layer\tkind\tparams\tFLOPs\tactivations\t")
			for _, l := range r.Layers {
				fmt.Fprintf(tw, "  %s\t%s\t%d\t%d\t%d\t\n", l.Name, l.Kind, l.Params, l.FLOPs, l.Activations)
			}
			tw.Flush()
		}
	}
	fmt.Fprintln(w, "FLOPs: 2·m·k·n per matrix product of the forward pass; latency: median per step on this machine, one goroutine.")
}
