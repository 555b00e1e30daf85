package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"os"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"

	"tilebench/games"
	"tilebench/vision"
	"tilebench/vision/policies"
	"tilebench/vision/remote"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
	"tilebench/vision/study/runner"
	"tilebench/vision/train"
)

func init() {
	register(&command{name: "stress", summary: "sweep occlusion, scrambling, noise and photometric shifts against a policy; write the report", run: runStress})
}

const stressUsage = `stress [options] --out DIR

Runs every combination of the given axes (a cell) for --episodes episodes
on held-out game seeds, records one line per episode in DIR/results.jsonl,
and writes DIR/report.html, DIR/summary.md and DIR/cells.csv.

Lists take our range syntax: items separated by commas, each VALUE,
START:STOP:STEP (inclusive), KIND, KIND:VALUE or KIND:START:STOP:STEP
(see docs/studies.md). Example:

  tilebench stress --game drive --policy testdata/policies/drive-attention-p8.safetensors \
    --occlude random:0:0.9:0.1,block:0.3 --scramble none,full --every 0,10,100 \
    --episodes 30 --out stress-drive

Exit status: 0 all episodes recorded, 1 runtime failure, 2 usage error,
3 finished with error episodes (the report is written and counts them at
the worst return; play them again with --resume --retry-errors).

A study interrupted by Ctrl-C, SIGTERM or a kill continues with --resume.
On a cluster, --shard i/n runs one part (or set by a Slurm job array or a
Kubernetes indexed Job, see examples/); "tilebench merge" joins the parts.

options:`

// studyFlags are the flags shared by stress and sizes.
type studyFlags struct {
	fs                                   *flag.FlagSet
	config, name, game, variation        *string
	family, patch, variations, seeds     *string
	episodes, workers, resamples, shards *int
	seed                                 *uint64
	threshold, margin                    *float64
	out, shard, overlay, floor           *string
	resume, asJSON, forceWorkers         *bool
	retryErrors                          *bool
	pol                                  *policies.Flags
	tf                                   *transformFlags
}

func addStudyFlags(fs *flag.FlagSet, defPolicy, defPatch string, defEpisodes int) *studyFlags {
	sf := &studyFlags{
		fs:           fs,
		config:       fs.String("config", "", "read the study from a TOML `FILE` (see examples/study.toml); flags given as well override it"),
		name:         fs.String("name", "", "study `NAME` shown in the report (default \"study\")"),
		game:         fs.String("game", "drive", "built-in `GAME`: drive or paddle"),
		variation:    fs.String("variation", "", "game `VARIATION` the clean score is measured on (default: the game's default)"),
		family:       fs.String("family", "attention", "network `FAMILY` for --policy fresh and for training: attention, posattention, mlp, meanpool"),
		patch:        fs.String("patch", defPatch, "patch `SIZES` in pixels, a list, e.g. 4,8,16 or 4:16:4"),
		variations:   fs.String("variations", "", "`LIST` of game variations (held-out palettes), e.g. default,dusk"),
		seeds:        fs.String("seeds", "", "game seed `RANGE`: sealed (default: the sealed test range of held-out seeds), dev (the development range), held-out (both), train, or START:COUNT"),
		episodes:     fs.Int("episodes", defEpisodes, "episodes per cell"),
		seed:         fs.Uint64("seed", 0, "study seed; every episode's seeds derive from it (docs/studies.md)"),
		workers:      fs.Int("workers", 0, "parallel workers (0: one per core); results do not depend on it"),
		forceWorkers: fs.Bool("force-workers", false, "accept --workers above 4 per core"),
		resamples:    fs.Int("resamples", 0, "bootstrap resamples (default 2000)"),
		threshold:    fs.Float64("threshold", 0, "retention below which an axis counts as broken (default 0.5)"),
		out:          fs.String("out", "", "study `DIR` (required): results, report, strips"),
		resume:       fs.Bool("resume", false, "continue the study in --out: keep recorded episodes (error episodes too, unless --retry-errors)"),
		retryErrors:  fs.Bool("retry-errors", false, "with --resume, play the error episodes (policy crashes, bad actions) again instead of counting them at the worst return"),
		floor:        fs.String("floor", "", "floor `POLICY` of the normalised scale, played clean on the study's seeds: idle (default), random, or any policy source"),
		margin:       fs.Float64("margin", 0, "sizes: non-inferiority margin on the normalised scale (0 the floor, 1 the reference; default 0.05)"),
		shard:        fs.String("shard", "", "run only shard `i/n` of the study (0 ≤ i < n); default from SLURM_ARRAY_TASK_ID/SLURM_ARRAY_TASK_COUNT or JOB_COMPLETION_INDEX with --shards"),
		shards:       fs.Int("shards", 0, "number of shards when the index comes from JOB_COMPLETION_INDEX (a Kubernetes indexed Job's completions)"),
		asJSON:       fs.Bool("json", false, "print a machine-readable summary"),
		overlay:      fs.String("overlay", "", "draw the policy's attention on the report's strips: attention, top:K or attention+top:K"),
	}
	sf.pol = policies.AddFlags(fs, policies.FlagConfig{Default: defPolicy, Multi: true})
	sf.tf = addSweepFlags(fs)
	return sf
}

// definition builds the study from --config and the flags set.
func (sf *studyFlags) definition(kind string) (*study.Definition, error) {
	d := &study.Definition{}
	if *sf.config != "" {
		var err error
		if d, err = study.LoadFile(*sf.config); err != nil {
			return nil, usagef("%v", err)
		}
	}
	if _, err := sf.pol.Options(); err != nil {
		return nil, err
	}
	set := setFlags(sf.fs)
	all := *sf.config == ""
	useStr := func(name string, dst *string, v string) {
		if set[name] || all {
			*dst = v
		}
	}
	d.Kind = kind
	useStr("name", &d.Name, *sf.name)
	useStr("game", &d.Game, *sf.game)
	useStr("variation", &d.Variation, *sf.variation)
	if set["policy"] || all {
		single, list, err := sf.pol.List()
		if err != nil {
			return nil, usagef("%s: %v", kind, err)
		}
		d.Policy.Source, d.Policies = single, list
	}
	useStr("family", &d.Policy.Family, *sf.family)
	sf.policyOptions(&d.Policy, set)
	useStr("seeds", &d.Seeds, *sf.seeds)
	useStr("overlay", &d.Overlay, *sf.overlay)
	useStr("floor", &d.Floor, *sf.floor)
	if set["patch"] || (all && *sf.patch != "") {
		d.Patch = study.ParseAxis(*sf.patch)
	}
	if set["variations"] || (all && *sf.variations != "") {
		d.Axes.Variations = study.ParseAxis(*sf.variations)
	}
	sf.tf.apply(&d.Axes, all)
	if set["episodes"] || all {
		d.Episodes = *sf.episodes
	}
	if set["seed"] || all {
		d.Seed = *sf.seed
	}
	if set["workers"] || all {
		d.Workers = *sf.workers
	}
	if set["force-workers"] {
		d.ForceWorkers = *sf.forceWorkers
	}
	if err := refuseZero(sf.fs, "resamples", "threshold", "margin"); err != nil {
		return nil, err
	}
	if set["margin"] {
		d.Stats.Margin = *sf.margin
	}
	if *sf.retryErrors && !*sf.resume {
		return nil, usagef("--retry-errors goes with --resume")
	}
	if set["resamples"] {
		d.Stats.Resamples = *sf.resamples
	}
	if set["threshold"] {
		d.Stats.Threshold = *sf.threshold
	}
	if *sf.episodes <= 0 && set["episodes"] {
		return nil, usagef("--episodes %d: want at least 1", *sf.episodes)
	}
	// Weights files without --patch: Normalize takes the patch size from
	// them (Definition.OwnPatch).
	if err := d.Normalize(); err != nil {
		return nil, sf.usage(err)
	}
	if err := games.Known(d.Game); err != nil {
		if set["game"] || all {
			return nil, usagef("%s: --game: %v", kind, err)
		}
		return nil, usagef("%s: %s: game: %v", kind, *sf.config, err)
	}
	for _, l := range d.PolicyList() {
		if policies.IsTemplate(l.Source) {
			if ps, err := d.Patch.Values(""); err == nil && len(ps) == 1 {
				return nil, usagef("%s: policy %q holds {patch}, but the study has one patch size (%s): give several with --patch (e.g. --patch 4,8,16), or name the policy without {patch}", kind, l.Source, ps[0])
			}
		}
	}
	return d, nil
}

// usage is the usage error for a problem in the study definition. A bad
// value is named by its flag (--occlude) when it came from one, and by
// its key in the study file (axes.occlude) when it came from there.
func (sf *studyFlags) usage(err error) error {
	if ferr := flagError(sf.fs, *sf.config != "", err); ferr != nil {
		return ferr
	}
	if *sf.config != "" && errors.As(err, new(*study.FieldError)) {
		return usagef("%s: %v", *sf.config, err)
	}
	return usagef("%v", err)
}

// flagError is the usage error "--FLAG: problem" when err is a bad value
// of a study definition (study.FieldError) that came from a flag of fs:
// one given, or any when fromFile is false (no study file). Else nil.
func flagError(fs *flag.FlagSet, fromFile bool, err error) error {
	var fe *study.FieldError
	if !errors.As(err, &fe) {
		return nil
	}
	if name := flagOfKey(fe.Key); fs.Lookup(name) != nil && (!fromFile || setFlags(fs)[name]) {
		return usagef("--%s: %v", name, fe.Err)
	}
	return nil
}

// flagOfKey is the flag of a study file key: axes.noise_tokens is
// --noise-tokens, stats.margin --margin, policy.timeout --policy-timeout.
func flagOfKey(key string) string {
	switch key {
	case "policies":
		return "policy"
	case "policy.family":
		return "family"
	}
	key = strings.TrimPrefix(strings.TrimPrefix(key, "axes."), "stats.")
	return strings.NewReplacer(".", "-", "_", "-").Replace(key)
}

// policyOptions copies the --policy-* options given into the study's
// policy. Only options given are recorded, so that a study without them
// keeps its fingerprint.
func (sf *studyFlags) policyOptions(p *study.PolicyDef, set map[string]bool) {
	f := sf.pol
	if set["policy-timeout"] {
		p.Timeout = f.Timeout.Text
	}
	if set["policy-start-timeout"] {
		p.StartTimeout = f.StartTimeout.Text
	}
	if set["policy-obs"] {
		p.Obs = f.Obs
		if p.Obs == remote.ObsFrame {
			p.Obs = ""
		}
	}
	if set["policy-dtype"] {
		p.Dtype = f.Dtype
		if p.Dtype == remote.Uint8 {
			p.Dtype = ""
		}
	}
	if set["policy-clamp"] {
		p.Clamp = f.Clamp
	}
}

// interruptible returns a context cancelled by the first Ctrl-C or
// SIGTERM, which lets the episodes in flight finish and be recorded; a
// second signal then ends the process at once (default handling).
func interruptible() (context.Context, context.CancelFunc) {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	go func() {
		<-ctx.Done()
		stop()
	}()
	return ctx, stop
}

// shardOf resolves --shard, or the cluster's environment.
func (sf *studyFlags) shardOf() (study.Shard, error) {
	if *sf.shard != "" {
		s, err := study.ParseShard(*sf.shard)
		if err != nil {
			return s, usagef("--%v", err)
		}
		return s, nil
	}
	s, _, err := runner.ShardFromEnv(os.Getenv, *sf.shards)
	if err != nil {
		return s, usagef("%v", err)
	}
	return s, nil
}

// studyJSON is the --json summary of a study run.
type studyJSON struct {
	Format   int     `json:"format"`
	Dir      string  `json:"dir"`
	Study    string  `json:"study"`
	Report   string  `json:"report,omitempty"`
	Shard    string  `json:"shard"`
	Total    int     `json:"episodes"`
	Kept     int     `json:"kept"`
	Ran      int     `json:"ran"`
	Failed   int     `json:"failed"`
	Seconds  float64 `json:"seconds"`
	StepsPer float64 `json:"steps_per_second"`
	// Comparison is the policy comparison of a study of several policies.
	Comparison *analysis.ComparisonJSON `json:"comparison,omitempty"`
	// Caution is vision.Caution, as in the other commands' summaries.
	Caution string `json:"caution"`
}

// runStudyCLI runs a planned study (runner.Run: train, play, resume,
// analyse, report) with progress bars and signal handling, and prints the
// outcome.
func runStudyCLI(ctx *runContext, p *study.Plan, sf *studyFlags, args []string, tr *runner.TrainOptions) error {
	shard, err := sf.shardOf()
	if err != nil {
		return err
	}
	if tr != nil && !shard.Whole() {
		return usagef("sizes: --train with shard %s would train different policies in every shard; train once (tilebench train), then run the shards with --policy FILE-p{patch}.safetensors", shard)
	}
	if err := runner.CheckDir(p, *sf.out, *sf.resume, shard); err != nil {
		return err
	}
	sctx, stop := interruptible()
	defer stop()
	opt := runner.Options{Dir: *sf.out, Workers: p.Def.Workers, Resume: *sf.resume, RetryErrors: *sf.retryErrors, Shard: shard,
		LogDir: sf.pol.LogDir, Command: commandLine(args), Train: tr}
	out, err := runWithProgress(sctx, ctx, p, opt, p.Def.Kind)
	if err != nil {
		return err
	}
	if err := printOutcome(ctx, p, *sf.out, shard, out, *sf.asJSON); err != nil {
		return err
	}
	if !*sf.asJSON && out.Analysis != nil {
		printRecommendation(ctx, out.Analysis)
		for _, v := range out.Analysis.Verdicts {
			fmt.Fprintln(ctx.stdout, v.Statement)
		}
	}
	if !*sf.asJSON {
		fmt.Fprintf(ctx.stdout, "caution: %s\n", vision.Caution)
	}
	return failedEpisodes(out, *sf.out)
}

// failedEpisodes is the exitError of a study run that left failed
// episodes (exit status ExitFailedEpisodes), or nil.
func failedEpisodes(out *runner.Outcome, dir string) error {
	if out.Failed == 0 {
		return nil
	}
	return exitError{ExitFailedEpisodes, fmt.Errorf("%d of %d episodes could not be played (see %s, field \"failure\"); they count at the worst return; play them again with --resume --retry-errors",
		out.Failed, out.Total, filepath.Join(dir, study.ResultsFile))}
}

// runWithProgress is runner.Run with a progress bar for the training (if
// any) and one for the episodes.
func runWithProgress(sctx context.Context, ctx *runContext, p *study.Plan, opt runner.Options, what string) (*runner.Outcome, error) {
	var trainBar, bar *progress
	if opt.Train != nil {
		trainBar = newProgress(ctx.stderr, len(p.Patches()), "training")
		done := map[int]bool{}
		tr := *opt.Train
		tr.Progress = func(ps int, _ train.Progress) {
			done[ps] = true
			trainBar.Set(len(done) - 1)
			trainBar.Describe("training patch " + strconv.Itoa(ps))
		}
		opt.Train = &tr
	}
	opt.Progress = func(done, total int) {
		if bar == nil {
			if trainBar != nil {
				trainBar.Done()
				trainBar = nil
			}
			bar = newProgress(ctx.stderr, total, what)
		}
		bar.Set(done)
	}
	out, err := runner.Run(sctx, p, opt)
	if trainBar != nil {
		trainBar.Done()
	}
	if bar != nil {
		bar.Done()
	}
	return out, err
}

func printOutcome(ctx *runContext, p *study.Plan, dir string, shard study.Shard, out *runner.Outcome, asJSON bool) error {
	rep := filepath.Join(dir, "report.html")
	sps := 0.0
	if out.Elapsed > 0 {
		sps = float64(out.Steps) / out.Elapsed.Seconds()
	}
	if asJSON {
		sj := studyJSON{Format: 1, Dir: dir, Study: p.Fingerprint, Report: rep, Shard: shard.String(),
			Total: out.Total, Kept: out.Kept, Ran: out.Ran, Failed: out.Failed, Seconds: out.Elapsed.Seconds(), StepsPer: sps, Caution: vision.Caution}
		if out.Analysis != nil {
			sj.Comparison = out.Analysis.Comparison()
		}
		b, err := json.MarshalIndent(sj, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(ctx.stdout, string(b))
		return nil
	}
	fmt.Fprintf(ctx.stdout, "study %s: %s × %s", p.Fingerprint, plural(len(p.Cells), "cell"), plural(p.Def.Episodes, "episode"))
	if !shard.Whole() {
		fmt.Fprintf(ctx.stdout, " (shard %s: %s)", shard, plural(out.Total, "episode"))
	}
	fmt.Fprintf(ctx.stdout, "; %d played now, %d kept from before, %d failed; %.0f steps/s\n", out.Ran, out.Kept, out.Failed, sps)
	if out.Failed > 0 {
		fmt.Fprintf(ctx.stdout, "error episodes are in %s (field \"failure\"); they count at the worst return; play them again with --resume --retry-errors\n", filepath.Join(dir, study.ResultsFile))
	}
	fmt.Fprintf(ctx.stdout, "report: %s\n", rep)
	return nil
}

// plural writes n and noun, with an s when n is not 1 ("1 cell", "3 cells").
func plural(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return strconv.Itoa(n) + " " + noun + "s"
}

// commandLine quotes args as a shell would need them, for the report.
func commandLine(args []string) string {
	parts := []string{"tilebench"}
	for _, a := range args {
		if a == "" || strings.ContainsAny(a, " \t\n'\"\\$`|&;<>(){}*?[]#~") {
			a = "'" + strings.ReplaceAll(a, "'", `'\''`) + "'"
		}
		parts = append(parts, a)
	}
	return strings.Join(parts, " ")
}

func runStress(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "stress", stressUsage)
	sf := addStudyFlags(fs, "expert", "", study.DefaultEpisodes)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("stress: unexpected argument %q", fs.Arg(0))
	}
	if *sf.out == "" {
		return usagef("stress: --out DIR is required")
	}
	d, err := sf.definition("stress")
	if err != nil {
		return err
	}
	p, err := study.NewPlan(*d)
	if err != nil {
		return sf.usage(err)
	}
	return runStudyCLI(ctx, p, sf, append([]string{"stress"}, args...), nil)
}
