package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestMergeShardsMatchesWhole(t *testing.T) {
	base := t.TempDir()
	whole := filepath.Join(base, "whole")
	if code, _, stderr := runCLI(t, "", stressArgs(whole)...); code != 0 {
		t.Fatal(stderr)
	}
	var shards []string
	for _, s := range []string{"0/2", "1/2"} {
		dir := filepath.Join(base, "shard"+s[:1])
		if code, _, stderr := runCLI(t, "", stressArgs(dir, "--shard", s)...); code != 0 {
			t.Fatal(stderr)
		}
		shards = append(shards, dir)
	}
	merged := filepath.Join(base, "merged")
	code, stdout, stderr := runCLI(t, "", append([]string{"merge", merged}, shards...)...)
	if code != 0 || !strings.Contains(stdout, "merged 6 episodes") {
		t.Fatalf("merge: %d %q %q", code, stdout, stderr)
	}
	a, _ := os.ReadFile(filepath.Join(whole, "results.jsonl"))
	b, _ := os.ReadFile(filepath.Join(merged, "results.jsonl"))
	if len(a) == 0 || !bytes.Equal(a, b) {
		t.Fatal("merged results differ from the unsharded run")
	}
	// Merging into a folder that holds something is refused.
	code, _, stderr = runCLI(t, "", append([]string{"merge", merged}, shards...)...)
	if code != 1 {
		t.Fatalf("merge into a full folder: exit %d", code)
	}
	oneLine(t, stderr, "not empty")
	// Mixed studies.
	other := filepath.Join(base, "other")
	if code, _, stderr := runCLI(t, "", stressArgs(other, "--episodes", "1")...); code != 0 {
		t.Fatal(stderr)
	}
	code, _, stderr = runCLI(t, "", "merge", filepath.Join(base, "mixed"), shards[0], other)
	if code != 1 {
		t.Fatalf("mixed merge: exit %d", code)
	}
	oneLine(t, stderr, "not the same study")
	if _, err := os.Stat(filepath.Join(base, "mixed")); !os.IsNotExist(err) {
		t.Fatal("a refused merge wrote its output")
	}
	if code, _, _ := runCLI(t, "", "merge", merged); code != 2 {
		t.Fatalf("merge with one folder: exit %d, want 2", code)
	}
}
