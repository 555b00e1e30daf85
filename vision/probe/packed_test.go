package probe

import (
	"path/filepath"
	"reflect"
	"testing"

	"tilebench/internal/reftest"
)

// TestPackedCleanPass: the NumPy example over exec:, batched and not,
// gives the same clean-pass record whether the recording's stored bytes
// go straight into its messages (the packed path) or through RGBA frames.
func TestPackedCleanPass(t *testing.T) {
	reftest.Need(t, "numpy")
	dir := t.TempDir()
	rec := recording(t, dir, 70, 48, 32)
	// Recorded actions make the record hold each clean action's error.
	acts := filepath.Join(dir, "a.npy")
	writeNPY(t, acts, 70, 2, false, func(i, j int) float64 { return 0.03 * float64(i%11-5*j) })
	for _, noBatch := range []bool{false, true} {
		p := plan(t, Config{In: rec, Policy: "exec:" + reftest.Python + " " + numpyExample, Actions: acts, NoBatch: noBatch, Resamples: 100})
		src, err := openSource(p)
		if err != nil {
			t.Fatal(err)
		}
		var recs []Record
		for _, packed := range []bool{true, false} {
			r, err := newRunner(p, src, p.Cells[0].Patch, Policies(p, filepath.Join(dir, "logs")))
			if err != nil {
				t.Fatal(err)
			}
			if r.packer == nil {
				t.Fatalf("no batch %v: a .npy recording and the NumPy example do not take the packed path", noBatch)
			}
			if !packed {
				r.packer = nil
			}
			rc := Record{Cell: 0, Sequence: 0, Params: p.Cells[0], PolicySeed: 1, PipeSeed: 2}
			if err := r.unit(&rc, nil); err != nil {
				t.Fatal(err)
			}
			r.close()
			recs = append(recs, rc)
		}
		src.Close()
		if !reflect.DeepEqual(recs[0], recs[1]) {
			t.Errorf("no batch %v: packed %+v, through RGBA %+v", noBatch, recs[0], recs[1])
		}
		if len(recs[0].CleanError) != 70 || recs[0].CleanError[10] == 0 {
			t.Errorf("clean errors %v", recs[0].CleanError)
		}
	}
}
