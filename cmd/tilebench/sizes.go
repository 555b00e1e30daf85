package main

import (
	"flag"
	"fmt"
	"time"

	"tilebench/vision/stats/choose"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
	"tilebench/vision/study/runner"
	"tilebench/vision/train"
)

func init() {
	register(&command{name: "sizes", summary: "patch-size study: score against compute per patch size, Pareto front and a recommendation", run: runSizes})
}

const sizesUsage = `sizes [options] --out DIR

For each patch size, gets a policy of --family (trains it with --train,
loads --policy FILE with {patch} in its name, takes the reference policies
in testdata/policies when they cover every size, or else an untrained
one), evaluates it clean and under a stress set (default: random
occlusion 0, 0.25, 0.5 × scramble none, full; or the axes you give),
measures its cost (the cost model's FLOPs and parameters, and the
measured latency per step), and reports the score-against-cost Pareto
front with the recommendation: the cheapest patch size, within the
budget if one is given, whose probability of being beaten by the best
patch size has a 95% bootstrap interval reaching 0.5 or below.

  tilebench sizes --game drive --family attention --patch 4,6,8,12,16 --budget-us 200 --out sizes-drive
  tilebench sizes --game drive --patch 4,8,16 --train clone --train-budget 3m --out sizes-trained

options:`

func runSizes(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "sizes", sizesUsage)
	sf := addStudyFlags(fs, "", "4,6,8,12,16", study.DefaultEpisodes)
	budgetUS := fs.Float64("budget-us", 0, "recommend only patch sizes whose measured latency per step is at most this many `MICROSECONDS`")
	budgetMF := fs.Float64("budget-mflop", 0, "recommend only patch sizes costing at most this many `MFLOP` per step (the cost model's count)")
	trainM := fs.String("train", "", "train one policy per patch size first: clone (behaviour cloning), cmaes or es; policies go to DIR/policies/")
	trainB := fs.Duration("train-budget", 3*time.Minute, "training time for all patch sizes together, split evenly")
	refDir := fs.String("reference", "testdata/policies", "folder of reference policies used when --policy and --train are not given")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("sizes: unexpected argument %q", fs.Arg(0))
	}
	if *sf.out == "" {
		return usagef("sizes: --out DIR is required")
	}
	if *budgetUS != 0 && *budgetMF != 0 {
		return usagef("sizes: give --budget-us or --budget-mflop, not both")
	}
	if *budgetUS < 0 || *budgetMF < 0 {
		return usagef("sizes: a budget must be positive")
	}
	switch *trainM {
	case "", train.Clone, train.CMAES, train.ESm:
	default:
		return usagef("sizes: --train %q: want clone, cmaes or es", *trainM)
	}
	if *trainB <= 0 {
		return usagef("sizes: --train-budget %v: want a positive duration", *trainB)
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	if *trainM != "" && set["policy"] {
		return usagef("sizes: give --train or --policy, not both")
	}
	d, err := sf.definition("sizes")
	if err != nil {
		return err
	}
	d.Budget.Microseconds, d.Budget.MFLOP = *budgetUS, *budgetMF
	noAxes := d.Axes.Occlude == nil && d.Axes.Scramble == nil && d.Axes.NoiseTokens == nil && d.Axes.PixelNoise == nil &&
		d.Axes.Brightness == nil && d.Axes.Contrast == nil && d.Axes.Every == nil && d.Axes.Variations == nil && d.Axes.Corrupt == nil
	if noAxes {
		fill := d.Axes.Fill
		d.Axes = study.DefaultStressSet
		d.Axes.Fill = fill
	}
	if !set["policy"] && len(d.Policies) == 0 && (*sf.config == "" || d.Policy.Source == "expert") {
		switch {
		case *trainM != "":
			d.Policy.Source = runner.TrainTemplate(*sf.out)
		default:
			probe := *d
			probe.Policy.Source = "fresh"
			pp, err := study.NewPlan(probe)
			if err != nil {
				return sf.usage(err)
			}
			if t, ok := runner.ReferencePolicies(*refDir, d.Game, d.Policy.Family, pp.Patches()); ok {
				d.Policy.Source = t
			} else {
				d.Policy.Source = "fresh"
				fmt.Fprintf(ctx.stderr, "tilebench: no reference %s policies for %s in %s at every patch size: using untrained ones (pass --train clone to train)\n", d.Policy.Family, d.Game, *refDir)
			}
		}
	}
	if *trainM != "" && len(d.Policies) > 0 {
		return usagef("sizes: --train makes the study's one policy; a study file with a list of policies plays the policies given")
	}
	for _, l := range d.PolicyList() {
		if l.Source == "expert" {
			return usagef("sizes: the scripted expert does not read patches; give --policy, --train or a --family")
		}
	}
	p, err := study.NewPlan(*d)
	if err != nil {
		return sf.usage(err)
	}
	if err := runner.CheckSizesPolicy(p); err != nil {
		return fmt.Errorf("sizes: %w", err)
	}
	var tr *runner.TrainOptions
	if *trainM != "" {
		tr = &runner.TrainOptions{Method: *trainM, Budget: *trainB, Workers: d.Workers}
	}
	return runStudyCLI(ctx, p, sf, append([]string{"sizes"}, args...), tr)
}

// printRecommendation prints a sizes study's cost table and choice.
func printRecommendation(ctx *runContext, a *analysis.Analysis) {
	if a.Choice == nil {
		return
	}
	// What the score is, as the report's recommendation says it: the
	// normalised IQM pooled over the clean cell and the stress conditions.
	pooled := "normalised, pooled: clean"
	if n := len(a.Conds) - 1; n > 0 {
		pooled += " + " + plural(n, "stress condition")
	}
	for _, c := range a.Costs {
		mark := ""
		if j := indexOf(a.Cands, c.Patch); j >= 0 {
			if j == a.Choice.Pick {
				mark = "  ← recommended"
			} else if !a.Choice.Affordable[j] {
				mark = "  (over budget)"
			}
			fmt.Fprintf(ctx.stdout, "patch %3d: %5d tokens, %8.3f MFLOP, %7d params, %8.1f µs/step, score %s (%s)%s\n",
				c.Patch, c.Tokens, c.MFLOP, c.Params, c.LatencyUS, a.Choice.Score[j], pooled, mark)
		}
	}
	if a.Choice.Pick < 0 {
		fmt.Fprintln(ctx.stdout, "no patch size fits the budget")
	}
	if ch := a.Choice; ch.Pick >= 0 && ch.Pick == ch.Best && ch.Cheaper {
		if ch.More > 0 {
			fmt.Fprintf(ctx.stdout, "not enough evidence for a cheaper patch size within margin %g: run %s more per condition (%d in all; %.0f%% power estimate)\n",
				ch.Margin, plural(max(ch.More-a.Plan.Def.Episodes, 1), "episode"), ch.More, 100*choose.DefaultPower)
		} else {
			fmt.Fprintf(ctx.stdout, "no cheaper patch size comes within margin %g of the best\n", ch.Margin)
		}
	}
}

func indexOf(xs []int, v int) int {
	for i, x := range xs {
		if x == v {
			return i
		}
	}
	return -1
}
