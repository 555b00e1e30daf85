package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/vision/policies"
)

// --corrupt on export: the frames change, the manifest records the list
// and says how each step inverts; a bad list is a usage error of one line.
func TestExportCorrupt(t *testing.T) {
	dir := t.TempDir()
	clean, bent := filepath.Join(dir, "clean"), filepath.Join(dir, "bent")
	mustRun(t, "", "export", "--in", "builtin:drift", "--frames", "4", "--patch", "8", "--out", clean, "--as", "npy")
	mustRun(t, "", "export", "--in", "builtin:drift", "--frames", "4", "--patch", "8", "--corrupt", "blur:s2,shift:3:0:wrap", "--out", bent, "--as", "npy")
	a, b := readNPY(t, filepath.Join(clean, "frames.npy")), readNPY(t, filepath.Join(bent, "frames.npy"))
	if len(a) != 4 || len(b) != 4 || string(a[1].Pix) == string(b[1].Pix) {
		t.Fatal("--corrupt did not change the exported frames")
	}
	raw, err := os.ReadFile(filepath.Join(bent, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var m struct {
		Spec    struct{ Corrupt string }
		Corrupt []struct {
			Step, Inverse string
			Exact         bool
		}
	}
	if err := json.Unmarshal(raw, &m); err != nil {
		t.Fatal(err)
	}
	if m.Spec.Corrupt != "blur:s2,shift:3:0:wrap" || len(m.Corrupt) != 2 || m.Corrupt[1].Inverse != "shift:-3:0:wrap" || !m.Corrupt[1].Exact || m.Corrupt[0].Exact {
		t.Fatalf("manifest corrupt %+v / %q", m.Corrupt, m.Spec.Corrupt)
	}
	for _, bad := range []string{"fog:1", "blur:s9", "jpeg:0"} {
		code, _, stderr := runCLI(t, "", "export", "--in", "builtin:drift", "--frames", "2", "--corrupt", bad, "--out", filepath.Join(dir, "x"))
		if code != 2 {
			t.Fatalf("--corrupt %s: exit %d", bad, code)
		}
		oneLine(t, stderr, "corrupt")
	}
	for _, cmd := range [][]string{{"play", "--game", "paddle"}, {"verify", "--policy", "attention", "--game", "paddle"}, {"train", "--game", "paddle", "--out", filepath.Join(dir, "w.safetensors")}} {
		code, _, stderr := runCLI(t, "", append(cmd, "--corrupt", "blur:x")...)
		if code != 2 {
			t.Fatalf("%s --corrupt blur:x: exit %d", cmd[0], code)
		}
		oneLine(t, stderr, "corrupt")
	}
}

// verify --corrupt: an invariant family keeps its output under a shift by
// a whole patch with wrap-around edges and moves under a shift by part of
// a patch.
func TestVerifyCorruptShift(t *testing.T) {
	g, err := games.Build("drive", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	p := policies.AutoPatch(g.Spec().Width, g.Spec().Height)
	if g.Spec().Width%p != 0 || g.Spec().Height%p != 0 {
		t.Skip("no default patch divides the frame")
	}
	run := func(c string) float64 {
		code, m, errs := verifyJSON(t, "--policy", "attention", "--game", "drive", "--perms", "1", "--seeds", "1", "--frames", "2", "--corrupt", c)
		if code != 0 {
			t.Fatalf("--corrupt %s: exit %d: %s", c, code, errs)
		}
		if m["corrupt"] != c {
			t.Fatalf("--corrupt %s: report says %v", c, m["corrupt"])
		}
		return stat(m, "corrupted", "max")
	}
	if d := run("shift:" + strconv.Itoa(p) + ":0:wrap"); d > 1e-5 {
		t.Errorf("whole-patch shift moved the output by %g", d)
	}
	if d := run("shift:" + strconv.Itoa(p/2+1) + ":0:wrap"); d < 1e-4 {
		t.Errorf("sub-patch shift moved the output by only %g", d)
	}
	code, out, _ := runCLI(t, "", "verify", "--policy", "attention", "--game", "drive", "--perms", "1", "--seeds", "1", "--frames", "1", "--corrupt", "blur:s1")
	if code != 0 || !strings.Contains(out, "corrupt blur:s1") {
		t.Fatalf("text output (exit %d):\n%s", code, out)
	}
}

// stress --corrupt sweeps the range syntax into cells.
func TestStressCorruptAxis(t *testing.T) {
	out := filepath.Join(t.TempDir(), "s")
	code, _, stderr := runCLI(t, "", "stress", "--game", "paddle", "--policy", "expert", "--patch", "10", "--corrupt", "none,blur:s1:s2",
		"--episodes", "1", "--resamples", "100", "--out", out)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	csv, err := os.ReadFile(filepath.Join(out, "cells.csv"))
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []string{"corrupt=blur:s1", "corrupt=blur:s2"} {
		if !strings.Contains(string(csv), w) {
			t.Fatalf("cells.csv lacks %s:\n%s", w, csv)
		}
	}
	code, _, stderr = runCLI(t, "", "stress", "--game", "paddle", "--policy", "expert", "--corrupt", "blur:s3:s1", "--out", filepath.Join(t.TempDir(), "b"))
	if code != 2 {
		t.Fatalf("bad range: exit %d", code)
	}
	oneLine(t, stderr, "corrupt")
}
