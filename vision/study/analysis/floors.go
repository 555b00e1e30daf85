package analysis

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"tilebench/internal/atomicfile"
)

// FloorsFile holds the baseline episodes of a study: its floor policy
// and, when the game ships one, the scripted expert, played clean on the
// study's own game seeds for every variation the study uses.
const FloorsFile = "floors.json"

// DefaultFloor is the floor policy of a study that names none: the idle
// policy (the zero action, or the discrete choice "stay").
const DefaultFloor = "idle"

// Baseline is one baseline policy's episodes on one variation.
type Baseline struct {
	// Variation is the game variation ("" the default).
	Variation string `json:"variation"`
	// Returns are indexed by episode (the study's episode e plays game
	// seed Plan.GameSeed(e)); Errors[e] is not empty when episode e could
	// not be played, and its return is then 0 and not used.
	Returns []float64 `json:"returns"`
	Errors  []string  `json:"errors,omitempty"`
}

// FloorTable is the content of floors.json.
type FloorTable struct {
	Format int `json:"format"`
	// Study is the fingerprint of the study the baselines were played for.
	Study string `json:"study"`
	// Floor is the floor policy's source ("idle", "random", or any
	// policy source).
	Floor string `json:"floor"`
	// Floors are the floor policy's episodes, Expert the scripted
	// expert's (empty when the game ships none).
	Floors []Baseline `json:"floors"`
	Expert []Baseline `json:"expert,omitempty"`
}

// WriteFloors records the baseline table in dir.
func WriteFloors(dir string, t *FloorTable) error {
	t.Format = 1
	b, err := json.MarshalIndent(t, "", " ")
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(filepath.Join(dir, FloorsFile), append(b, '\n'))
}

// ReadFloors reads dir/floors.json; nil, nil when there is none.
func ReadFloors(dir string) (*FloorTable, error) {
	data, err := os.ReadFile(filepath.Join(dir, FloorsFile))
	if errors.Is(err, os.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	var t FloorTable
	if err := json.Unmarshal(data, &t); err != nil || t.Format != 1 {
		return nil, fmt.Errorf("read %s: not a format 1 baseline table", FloorsFile)
	}
	return &t, nil
}

// byEpisode returns the returns of b for variation v, NaN where an
// episode is missing or errored; nil when v is not recorded.
func byEpisode(bs []Baseline, v string, episodes int) []float64 {
	for _, b := range bs {
		if b.Variation != v {
			continue
		}
		out := make([]float64, episodes)
		for e := range out {
			out[e] = nan
			if e < len(b.Returns) && (e >= len(b.Errors) || b.Errors[e] == "") {
				out[e] = b.Returns[e]
			}
		}
		return out
	}
	return nil
}
