package main

import (
	"bufio"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strings"
	"testing"

	"tilebench/vision/nets"
)

func TestTrainUsageErrors(t *testing.T) {
	out := filepath.Join(t.TempDir(), "w.safetensors")
	for _, args := range [][]string{
		{"train", "--game", "drive"},
		{"train", "--out", out},
		{"train", "--game", "drive", "--out", out, "--method", "sgd"},
		{"train", "--game", "drive", "--out", out, "--patch", "0"},
		{"train", "--game", "drive", "--out", out, "--occlude", "random:9"},
		{"train", "--game", "chess", "--out", out},
		{"train", "--game", "drive", "--out", out, "--family", "cnn"},
		{"train", "--game", "drive", "--out", out, "--every", "0"},
		{"train", "--game", "drive", "--out", out, "--budget", "soon"},
	} {
		code, _, stderr := runCLI(t, "", args...)
		if code != 2 || strings.Count(stderr, "\n") != 1 {
			t.Errorf("%v: exit %d, stderr %q; want 2 and one line", args, code, stderr)
		}
	}
	code, _, stderr := runCLI(t, "", "train", "--resume", filepath.Join(t.TempDir(), "none.ckpt"), "--out", out)
	if code != 1 || !strings.Contains(stderr, "none.ckpt") {
		t.Errorf("missing checkpoint: exit %d, %q", code, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("a failed run left a weights file")
	}
}

func TestTrainHelpHasExample(t *testing.T) {
	code, stdout, _ := runCLI(t, "", "train", "-help")
	if code != 0 || !strings.Contains(stdout, "Example:") || !strings.Contains(stdout, "-resume") {
		t.Fatalf("exit %d, help %q", code, stdout)
	}
}

// TestTrainResumeCLI: two iterations in one run give the same weights as
// one iteration, then --resume for the second; --json lines carry format 1.
func TestTrainResumeCLI(t *testing.T) {
	dir := t.TempDir()
	base := []string{"train", "--game", "drive", "--patch", "4", "--key-size", "4", "--queries", "4", "--hidden", "8",
		"--episodes-per-round", "1", "--epochs", "1", "--val-episodes", "1", "--heldout", "2", "--seed", "3", "--workers", "2"}
	a := filepath.Join(dir, "a.safetensors")
	code, stdout, stderr := runCLI(t, "", append(base, "--iters", "2", "--json", "--out", a)...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	sc := bufio.NewScanner(strings.NewReader(stdout))
	var last map[string]any
	lines := 0
	for sc.Scan() {
		last = nil
		if err := json.Unmarshal(sc.Bytes(), &last); err != nil || last["format"] != 1.0 {
			t.Fatalf("line %q: %v", sc.Text(), err)
		}
		lines++
	}
	if lines != 3 || last["event"] != "done" || last["heldout_episodes"] != 2.0 || last["caution"] == nil {
		t.Fatalf("%d lines, summary %v", lines, last)
	}
	b := filepath.Join(dir, "b.safetensors")
	if code, _, stderr := runCLI(t, "", append(base, "--iters", "1", "--out", b)...); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	c := filepath.Join(dir, "c.safetensors")
	code, stdout, stderr = runCLI(t, "", "train", "--resume", b+".ckpt", "--iters", "2", "--heldout", "2", "--out", c)
	if code != 0 {
		t.Fatalf("resume: exit %d: %s", code, stderr)
	}
	if !strings.Contains(stdout, "held-out score") || !strings.Contains(stdout, "caution") {
		t.Fatalf("summary %q", stdout)
	}
	// Scores with one decimal, and the game named once.
	if !regexp.MustCompile(`held-out score over 2 episodes: mean -?\d+\.\d, IQM -?\d+\.\d \(scripted expert, reads game state: mean -?\d+\.\d, IQM -?\d+\.\d\)\n`).MatchString(stdout) ||
		!strings.Contains(stdout, "trained attention patch 4 on drive by ") {
		t.Fatalf("summary %q", stdout)
	}
	na, err := nets.Load(a)
	if err != nil {
		t.Fatal(err)
	}
	nc, err := nets.Load(c)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(na.Params(), nc.Params()) {
		t.Fatal("resumed run's weights differ from the uninterrupted run's")
	}
}
