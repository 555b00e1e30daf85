package runner

import (
	"image"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// A study with an overlay draws the policy's attention on its strips and
// the report shows the key beside them.
func TestStripsWithOverlay(t *testing.T) {
	pol := filepath.Join(reftest.Root(), "testdata", "policies", "drive-attention-p8.safetensors")
	mk := func(ov string) *study.Plan {
		p, err := study.NewPlan(study.Definition{Name: "ov", Game: "drive", Episodes: 1, Seed: 3, Policy: study.PolicyDef{Source: pol},
			Patch: study.Axis{"8"}, Axes: study.Axes{Occlude: study.Axis{"random:0,random:0.5"}, Scramble: study.Axis{"full"}},
			Stats: study.StatsDef{Resamples: 200}, Strips: []int{0, 3}, Overlay: ov})
		if err != nil {
			t.Fatal(err)
		}
		return p
	}
	plain, marked := mk(""), mk("attention+top:2")
	if plain.Fingerprint != marked.Fingerprint {
		t.Fatal("the overlay changed the study's fingerprint")
	}
	dirs := [2]string{t.TempDir(), t.TempDir()}
	for i, p := range []*study.Plan{plain, marked} {
		runStudy(t, p, dirs[i], Options{Workers: 1, Env: DefaultEnv(p, "")})
	}
	for c := range marked.Cells {
		a, ma := analysis.LoadStrip(dirs[0], c)
		b, mb := analysis.LoadStrip(dirs[1], c)
		if a == nil || b == nil {
			t.Fatalf("cell %d: strips missing", c)
		}
		if ma.Overlay != "" || mb.Overlay != "attention+top:2" {
			t.Fatalf("cell %d: overlay recorded %q and %q", c, ma.Overlay, mb.Overlay)
		}
		// Same seeds, same frames: the overlay is the only difference,
		// on the game frame (row 0) and on what the policy saw (row 1).
		for row := 0; row < 2; row++ {
			fa, fb := analysis.StripFrame(a, ma, 1, row).(*image.RGBA), analysis.StripFrame(b, mb, 1, row).(*image.RGBA)
			if string(fa.Pix) == string(fb.Pix) {
				t.Fatalf("cell %d row %d: no overlay drawn", c, row)
			}
		}
	}
	an, err := analysis.Analyze(dirs[1])
	if err != nil {
		t.Fatal(err)
	}
	rd := an.ReportData(dirs[1])
	found := false
	for _, st := range rd.Strips {
		for _, f := range st.Frames {
			if strings.HasPrefix(f.Label, "key:") && f.Image != nil {
				found = strings.Contains(st.Caption, "Overlay attention+top:2")
			}
		}
	}
	if !found {
		t.Fatal("no overlay key in the report's strips")
	}
}
