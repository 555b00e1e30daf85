package probe

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
	"tilebench/vision/study"
)

// File names inside a probe folder.
const (
	ProbeFile   = "probe.json"
	resultsFile = "results.jsonl"
	logsDir     = "logs"
)

// Record is one line of results.jsonl: one sequence of one cell. Its
// bytes depend only on the probe, the cell and the sequence.
type Record struct {
	Format int `json:"format"`
	// Probe is the probe's fingerprint.
	Probe string `json:"probe"`
	// Cell and Sequence index the unit.
	Cell     int `json:"cell"`
	Sequence int `json:"sequence"`
	// Start and Frames locate the sequence in the recording.
	Start  int `json:"start"`
	Frames int `json:"frames"`
	// Params are the cell's parameters.
	Params study.Cell `json:"params"`
	// PolicySeed and PipeSeed are the seeds the unit ran with.
	PolicySeed uint64 `json:"policy_seed"`
	PipeSeed   uint64 `json:"pipe_seed"`
	// Drift is, per frame, the L2 norm of transformed − clean action
	// (continuous) or 1 where the choice changed, else 0 (discrete).
	Drift []float32 `json:"drift"`
	// Channel is the mean absolute change per action channel over the
	// sequence (continuous actions only).
	Channel []float64 `json:"channel,omitempty"`
	// CleanError and Error compare the clean and the transformed action
	// with the recorded one, per frame: the L2 error (continuous) or 1
	// where the choice differs (discrete). Absent without recorded actions.
	CleanError []float32 `json:"clean_error,omitempty"`
	Error      []float32 `json:"error,omitempty"`
	// Top are the frames whose action moved most, largest first.
	Top []Moved `json:"top"`
	// Failure is why the unit could not be run; such units are left out
	// of the statistics and retried on resume.
	Failure string `json:"failure,omitempty"`
}

// Moved is one frame whose action moved: its index within the sequence,
// its drift and the two actions.
type Moved struct {
	Frame int       `json:"frame"`
	Drift float64   `json:"drift"`
	Clean []float64 `json:"clean"`
	Moved []float64 `json:"moved"`
}

// Failed reports whether the unit could not be run.
func (r *Record) Failed() bool { return r.Failure != "" }

// Info is the content of probe.json.
type Info struct {
	Format int  `json:"format"`
	Plan   Plan `json:"plan"`
	// Shard is the part this folder holds (absent for a whole or merged
	// probe).
	Shard *study.Shard `json:"shard,omitempty"`
	// Command is the command line that reproduces the probe.
	Command string `json:"command,omitempty"`
}

// ReadInfo reads probe.json from dir.
func ReadInfo(dir string) (*Info, error) {
	data, err := os.ReadFile(filepath.Join(dir, ProbeFile))
	if err != nil {
		return nil, fmt.Errorf("probe folder %s: %w", dir, unwrapPath(err))
	}
	var in Info
	if err := json.Unmarshal(data, &in); err != nil {
		return nil, fmt.Errorf("%s: %w", filepath.Join(dir, ProbeFile), err)
	}
	if in.Format != 1 {
		return nil, fmt.Errorf("%s: format %d: this tilebench reads format 1", filepath.Join(dir, ProbeFile), in.Format)
	}
	return &in, nil
}

func writeInfo(dir string, in *Info) error {
	b, err := json.MarshalIndent(in, "", " ")
	if err != nil {
		return fmt.Errorf("probe.json: %w", err)
	}
	return atomicfile.WriteBytes(filepath.Join(dir, ProbeFile), append(b, '\n'))
}

// encodeRecord returns r as one line of JSON.
func encodeRecord(r *Record) ([]byte, error) {
	b, err := json.Marshal(r)
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

// ReadResults reads results.jsonl of dir (missing: none). A last line cut
// short by a kill is ignored; validEnd is the length of the whole lines.
// Any other bad line is an error naming the line.
func ReadResults(dir string) (recs []Record, validEnd int64, err error) {
	path := filepath.Join(dir, resultsFile)
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil, 0, nil
	}
	if err != nil {
		return nil, 0, fmt.Errorf("results: %w", err)
	}
	defer f.Close()
	br := bufio.NewReaderSize(f, 1<<20)
	var off int64
	for ln := 1; ; ln++ {
		line, err := br.ReadBytes('\n')
		if err == io.EOF {
			// A partial last line (no newline) is what a kill leaves.
			return recs, off, nil
		}
		if err != nil {
			return nil, 0, fmt.Errorf("%s: %w", path, err)
		}
		var r Record
		if err := json.Unmarshal(bytes.TrimSpace(line), &r); err != nil || r.Format != 1 {
			return nil, 0, fmt.Errorf("%s line %d: not a probe record of format 1", path, ln)
		}
		recs = append(recs, r)
		off += int64(len(line))
	}
}

// latest keeps, for every unit, the last finished record, or the last
// failed one if none finished.
func latest(recs []Record) map[[2]int]Record {
	m := map[[2]int]Record{}
	for _, r := range recs {
		k := [2]int{r.Cell, r.Sequence}
		if prev, ok := m[k]; ok && !prev.Failed() && r.Failed() {
			continue
		}
		m[k] = r
	}
	return m
}

func sorted(m map[[2]int]Record) []Record {
	out := make([]Record, 0, len(m))
	for _, r := range m {
		out = append(out, r)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].Cell != out[j].Cell {
			return out[i].Cell < out[j].Cell
		}
		return out[i].Sequence < out[j].Sequence
	})
	return out
}

// writeResults rewrites results.jsonl in canonical order, atomically.
func writeResults(dir string, recs []Record) error {
	return atomicfile.Write(filepath.Join(dir, resultsFile), func(w io.Writer) error {
		bw := bufio.NewWriterSize(w, 1<<20)
		for i := range recs {
			b, err := encodeRecord(&recs[i])
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
