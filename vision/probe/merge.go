package probe

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"tilebench/patch/frameio"
)

// MergeOutcome summarises a merge.
type MergeOutcome struct {
	// Units merged; Missing units no folder holds; Failed those failed.
	Units, Missing, Failed int
}

// merge is MergeWith that allows a partial merge.
func merge(out string, dirs []string, writeReport bool) (*MergeOutcome, error) {
	return MergeWith(out, dirs, MergeOptions{WriteReport: writeReport, AllowPartial: true})
}

// MergeOptions are the settings of MergeWith.
type MergeOptions struct {
	// WriteReport also writes the merged probe's report.
	WriteReport bool
	// AllowPartial merges even when the folders together miss units of
	// the probe (a shard not given, or not finished); by default that is
	// an error and nothing is written.
	AllowPartial bool
}

// MergeWith joins the folders of one probe's shards (or partial runs)
// into out: probe.json without the shard, results.jsonl in canonical
// order (byte-identical to an unsharded run's) and, with
// opt.WriteReport, the report. The recording is opened again for the
// strips when it is still where the probe found it. Folders of different
// probes, or two folders disagreeing on a finished unit, are errors, as
// is an out that holds anything; without opt.AllowPartial, so are
// folders that together miss units of the probe. Nothing is written
// then.
func MergeWith(out string, dirs []string, opt MergeOptions) (*MergeOutcome, error) {
	writeReport := opt.WriteReport
	if len(dirs) == 0 {
		return nil, errors.New("merge: no probe folders given")
	}
	if entries, err := os.ReadDir(out); err == nil && len(entries) > 0 {
		return nil, fmt.Errorf("merge: %s is not empty; choose a new folder", out)
	}
	var first *Info
	var all []Record
	for _, d := range dirs {
		if absPath(d) == absPath(out) {
			return nil, fmt.Errorf("merge: %s is both an input and the output", d)
		}
		in, err := ReadInfo(d)
		if err != nil {
			return nil, fmt.Errorf("merge: %w", err)
		}
		if first == nil {
			first = in
		} else if in.Plan.Fingerprint != first.Plan.Fingerprint {
			return nil, fmt.Errorf("merge: %s holds probe %s but %s holds probe %s: not the same probe", d, in.Plan.Fingerprint, dirs[0], first.Plan.Fingerprint)
		}
		recs, _, err := ReadResults(d)
		if err != nil {
			return nil, fmt.Errorf("merge: %w", err)
		}
		for _, r := range recs {
			if r.Probe != first.Plan.Fingerprint {
				return nil, fmt.Errorf("merge: %s holds a record of probe %s", filepath.Join(d, resultsFile), r.Probe)
			}
		}
		all = append(all, sorted(latest(recs))...)
	}
	p := &first.Plan
	by := map[[2]int]Record{}
	for _, r := range all {
		if r.Cell < 0 || r.Cell >= len(p.Cells) || r.Sequence < 0 || r.Sequence >= len(p.Sequences) {
			return nil, fmt.Errorf("merge: record for cell %d sequence %d is outside the probe", r.Cell, r.Sequence)
		}
		k := [2]int{r.Cell, r.Sequence}
		prev, ok := by[k]
		if !ok || prev.Failed() {
			by[k] = r
			continue
		}
		if !r.Failed() {
			a, _ := encodeRecord(&prev)
			b, _ := encodeRecord(&r)
			if !bytes.Equal(a, b) {
				return nil, fmt.Errorf("merge: cell %d sequence %d differs between folders: the policy is not reproducible", r.Cell, r.Sequence)
			}
		}
	}
	merged := sorted(by)
	mo := &MergeOutcome{Units: len(merged), Missing: p.Units() - len(merged)}
	if mo.Missing > 0 && !opt.AllowPartial {
		return nil, fmt.Errorf("merge: the %d folders hold %d of the probe's %d units (%d missing: a shard not given or not finished); finish it with --resume, or merge anyway with --allow-partial",
			len(dirs), len(merged), p.Units(), mo.Missing)
	}
	for _, r := range merged {
		if r.Failed() {
			mo.Failed++
		}
	}
	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, fmt.Errorf("merge: %w", err)
	}
	in := *first
	in.Shard = nil
	if err := writeInfo(out, &in); err != nil {
		return nil, err
	}
	if err := writeResults(out, merged); err != nil {
		return nil, err
	}
	if writeReport {
		var src frameio.Random
		if s, err := frameio.OpenRandom(p.Config.In, frameio.Options{Width: p.Config.RawWidth, Height: p.Config.RawHeight}); err == nil {
			if i := s.Info(); i.Width == p.Input.Width && i.Height == p.Input.Height && i.Frames == p.Input.Frames {
				src = s
			}
			defer s.Close()
		}
		if err := writeProbeReport(out, src); err != nil {
			return mo, err
		}
	}
	return mo, nil
}

func absPath(p string) string {
	a, err := filepath.Abs(p)
	if err != nil {
		return p
	}
	return a
}
