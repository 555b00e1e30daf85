package runner

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"

	"tilebench/internal/atomicfile"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// MergeOutcome summarises a merge.
type MergeOutcome struct {
	// Episodes is the number of records merged; Missing the episodes of
	// the study that no folder holds; Failed those recorded as failed.
	Episodes, Missing, Failed int
}

// MergeOptions are the settings of MergeWith.
type MergeOptions struct {
	// WriteReport also writes the merged study's report.
	WriteReport bool
	// AllowPartial merges even when the folders together miss episodes
	// of the study (a shard not given, or not finished); by default that
	// is an error and nothing is written.
	AllowPartial bool
}

// Merge is MergeWith with AllowPartial set: folders that miss episodes
// are merged, and MergeOutcome.Missing counts what is missing.
func Merge(out string, dirs []string, writeReport bool) (*MergeOutcome, error) {
	return MergeWith(out, dirs, MergeOptions{WriteReport: writeReport, AllowPartial: true})
}

// MergeWith combines the folders of one study's shards (or of partial
// runs) into out: study.json without the shard, results.jsonl in
// canonical order — byte-identical to an unsharded run's —, timing.jsonl,
// the strips and the report. Folders of different studies are an error,
// as is an out that already holds anything, and (unless
// opt.AllowPartial) folders that together miss episodes of the study;
// nothing is written then.
func MergeWith(out string, dirs []string, opt MergeOptions) (*MergeOutcome, error) {
	writeReport := opt.WriteReport
	if len(dirs) == 0 {
		return nil, errors.New("merge: no study folders given")
	}
	if entries, err := os.ReadDir(out); err == nil && len(entries) > 0 {
		return nil, fmt.Errorf("merge: %s is not empty; choose a new folder", out)
	}
	var first *study.Info
	var all []study.Record
	for _, d := range dirs {
		if abs(d) == abs(out) {
			return nil, fmt.Errorf("merge: %s is both an input and the output", d)
		}
		si, err := study.ReadInfo(d)
		if err != nil {
			return nil, fmt.Errorf("merge: %w", err)
		}
		if first == nil {
			first = si
		} else if si.Fingerprint != first.Fingerprint {
			return nil, fmt.Errorf("merge: %s holds study %s (%q) but %s holds study %s (%q): not the same study", d, si.Fingerprint, si.Definition.Name, dirs[0], first.Fingerprint, first.Definition.Name)
		}
		recs, _, err := study.ReadResults(d)
		if err != nil {
			return nil, fmt.Errorf("merge: %w", err)
		}
		for _, r := range recs {
			if r.Study != first.Fingerprint {
				return nil, fmt.Errorf("merge: %s holds a record of study %s", filepath.Join(d, study.ResultsFile), r.Study)
			}
		}
		all = append(all, study.Latest(recs)...)
	}
	p, err := first.Plan()
	if err != nil {
		return nil, fmt.Errorf("merge: %w", err)
	}
	// Two folders holding the same finished episode must agree.
	byUnit := map[unit]study.Record{}
	for _, r := range all {
		u := unit{r.Cell, r.Episode}
		if r.Cell < 0 || r.Cell >= len(p.Cells) || r.Episode < 0 || r.Episode >= p.Def.Episodes {
			return nil, fmt.Errorf("merge: record for cell %d episode %d is outside the study", r.Cell, r.Episode)
		}
		prev, ok := byUnit[u]
		if !ok || prev.Failed() {
			byUnit[u] = r
			continue
		}
		if !r.Failed() {
			a, _ := study.EncodeRecord(&prev)
			b, _ := study.EncodeRecord(&r)
			if !bytes.Equal(a, b) {
				return nil, fmt.Errorf("merge: cell %d episode %d differs between folders (return %v vs %v): not reproducible", r.Cell, r.Episode, prev.Return, r.Return)
			}
		}
	}
	merged := make([]study.Record, 0, len(byUnit))
	mo := &MergeOutcome{}
	for _, r := range byUnit {
		merged = append(merged, r)
		if r.Failed() {
			mo.Failed++
		}
	}
	study.SortRecords(merged)
	mo.Episodes = len(merged)
	mo.Missing = p.Units() - len(merged)
	if mo.Missing > 0 && !opt.AllowPartial {
		return nil, fmt.Errorf("merge: the %d folders hold %d of the study's %d episodes (%d missing: a shard not given or not finished); finish it with --resume, or merge anyway with --allow-partial",
			len(dirs), mo.Episodes, p.Units(), mo.Missing)
	}

	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, fmt.Errorf("merge: %w", err)
	}
	si := *first
	si.Shard = nil
	if err := study.WriteInfo(out, &si); err != nil {
		return nil, err
	}
	if err := study.WriteResults(out, merged); err != nil {
		return nil, err
	}
	var timings []study.Timing
	for _, d := range dirs {
		timings = append(timings, study.ReadTimings(d)...)
	}
	sort.SliceStable(timings, func(i, j int) bool {
		if timings[i].Cell != timings[j].Cell {
			return timings[i].Cell < timings[j].Cell
		}
		return timings[i].Episode < timings[j].Episode
	})
	if err := atomicfile.Write(filepath.Join(out, study.TimingFile), func(w io.Writer) error {
		for _, t := range timings {
			b, err := jsonLine(t)
			if err != nil {
				return err
			}
			if _, err := w.Write(b); err != nil {
				return err
			}
		}
		return nil
	}); err != nil {
		return nil, err
	}
	for _, d := range dirs {
		if err := copyDir(filepath.Join(d, study.StripsDir), filepath.Join(out, study.StripsDir)); err != nil {
			return nil, fmt.Errorf("merge: strips: %w", err)
		}
		if err := copyFileIfMissing(filepath.Join(d, analysis.FloorsFile), filepath.Join(out, analysis.FloorsFile)); err != nil {
			return nil, fmt.Errorf("merge: floors: %w", err)
		}
		if err := copyFileIfMissing(filepath.Join(d, analysis.CostsFile), filepath.Join(out, analysis.CostsFile)); err != nil {
			return nil, fmt.Errorf("merge: costs: %w", err)
		}
	}
	if writeReport {
		if err := analysis.WriteReport(out); err != nil {
			return mo, err
		}
	}
	return mo, nil
}

func abs(p string) string {
	a, err := filepath.Abs(p)
	if err != nil {
		return p
	}
	return a
}

func copyDir(src, dst string) error {
	entries, err := os.ReadDir(src)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	if err := os.MkdirAll(dst, 0o755); err != nil {
		return err
	}
	for _, e := range entries {
		if e.IsDir() || e.Name()[0] == '.' {
			continue
		}
		if err := copyFileIfMissing(filepath.Join(src, e.Name()), filepath.Join(dst, e.Name())); err != nil {
			return err
		}
	}
	return nil
}

func copyFileIfMissing(src, dst string) error {
	if _, err := os.Stat(dst); err == nil {
		return nil
	}
	data, err := os.ReadFile(src)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(dst, data)
}
