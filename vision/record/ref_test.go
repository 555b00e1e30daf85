package record

import (
	"encoding/json"
	"path/filepath"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/patch"
)

// TestRefRecordingNumpy reads recordings back with NumPy, live
// (testdata/ref/recording_ref.py): numpy.load takes every file (NEP 1),
// the dtypes and shapes are the manifest's, and the episode bookkeeping
// (starts, seeds, step indices, previous actions, returns) holds.
func TestRefRecordingNumpy(t *testing.T) {
	reftest.Need(t, "numpy")
	g, grid := setup(t, "drive", 8)
	for _, c := range []Config{
		{Obs: ObsFrame, Episodes: 2, Spec: patch.Spec{Occlude: "block:0.2"}},
		{Obs: ObsTokens, Episodes: 2, Seed: 9, Spec: patch.Spec{Scramble: "full", Occlude: "random:0.2", Fill: "drop", NoiseTokens: 3}},
	} {
		c.Game, c.Grid, c.Dir = g, grid, filepath.Join(t.TempDir(), "rec")
		m, err := Run(c)
		if err != nil {
			t.Fatal(err)
		}
		var got struct {
			Arrays map[string]struct {
				Dtype string
				Shape []int
			}
			Episodes, Rows int
		}
		if err := json.Unmarshal(reftest.Run(t, "recording_ref.py", c.Dir), &got); err != nil {
			t.Fatal(err)
		}
		if got.Rows != m.Rows || got.Episodes != len(m.Episodes) || len(got.Arrays) != len(m.Files) {
			t.Fatalf("numpy read %d rows, %d episodes, %d arrays; manifest %d, %d, %d", got.Rows, got.Episodes, len(got.Arrays), m.Rows, len(m.Episodes), len(m.Files))
		}
		for _, f := range m.Files {
			a := got.Arrays[f.Name[:len(f.Name)-4]]
			if a.Dtype != f.Dtype && !(f.Dtype == "|u1" && a.Dtype == "|u1") {
				t.Errorf("%s: numpy dtype %s, manifest %s", f.Name, a.Dtype, f.Dtype)
			}
			if !equalInts(a.Shape, append([]int{m.Rows}, f.Shape...)) {
				t.Errorf("%s: numpy shape %v, manifest %d×%v", f.Name, a.Shape, m.Rows, f.Shape)
			}
		}
	}
}
