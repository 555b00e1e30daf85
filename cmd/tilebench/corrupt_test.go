package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
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

// '+' joins a corruption chain in the single-run commands as it does in a
// study, and means the same as the comma form kept for compatibility.
func TestCorruptPlusJoinsChain(t *testing.T) {
	dir := t.TempDir()
	comma, plus := filepath.Join(dir, "comma"), filepath.Join(dir, "plus")
	mustRun(t, "", "export", "--in", "builtin:drift", "--frames", "3", "--patch", "8", "--corrupt", "blur:s2,jpeg:40", "--out", comma, "--as", "npy")
	mustRun(t, "", "export", "--in", "builtin:drift", "--frames", "3", "--patch", "8", "--corrupt", "blur:s2+jpeg:40", "--out", plus, "--as", "npy")
	a, b := readNPY(t, filepath.Join(comma, "frames.npy")), readNPY(t, filepath.Join(plus, "frames.npy"))
	if len(a) != 3 || len(b) != 3 {
		t.Fatalf("%d and %d frames", len(a), len(b))
	}
	for i := range a {
		if string(a[i].Pix) != string(b[i].Pix) {
			t.Fatalf("frame %d differs between blur:s2,jpeg:40 and blur:s2+jpeg:40", i)
		}
	}
	file := filepath.Join(reftest.Root(), "testdata", "policies", "drive-attention-p8.safetensors")
	play := func(corrupt string) playSummary {
		var s playSummary
		if err := json.Unmarshal([]byte(mustRun(t, "", "play", "--game", "drive", "--policy", file, "--episodes", "2", "--json", "--corrupt", corrupt)), &s); err != nil {
			t.Fatal(err)
		}
		return s
	}
	p, c, clean := play("blur:s2+jpeg:40"), play("blur:s2,jpeg:40"), play("none")
	if len(p.Episodes) != 2 || !slices.Equal(p.Episodes, c.Episodes) {
		t.Errorf("play: blur:s2+jpeg:40 gives %+v, blur:s2,jpeg:40 gives %+v", p.Episodes, c.Episodes)
	}
	if slices.Equal(p.Episodes, clean.Episodes) {
		t.Errorf("play: blur:s2+jpeg:40 plays as clean frames: %+v", p.Episodes)
	}
	for _, bad := range []string{"blur:s2+", "+blur:s2", "blur:s2++jpeg:40"} {
		code, _, stderr := runCLI(t, "", "play", "--game", "drive", "--episodes", "1", "--corrupt", bad)
		if code != 2 {
			t.Fatalf("play --corrupt %s: exit %d", bad, code)
		}
		oneLine(t, stderr, "empty step")
	}
}
