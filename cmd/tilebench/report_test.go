package main

import (
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
}
