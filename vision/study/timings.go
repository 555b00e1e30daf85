package study

import (
	"bytes"
	"encoding/json"
	"io"
	"os"
	"path/filepath"

	"tilebench/internal/atomicfile"
)

// ReconcileTimings rewrites dir/timing.jsonl (atomically, and only when
// something changes) to hold one line for each episode that recs holds a
// record of: the last line written for it. Lines of episodes without a
// record (a kill came between the two writes) and damaged lines are
// dropped, so that an episode played again is timed once.
func ReconcileTimings(dir string, recs []Record) error {
	path := filepath.Join(dir, TimingFile)
	data, err := os.ReadFile(path)
	if err != nil {
		return nil // no timing yet
	}
	recorded := map[episodeKey]bool{}
	for _, r := range recs {
		recorded[episodeKey{r.Cell, r.Episode}] = true
	}
	lines := bytes.SplitAfter(data, []byte("\n"))
	last := map[episodeKey]int{}
	units := make([]episodeKey, len(lines))
	ok := make([]bool, len(lines))
	for i, ln := range lines {
		var t Timing
		if len(ln) == 0 || ln[len(ln)-1] != '\n' || json.Unmarshal(ln, &t) != nil || t.Format != 1 {
			continue
		}
		u := episodeKey{t.Cell, t.Episode}
		if !recorded[u] {
			continue
		}
		units[i], ok[i] = u, true
		last[u] = i
	}
	var keep [][]byte
	for i, ln := range lines {
		if ok[i] && last[units[i]] == i {
			keep = append(keep, ln)
		}
	}
	if len(keep) == len(lines) || len(keep) == len(lines)-1 && len(lines[len(lines)-1]) == 0 {
		return nil // nothing to drop
	}
	return atomicfile.Write(path, func(w io.Writer) error {
		for _, ln := range keep {
			if _, err := w.Write(ln); err != nil {
				return err
			}
		}
		return nil
	})
}

// episodeKey names one episode of a study.
type episodeKey struct{ cell, ep int }
