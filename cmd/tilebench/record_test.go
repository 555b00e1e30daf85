package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/vision/record"
)

// TestRecordCLI: record, refuse to overwrite, resume to more episodes,
// and the one-line usage errors.
func TestRecordCLI(t *testing.T) {
	out := filepath.Join(t.TempDir(), "demos")
	args := []string{"record", "--game", "paddle", "--episodes", "2", "--seed", "3", "--out", out}
	code, stdout, stderr := runCLI(t, "", args...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(stdout, "wrote 2 episodes") || !strings.Contains(stdout, "caution:") {
		t.Fatalf("stdout %q", stdout)
	}
	before, err := os.ReadFile(filepath.Join(out, "frames.npy"))
	if err != nil {
		t.Fatal(err)
	}
	code, _, stderr = runCLI(t, "", args...)
	if code != 2 {
		t.Fatalf("second run without --resume: exit %d", code)
	}
	oneLine(t, stderr, "--resume")
	code, stdout, stderr = runCLI(t, "", "record", "--game", "paddle", "--episodes", "3", "--seed", "3", "--out", out, "--resume", "--json")
	if code != 0 {
		t.Fatalf("resume: exit %d: %s", code, stderr)
	}
	var m record.Manifest
	if err := json.Unmarshal([]byte(stdout), &m); err != nil {
		t.Fatal(err)
	}
	if len(m.Episodes) != 3 || !m.Complete || m.Episodes[2].Seed != 5 {
		t.Fatalf("resumed manifest: %d episodes, complete %v", len(m.Episodes), m.Complete)
	}
	after, _ := os.ReadFile(filepath.Join(out, "frames.npy"))
	if len(after) <= len(before) || string(after[128:len(before)]) != string(before[128:]) {
		t.Fatal("resume changed the frames already recorded")
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"record", "--game", "paddle", "--out", filepath.Join(t.TempDir(), "x"), "--obs", "pixels"}, "--obs"},
		{[]string{"record", "--game", "paddle", "--out", filepath.Join(t.TempDir(), "x"), "--relabel"}, "--relabel"},
		{[]string{"record", "--game", "paddle"}, "--out"},
		{[]string{"record", "--game", "paddle", "--out", filepath.Join(t.TempDir(), "x"), "--seed", "1000000"}, "training range"},
		{[]string{"record", "--game", "paddle", "--out", filepath.Join(t.TempDir(), "x"), "--patch", "12x7", "--rotate"}, "rotate"},
		{[]string{"record", "--game", "paddle", "--out", out, "--resume", "--episodes", "3", "--seed", "3", "--occlude", "random:0.5"}, "not resumable"},
	} {
		code, _, stderr := runCLI(t, "", c.args...)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2 (%s)", c.args, code, stderr)
			continue
		}
		oneLine(t, stderr, c.want)
	}
	if b, _ := os.ReadFile(filepath.Join(out, "frames.npy")); string(b) != string(after) {
		t.Fatal("a refused run changed the dataset")
	}
}
