package study

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"

	"tilebench/internal/atomicfile"
)

// File names inside a study folder.
const (
	InfoFile    = "study.json"
	ResultsFile = "results.jsonl"
	TimingFile  = "timing.jsonl"
	StripsDir   = "strips"
	LogsDir     = "logs"
)

// Record is one finished episode, one line of results.jsonl. Its bytes
// depend only on the study and the episode, never on timing, worker count
// or shard split.
type Record struct {
	Format int `json:"format"`
	// Study is the study's fingerprint.
	Study string `json:"study"`
	// Cell and Episode index the episode within the study.
	Cell    int `json:"cell"`
	Episode int `json:"episode"`
	// Params are the cell's parameters.
	Params Cell `json:"params"`
	// GameSeed and PipeSeed are the seeds the episode ran with.
	GameSeed uint64 `json:"game_seed"`
	PipeSeed uint64 `json:"pipe_seed"`
	// Return is the sum of rewards, Steps the number of steps, End why
	// the episode ended ("completed", "failed", "time-up", or "error").
	Return float64 `json:"return"`
	Steps  int     `json:"steps"`
	End    string  `json:"end"`
	// Failure is why the episode could not be played (a policy process
	// that crashed, a bad action); empty for a played episode. Failed
	// episodes are left out of the statistics and retried on --resume.
	Failure string `json:"failure,omitempty"`
}

// Failed reports whether the episode could not be played.
func (r *Record) Failed() bool { return r.Failure != "" }

// Timing is one line of timing.jsonl: how long an episode took. It is
// kept apart from results.jsonl because it changes from run to run.
type Timing struct {
	Format         int     `json:"format"`
	Cell           int     `json:"cell"`
	Episode        int     `json:"episode"`
	Steps          int     `json:"steps"`
	Seconds        float64 `json:"seconds"`
	StepsPerSecond float64 `json:"steps_per_second"`
}

// Info is the content of study.json: the study's identity and its
// resolved plan.
type Info struct {
	Format      int        `json:"format"`
	Fingerprint string     `json:"fingerprint"`
	Definition  Definition `json:"definition"`
	Cells       []Cell     `json:"cells"`
	Episodes    int        `json:"episodes"`
	// Shard is the part of the study this folder holds (absent for a
	// whole or merged study).
	Shard *Shard `json:"shard,omitempty"`
	// Command is the command line that reproduces the study, if known.
	Command string `json:"command,omitempty"`
}

// ReadInfo reads dir/study.json.
func ReadInfo(dir string) (*Info, error) {
	data, err := os.ReadFile(filepath.Join(dir, InfoFile))
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s holds no study (no %s)", dir, InfoFile)
		}
		return nil, fmt.Errorf("read study: %w", err)
	}
	var si Info
	if err := json.Unmarshal(data, &si); err != nil {
		return nil, fmt.Errorf("read %s: %w", filepath.Join(dir, InfoFile), err)
	}
	if si.Format != 1 {
		return nil, fmt.Errorf("read %s: format %d, want 1", filepath.Join(dir, InfoFile), si.Format)
	}
	if si.Fingerprint == "" || len(si.Cells) == 0 || si.Episodes <= 0 {
		return nil, fmt.Errorf("read %s: incomplete study description", filepath.Join(dir, InfoFile))
	}
	return &si, nil
}

// Plan rebuilds the plan recorded in study.json and checks that it has
// the recorded fingerprint.
func (si *Info) Plan() (*Plan, error) {
	p, err := NewPlan(si.Definition)
	if err != nil {
		return nil, fmt.Errorf("recorded study: %w", err)
	}
	if p.Fingerprint != si.Fingerprint {
		return nil, fmt.Errorf("recorded study: fingerprint %s does not match its definition (%s); was study.json edited?", si.Fingerprint, p.Fingerprint)
	}
	return p, nil
}

// WriteInfo writes dir/study.json.
func WriteInfo(dir string, si *Info) error {
	data, err := json.MarshalIndent(si, "", "  ")
	if err != nil {
		return fmt.Errorf("write study: %w", err)
	}
	return atomicfile.WriteBytes(filepath.Join(dir, InfoFile), append(data, '\n'))
}

// ReadResults reads the records of dir/results.jsonl. A last line cut
// short (a study killed while writing) is ignored; validEnd is the byte
// length of the file up to the last complete record, so that appending
// can start there. A damaged line elsewhere is an error.
func ReadResults(dir string) (recs []Record, validEnd int64, err error) {
	path := filepath.Join(dir, ResultsFile)
	data, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, 0, nil
		}
		return nil, 0, fmt.Errorf("read results: %w", err)
	}
	off := 0
	line := 0
	for off < len(data) {
		line++
		nl := bytes.IndexByte(data[off:], '\n')
		if nl < 0 {
			// Cut short by a kill: drop it.
			break
		}
		var r Record
		if err := json.Unmarshal(data[off:off+nl], &r); err != nil || r.Format != 1 {
			if off+nl+1 == len(data) && err != nil {
				// The last line, damaged: treat as cut short.
				break
			}
			return nil, 0, fmt.Errorf("%s line %d: not a format 1 record", path, line)
		}
		recs = append(recs, r)
		off += nl + 1
	}
	return recs, int64(off), nil
}

// Latest keeps, for every (cell, episode), the last record in recs — a
// retry of a failed episode replaces it — and returns them in canonical
// order (by cell, then episode).
func Latest(recs []Record) []Record {
	idx := map[[2]int]int{}
	var out []Record
	for _, r := range recs {
		k := [2]int{r.Cell, r.Episode}
		if i, ok := idx[k]; ok {
			if !r.Failed() || out[i].Failed() {
				out[i] = r
			}
			continue
		}
		idx[k] = len(out)
		out = append(out, r)
	}
	SortRecords(out)
	return out
}

// SortRecords puts records in canonical order: by cell, then episode.
func SortRecords(recs []Record) {
	sort.SliceStable(recs, func(i, j int) bool {
		if recs[i].Cell != recs[j].Cell {
			return recs[i].Cell < recs[j].Cell
		}
		return recs[i].Episode < recs[j].Episode
	})
}

// EncodeRecord is the exact line (with its newline) a record is stored as.
func EncodeRecord(r *Record) ([]byte, error) {
	b, err := json.Marshal(r)
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

// WriteResults writes recs to dir/results.jsonl atomically, in canonical
// order.
func WriteResults(dir string, recs []Record) error {
	recs = append([]Record(nil), recs...)
	SortRecords(recs)
	return atomicfile.Write(filepath.Join(dir, ResultsFile), func(w io.Writer) error {
		bw := bufio.NewWriter(w)
		for i := range recs {
			b, err := EncodeRecord(&recs[i])
			if err != nil {
				return err
			}
			if _, err := bw.Write(b); err != nil {
				return err
			}
		}
		return bw.Flush()
	})
}

// ReadTimings reads dir/timing.jsonl, skipping damaged lines (timing is
// informative only).
func ReadTimings(dir string) []Timing {
	data, err := os.ReadFile(filepath.Join(dir, TimingFile))
	if err != nil {
		return nil
	}
	var out []Timing
	for _, ln := range bytes.Split(data, []byte("\n")) {
		var t Timing
		if len(ln) > 0 && json.Unmarshal(ln, &t) == nil && t.Format == 1 {
			out = append(out, t)
		}
	}
	return out
}
