package main

import (
	"os"
	"path/filepath"
	"testing"
)

func TestReportBadInput(t *testing.T) {
	code, _, stderr := runCLI(t, "", "report", filepath.Join(t.TempDir(), "none"))
	if code != 1 {
		t.Fatalf("exit %d", code)
	}
	oneLine(t, stderr, "holds no study")
	if code, _, _ := runCLI(t, "", "report"); code != 2 {
		t.Fatalf("report without DIR: exit %d", code)
	}
	// A probe's folder is named as one, with the way to re-make its report.
	probeDir := t.TempDir()
	if err := os.WriteFile(filepath.Join(probeDir, "probe.json"), []byte("{}"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr = runCLI(t, "", "report", probeDir)
	if code != 2 {
		t.Fatalf("report of a probe: exit %d", code)
	}
	oneLine(t, stderr, "is a probe (probe.json), not a study: run its probe command again with --resume")
}
