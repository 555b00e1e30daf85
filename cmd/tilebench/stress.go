package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"os"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"

	"tilebench/vision/study"
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

A study interrupted by Ctrl-C, SIGTERM or a kill continues with --resume.
Exit status: 0 all episodes recorded, 1 runtime failure, 2 usage error,
3 finished with failed episodes (the report is written; retry them with
--resume).
On a cluster, --shard i/n runs one part (or set by a Slurm job array or a
Kubernetes indexed Job, see examples/); "tilebench merge" joins the parts.

options:`

// studyFlags are the flags shared by stress and sizes.
type studyFlags struct {
	fs                                                  *flag.FlagSet
	config, name, game, variation, policy, family       *string
	patch, occlude, fill, scramble, every, noise        *string
	brightness, contrast, pixelNoise, variations, seeds *string
	corrupt                                             *string
	timeout                                             *string
	startTO                                             *string
	forceWorkers                                        *bool
	episodes, workers, resamples, shards                *int
	seed                                                *uint64
	threshold                                           *float64
	out, shard, overlay                                 *string
	resume, asJSON                                      *bool
}

func addStudyFlags(fs *flag.FlagSet, defPolicy, defPatch string, defEpisodes int) *studyFlags {
	return &studyFlags{
		fs:           fs,
		config:       fs.String("config", "", "read the study from a TOML `FILE` (see examples/study.toml); flags given as well override it"),
		name:         fs.String("name", "", "study `NAME` shown in the report (default \"study\")"),
		game:         fs.String("game", "drive", "built-in `GAME`: drive or paddle"),
		variation:    fs.String("variation", "", "game `VARIATION` the clean score is measured on (default: the game's default)"),
		policy:       fs.String("policy", defPolicy, "the policy: expert (scripted, reads game state), fresh (untrained --family), a weights `FILE` ({patch} is replaced by each patch size), exec:COMMAND ARGS or tcp://HOST:PORT"),
		family:       fs.String("family", "attention", "network `FAMILY` for --policy fresh and for training: attention, posattention, mlp, meanpool"),
		timeout:      fs.String("policy-timeout", "", "per-step timeout of an external policy, e.g. 5s (default: the protocol's)"),
		startTO:      fs.String("policy-start-timeout", "", "longest wait for an external policy to start and answer the handshake, e.g. 2m (default 30s)"),
		patch:        fs.String("patch", defPatch, "patch `SIZES` in pixels, a list, e.g. 4,8,16 or 4:16:4"),
		occlude:      fs.String("occlude", "", "occlusion `LIST`: none, random:R, block:R, bands:R, sweep:R, mask:FILE.png; e.g. random:0:0.9:0.1,block:0.3"),
		fill:         fs.String("fill", "", "what occluded tokens become: black (default), mean, noise or drop"),
		scramble:     fs.String("scramble", "", "scramble `LIST`: none, full, partial:F, local:K; e.g. none,full"),
		every:        fs.String("every", "", "scramble schedule `LIST`: 0 = one permutation per episode, T = a new one every T steps; e.g. 0,10,100"),
		noise:        fs.String("noise-tokens", "", "`LIST` of numbers of added noise tokens, e.g. 0,16,64"),
		brightness:   fs.String("brightness", "", "`LIST` of brightness offsets, e.g. -0.2,0,0.2"),
		contrast:     fs.String("contrast", "", "`LIST` of contrast factors, e.g. 0.5,1"),
		pixelNoise:   fs.String("pixel-noise", "", "`LIST` of Gaussian pixel noise σ, e.g. 0:0.2:0.05"),
		corrupt:      fs.String("corrupt", "", "`LIST` of frame corruptions (docs/studies.md), each none, KIND:VALUE, KIND:sN, KIND:sA:sB or KIND:START:STOP:STEP, several in one cell joined by +; e.g. blur:s1:s5,jpeg:40,shift:3:0"),
		variations:   fs.String("variations", "", "`LIST` of game variations (held-out palettes), e.g. default,dusk"),
		seeds:        fs.String("seeds", "", "game seed `RANGE`: held-out (default), train, or START:COUNT"),
		episodes:     fs.Int("episodes", defEpisodes, "episodes per cell"),
		seed:         fs.Uint64("seed", 0, "study seed; every episode's seeds derive from it (docs/studies.md)"),
		workers:      fs.Int("workers", 0, "parallel workers (0: one per core); results do not depend on it"),
		forceWorkers: fs.Bool("force-workers", false, "accept --workers above 4 per core"),
		resamples:    fs.Int("resamples", 0, "bootstrap resamples (default 2000)"),
		threshold:    fs.Float64("threshold", 0, "retention below which an axis counts as broken (default 0.5)"),
		out:          fs.String("out", "", "study `DIR` (required): results, report, strips"),
		resume:       fs.Bool("resume", false, "continue the study in --out: keep finished episodes, retry failed ones"),
		shard:        fs.String("shard", "", "run only shard `i/n` of the study (0 ≤ i < n); default from SLURM_ARRAY_TASK_ID/SLURM_ARRAY_TASK_COUNT or JOB_COMPLETION_INDEX with --shards"),
		shards:       fs.Int("shards", 0, "number of shards when the index comes from JOB_COMPLETION_INDEX (a Kubernetes indexed Job's completions)"),
		asJSON:       fs.Bool("json", false, "print a machine-readable summary"),
		overlay:      fs.String("overlay", "", "draw the policy's attention on the report's strips: attention, top:K or attention+top:K"),
	}
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
	set := map[string]bool{}
	sf.fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	useStr := func(name string, dst *string, v string) {
		if set[name] || *sf.config == "" {
			*dst = v
		}
	}
	useAxis := func(name string, dst *study.Axis, v string) {
		if set[name] || (*sf.config == "" && v != "") {
			*dst = study.ParseAxis(v)
		}
	}
	d.Kind = kind
	useStr("name", &d.Name, *sf.name)
	useStr("game", &d.Game, *sf.game)
	useStr("variation", &d.Variation, *sf.variation)
	useStr("policy", &d.Policy.Source, *sf.policy)
	useStr("family", &d.Policy.Family, *sf.family)
	useStr("policy-timeout", &d.Policy.Timeout, *sf.timeout)
	useStr("policy-start-timeout", &d.Policy.StartTimeout, *sf.startTO)
	useStr("fill", &d.Axes.Fill, *sf.fill)
	useStr("seeds", &d.Seeds, *sf.seeds)
	useStr("overlay", &d.Overlay, *sf.overlay)
	useAxis("patch", &d.Patch, *sf.patch)
	useAxis("occlude", &d.Axes.Occlude, *sf.occlude)
	useAxis("scramble", &d.Axes.Scramble, *sf.scramble)
	useAxis("every", &d.Axes.Every, *sf.every)
	useAxis("noise-tokens", &d.Axes.NoiseTokens, *sf.noise)
	useAxis("brightness", &d.Axes.Brightness, *sf.brightness)
	useAxis("contrast", &d.Axes.Contrast, *sf.contrast)
	useAxis("pixel-noise", &d.Axes.PixelNoise, *sf.pixelNoise)
	useAxis("corrupt", &d.Axes.Corrupt, *sf.corrupt)
	useAxis("variations", &d.Axes.Variations, *sf.variations)
	if set["episodes"] || *sf.config == "" {
		d.Episodes = *sf.episodes
	}
	if set["seed"] || *sf.config == "" {
		d.Seed = *sf.seed
	}
	if set["workers"] || *sf.config == "" {
		d.Workers = *sf.workers
	}
	if set["force-workers"] {
		d.ForceWorkers = *sf.forceWorkers
	}
	if err := refuseZero(sf.fs, "resamples", "threshold"); err != nil {
		return nil, err
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
	// A single weights file without --patch: take the patch size from it.
	if !set["patch"] && len(d.Patch) == 0 {
		if ps, ok := study.PatchOfPolicy(d.Policy.Source); ok {
			d.Patch = study.Axis{strconv.Itoa(ps)}
		}
	}
	if err := d.Normalize(); err != nil {
		return nil, usagef("%v", err)
	}
	return d, nil
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
	s, _, err := study.ShardFromEnv(os.Getenv, *sf.shards)
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
}

// runStudy runs a planned study with a progress bar and signal handling,
// and prints the outcome.
func runStudyCLI(ctx *runContext, p *study.Plan, sf *studyFlags, args []string, what string) error {
	shard, err := sf.shardOf()
	if err != nil {
		return err
	}
	dir := *sf.out
	sctx, stop := interruptible()
	defer stop()
	out, err := runPlan(sctx, ctx, p, dir, *sf.resume, shard, commandLine(args), what)
	if err != nil {
		return err
	}
	if err := study.WriteReport(dir); err != nil {
		return err
	}
	if err := printOutcome(ctx, p, dir, shard, out, *sf.asJSON); err != nil {
		return err
	}
	return failedEpisodes(out, dir)
}

// failedEpisodes is the exitError of a study run that left failed
// episodes (exit status ExitFailedEpisodes), or nil.
func failedEpisodes(out *study.Outcome, dir string) error {
	if out.Failed == 0 {
		return nil
	}
	return exitError{ExitFailedEpisodes, fmt.Errorf("%d of %d episodes failed (see %s, field \"failure\"); retry them with --resume",
		out.Failed, out.Total, filepath.Join(dir, study.ResultsFile))}
}

func shardUnits(p *study.Plan, s study.Shard) int {
	n := 0
	for u := range p.Units() {
		if s.Owns(u) {
			n++
		}
	}
	return n
}

func printOutcome(ctx *runContext, p *study.Plan, dir string, shard study.Shard, out *study.Outcome, asJSON bool) error {
	rep := filepath.Join(dir, "report.html")
	sps := 0.0
	if out.Elapsed > 0 {
		sps = float64(out.Steps) / out.Elapsed.Seconds()
	}
	if asJSON {
		b, err := json.MarshalIndent(studyJSON{Format: 1, Dir: dir, Study: p.Fingerprint, Report: rep, Shard: shard.String(),
			Total: out.Total, Kept: out.Kept, Ran: out.Ran, Failed: out.Failed, Seconds: out.Elapsed.Seconds(), StepsPer: sps}, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(ctx.stdout, string(b))
		return nil
	}
	fmt.Fprintf(ctx.stdout, "study %s: %d cells × %d episodes", p.Fingerprint, len(p.Cells), p.Def.Episodes)
	if !shard.Whole() {
		fmt.Fprintf(ctx.stdout, " (shard %s: %d episodes)", shard, out.Total)
	}
	fmt.Fprintf(ctx.stdout, "; %d played now, %d kept from before, %d failed; %.0f steps/s\n", out.Ran, out.Kept, out.Failed, sps)
	if out.Failed > 0 {
		fmt.Fprintf(ctx.stdout, "failed episodes are in %s (field \"failure\"); retry them with --resume\n", filepath.Join(dir, study.ResultsFile))
	}
	fmt.Fprintf(ctx.stdout, "report: %s\n", rep)
	return nil
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
		return usagef("%v", err)
	}
	return runStudyCLI(ctx, p, sf, append([]string{"stress"}, args...), "stress")
}
