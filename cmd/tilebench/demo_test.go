package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestDemo(t *testing.T) {
	// About half a minute on 2 busy cores: run in CI (CI set) or with
	// TILEBENCH_LONG=1, not by default.
	if testing.Short() || os.Getenv("CI") == "" && os.Getenv("TILEBENCH_LONG") != "1" {
		t.Skip("runs three small studies; set TILEBENCH_LONG=1")
	}
	out := filepath.Join(t.TempDir(), "demo")
	code, stdout, stderr := runCLI(t, "", "demo", "--out", out, "--episodes", "1")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	for _, f := range []string{"index.html", "sizes/report.html", "stress/report.html", "paddle-stress/report.html", "sizes/costs.json"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Fatal(err)
		}
		if f != "sizes/costs.json" && !strings.Contains(stdout, filepath.Join(out, f)) {
			t.Fatalf("stdout %q does not print %s", stdout, f)
		}
	}
	// Run from the package's folder, the default --reference is not
	// there: the note says where it looked and what to do.
	if !strings.Contains(stdout, "not found in testdata/policies (run from the repository's root, or give --reference DIR)") {
		t.Errorf("stdout %q does not say where the reference policies were looked for", stdout)
	}
	// The drive stress study has its camera-shift axis.
	if b, err := os.ReadFile(filepath.Join(out, "stress", "report.html")); err != nil || !strings.Contains(string(b), "shift:s3") {
		t.Fatalf("stress report does not show the shift:s3 corruption (%v)", err)
	}
	// Every report shows the normalised scale, the pairing and the
	// failure rates; the sizes report the margin and the evidence.
	for _, f := range []string{"sizes", "stress", "paddle-stress"} {
		b, err := os.ReadFile(filepath.Join(out, f, "summary.md"))
		if err != nil {
			t.Fatal(err)
		}
		for _, want := range []string{"Normalised scale: floor and reference", "floor: idle", "Paired comparisons with the clean cell",
			"paired bootstrap", "game failures", "time-ups", "CVaR 10%", "errors"} {
			if !strings.Contains(string(b), want) {
				t.Errorf("%s/summary.md does not show %q", f, want)
			}
		}
		if f == "sizes" {
			for _, want := range []string{"Evidence for the recommendation", "non-inferiority margin", "Holm-adjusted p", "pooled"} {
				if !strings.Contains(string(b), want) {
					t.Errorf("sizes/summary.md does not show %q", want)
				}
			}
		}
	}
	// Again on the same folder: nothing to play, the reports re-made.
	code, _, stderr = runCLI(t, "", "demo", "--out", out, "--episodes", "1")
	if code != 0 {
		t.Fatalf("second demo: exit %d: %s", code, stderr)
	}
	if code, _, _ := runCLI(t, "", "demo", "--out", out, "--episodes", "2"); code != 1 {
		t.Fatalf("demo over a different demo: exit %d, want 1", code)
	}
}
