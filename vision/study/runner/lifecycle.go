package runner

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"

	"tilebench/vision/policies"
	"tilebench/vision/report"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// Run runs a study from start to end: it checks Dir, trains the policies
// (opt.Train), plays the episodes not already recorded (resuming a study
// stopped part way), rewrites results.jsonl in canonical order, measures
// the costs of a sizes study, analyses the results and, unless
// opt.NoReport, writes the report (report.html, summary.md, cells.csv).
// The results are read from disk once. A cancelled ctx stops the run
// after the episodes in flight; the error wraps ErrInterrupted and the
// study continues with opt.Resume.
func Run(ctx context.Context, p *study.Plan, opt Options) (*Outcome, error) {
	if opt.Dir == "" {
		return nil, errors.New("study: no output folder given")
	}
	if err := CheckSizesPolicy(p); err != nil {
		return nil, err
	}
	if opt.Env == nil {
		logDir := opt.LogDir
		if logDir == "" {
			logDir = filepath.Join(opt.Dir, study.LogsDir)
		}
		opt.Env = DefaultEnv(p, logDir)
	}
	if opt.Train != nil {
		if len(p.Def.Policies) > 0 {
			return nil, errors.New("study: training makes the study's one policy; a study with a list of policies plays the policies given")
		}
		if !opt.Shard.Whole() {
			return nil, fmt.Errorf("study: training in shard %s would train different policies in every shard; train once, then run the shards on the weights files", opt.Shard)
		}
		if err := prepareDir(p, opt); err != nil {
			return nil, err
		}
		if err := TrainPolicies(ctx, p, opt.Dir, *opt.Train); err != nil {
			return nil, err
		}
	}
	out, recs, err := playEpisodes(ctx, p, opt)
	if err != nil {
		return out, err
	}
	if err := recordFloors(ctx, p, opt); err != nil {
		return out, err
	}
	if opt.NoReport {
		return out, nil
	}
	if out.Analysis, err = finish(p, opt.Dir, recs); err != nil {
		return out, err
	}
	return out, nil
}

// finish measures a sizes study's costs, analyses recs and writes the report.
func finish(p *study.Plan, dir string, recs []study.Record) (*analysis.Analysis, error) {
	// A sizes study comparing policies has no cost table: the
	// recommendation is made for one policy (analysis says so).
	if p.Def.Kind == "sizes" && !p.Def.Compares() {
		costs, err := MeasureCosts(p)
		if err != nil {
			return nil, err
		}
		if err := analysis.WriteCosts(dir, costs); err != nil {
			return nil, err
		}
	}
	si, err := study.ReadInfo(dir)
	if err != nil {
		return nil, err
	}
	a, err := analysis.FromRecords(dir, si, p, recs)
	if err != nil {
		return nil, err
	}
	if err := report.Write(dir, a.ReportData(dir)); err != nil {
		return nil, err
	}
	return a, nil
}

// CheckSizesPolicy refuses a sizes study whose policy (any of its
// policies) has no cost model (the scripted expert, an external
// process): its costs could not be counted after every episode was
// played.
func CheckSizesPolicy(p *study.Plan) error {
	if p.Def.Kind != "sizes" {
		return nil
	}
	for _, l := range p.Def.PolicyList() {
		if err := sizesSource(l.Source); err != nil {
			if l.Label != "" {
				return &policies.SourceError{Err: fmt.Errorf("policy %s: %w", l.Label, err)}
			}
			return err
		}
	}
	return nil
}

func sizesSource(src string) error {
	switch policies.Kind(src) {
	case policies.KindFresh, policies.KindFamily, policies.KindFile:
		return nil
	}
	if policies.IsBaseline(src) {
		return &policies.SourceError{Err: fmt.Errorf("a sizes study needs a network with a cost model; %q is a baseline policy (use it as --floor)", src)}
	}
	if policies.Kind(src) == policies.KindExternal {
		return &policies.SourceError{Err: fmt.Errorf("a sizes study measures each patch size's compute (FLOPs, parameters) with tilebench's cost model, which %q, a process of its own, does not have; compare its patch sizes' scores with stress --patch 4,8,16 and a {patch} template instead", src)}
	}
	return &policies.SourceError{Err: fmt.Errorf("a sizes study needs a network with a cost model (fresh, a family, a weights file or --train), not %q", src)}
}
