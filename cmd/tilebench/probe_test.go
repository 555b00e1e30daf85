package main

import (
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

func TestProbeCLI(t *testing.T) {
	frames, _ := framesDir(t, 12, 40, 32)
	out := filepath.Join(t.TempDir(), "p")
	code, stdout, stderr := runCLI(t, "", "probe", "--in", frames, "--policy", "fresh", "--family", "meanpool",
		"--action-space", "continuous:2", "--scramble", "none,full", "--occlude", "random:0:0.4:0.2", "--resamples", "200", "--out", out, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var s struct {
		Format int `json:"format"`
		Cells  []struct {
			Label  string `json:"label"`
			Frames int    `json:"frames"`
		} `json:"cells"`
		Caution string `json:"caution"`
	}
	if err := json.Unmarshal([]byte(stdout), &s); err != nil || s.Format != 1 || len(s.Cells) != 6 || s.Caution == "" {
		t.Fatalf("--json: %v %+v\n%s", err, s, stdout)
	}
	for _, f := range []string{"results.jsonl", "report.html", "summary.md", "cells.csv", "summary.json", "probe.json"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("missing %s", f)
		}
	}
	// A used folder without --resume: one line, exit 1, nothing changed.
	code, _, stderr = runCLI(t, "", "probe", "--in", frames, "--policy", "fresh", "--action-space", "continuous:2", "--out", out)
	if code != 1 || strings.Count(strings.TrimSpace(stderr), "\n") != 0 || !strings.Contains(stderr, "--resume") {
		t.Errorf("reuse: exit %d %q", code, stderr)
	}
	bad := filepath.Join(t.TempDir(), "bad.csv")
	os.WriteFile(bad, []byte("0\n8\n3\n"), 0o644)
	out2 := filepath.Join(t.TempDir(), "q")
	code, _, stderr = runCLI(t, "", "probe", "--in", frames, "--episodes", bad, "--policy", "fresh", "--action-space", "continuous:2", "--out", out2)
	if code != 2 || !strings.Contains(stderr, "bad.csv: line 3") || strings.Count(strings.TrimSpace(stderr), "\n") != 0 {
		t.Errorf("bad episodes: exit %d %q", code, stderr)
	}
	if _, err := os.Stat(out2); err == nil {
		t.Error("bad input left an output folder")
	}
	// Shards and merge.
	var dirs []string
	for i := 0; i < 2; i++ {
		d := filepath.Join(t.TempDir(), fmt.Sprint("s", i))
		code, _, stderr = runCLI(t, "", "probe", "--in", frames, "--policy", "fresh", "--family", "meanpool",
			"--action-space", "continuous:2", "--scramble", "none,full", "--occlude", "random:0:0.4:0.2", "--resamples", "200",
			"--shard", fmt.Sprintf("%d/2", i), "--out", d)
		if code != 0 {
			t.Fatalf("shard %d: %s", i, stderr)
		}
		dirs = append(dirs, d)
	}
	m := filepath.Join(t.TempDir(), "m")
	code, stdout, stderr = runCLI(t, "", append([]string{"probe", "merge", "--out", m}, dirs...)...)
	if code != 0 {
		t.Fatalf("merge: %s", stderr)
	}
	if !strings.Contains(stdout, "\nreport: "+filepath.Join(m, "report.html")+"\n") {
		t.Errorf("probe merge does not print the report path as a study merge does:\n%s", stdout)
	}
	a, _ := os.ReadFile(filepath.Join(out, "results.jsonl"))
	b, _ := os.ReadFile(filepath.Join(m, "results.jsonl"))
	if string(a) != string(b) {
		t.Error("merged shards differ from the whole run")
	}
	// "tilebench merge" recognises probe folders too.
	m2 := filepath.Join(t.TempDir(), "m2")
	if code, stdout, stderr = runCLI(t, "", append([]string{"merge", m2}, dirs...)...); code != 0 {
		t.Fatalf("merge: %s", stderr)
	}
	if !strings.Contains(stdout, "\nreport: "+filepath.Join(m2, "report.html")+"\n") {
		t.Errorf("tilebench merge of probe shards does not print the report path:\n%s", stdout)
	}
	if c, _ := os.ReadFile(filepath.Join(m2, "results.jsonl")); string(c) != string(a) {
		t.Error("tilebench merge of probe shards differs from the whole run")
	}
	// One shard of two, as a study's merge: refused with nothing written
	// unless --allow-partial, which merges and exits 3; --json passes
	// through "tilebench merge".
	for _, cmd := range [][]string{{"probe", "merge"}, {"merge"}} {
		m3 := filepath.Join(t.TempDir(), "m3")
		dest := []string{m3}
		if len(cmd) == 2 {
			dest = []string{"--out", m3}
		}
		args := append(append(append([]string{}, cmd...), dest...), dirs[0])
		code, _, stderr = runCLI(t, "", args...)
		if code != 1 {
			t.Fatalf("%v: exit %d", args, code)
		}
		oneLine(t, stderr, "missing")
		if _, err := os.Stat(m3); err == nil {
			t.Fatalf("%v: a refused merge wrote its output folder", args)
		}
		args = append(append(append(append([]string{}, cmd...), "--allow-partial", "--json"), dest...), dirs[0])
		code, stdout, stderr = runCLI(t, "", args...)
		var mj struct{ Missing int }
		if code != ExitFailedEpisodes || json.Unmarshal([]byte(stdout), &mj) != nil || mj.Missing == 0 {
			t.Fatalf("%v: exit %d, %q %q", args, code, stdout, stderr)
		}
	}
}

// TestProbeMemory probes a 100,000-frame 96×96×3 recording (a sparse
// file of black frames, 2.7 GB apparent size) in a child process under
// /usr/bin/time -v and wants its maximum resident set under 300 MB: the
// recording is read a frame at a time, never loaded. Opt in with
// TILEBENCH_MEMORY=1 (it takes a minute of CPU).
func TestProbeMemory(t *testing.T) {
	if os.Getenv("TILEBENCH_MEMORY") != "1" {
		t.Skip("set TILEBENCH_MEMORY=1 to measure")
	}
	if _, err := os.Stat("/usr/bin/time"); err != nil {
		t.Skip("no /usr/bin/time")
	}
	dir := t.TempDir()
	bin := filepath.Join(dir, "tilebench")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	const n, w, h = 100000, 96, 96
	rec := filepath.Join(dir, "rec.npy")
	f, err := os.Create(rec)
	if err != nil {
		t.Fatal(err)
	}
	hdr := fmt.Sprintf("{'descr': '|u1', 'fortran_order': False, 'shape': (%d, %d, %d, 3), }", n, h, w)
	for (10+len(hdr)+1)%64 != 0 {
		hdr += " "
	}
	hdr += "\n"
	f.Write(append([]byte("\x93NUMPY\x01\x00"), byte(len(hdr)), byte(len(hdr)>>8)))
	f.Write([]byte(hdr))
	if err := f.Truncate(int64(10+len(hdr)) + int64(n)*w*h*3); err != nil {
		t.Fatal(err)
	}
	f.Close()
	cmd := exec.Command("/usr/bin/time", "-v", bin, "probe", "--in", rec, "--policy", "fresh", "--family", "meanpool",
		"--action-space", "continuous:2", "--scramble", "none,full", "--workers", "2", "--out", filepath.Join(dir, "out"))
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("probe: %v\n%s", err, out)
	}
	m := regexp.MustCompile(`Maximum resident set size \(kbytes\): (\d+)`).FindSubmatch(out)
	if m == nil {
		t.Fatalf("no resident set size in\n%s", out)
	}
	kb, _ := strconv.Atoi(string(m[1]))
	t.Logf("probing %d frames of %dx%dx3 (2 cells): maximum resident set %d MB", n, w, h, kb/1024)
	if kb > 300*1024 {
		t.Errorf("maximum resident set %d MB, want under 300 MB", kb/1024)
	}
}

// TestProbeMergeHelp: "probe merge -help" describes the merge, not the
// probe, and every usage line of probe names the program.
func TestProbeMergeHelp(t *testing.T) {
	code, stdout, _ := runCLI(t, "", "probe", "merge", "-help")
	if code != 0 || !strings.HasPrefix(stdout, "usage: tilebench probe merge --out DIR") || strings.Contains(stdout, "Runs the policy") {
		t.Fatalf("probe merge -help: exit %d\n%s", code, stdout)
	}
	if !strings.Contains(stdout, "-out DIR") {
		t.Fatalf("probe merge -help lacks --out:\n%s", stdout)
	}
	_, stdout, _ = runCLI(t, "", "probe", "-help")
	if !strings.Contains(stdout, "\n       tilebench probe merge --out DIR") {
		t.Fatalf("probe -help: second usage line lacks the program name:\n%s", stdout)
	}
}

// TestProbeReadsRecording: a probe reads "tilebench record"'s output as
// it is: frames.npy, episode_starts.npy (a bool mask) and actions.npy.
func TestProbeReadsRecording(t *testing.T) {
	rec := filepath.Join(t.TempDir(), "demos")
	if code, _, stderr := runCLI(t, "", "record", "--game", "paddle", "--episodes", "2", "--seed", "3", "--out", rec); code != 0 {
		t.Fatalf("record: exit %d: %s", code, stderr)
	}
	var m struct {
		Episodes []struct {
			Start int `json:"start"`
			Steps int `json:"steps"`
		} `json:"episodes"`
	}
	b, err := os.ReadFile(filepath.Join(rec, "manifest.json"))
	if err != nil || json.Unmarshal(b, &m) != nil || len(m.Episodes) != 2 {
		t.Fatalf("manifest: %v %s", err, b)
	}
	out := filepath.Join(t.TempDir(), "p")
	code, _, stderr := runCLI(t, "", "probe", "--in", filepath.Join(rec, "frames.npy"), "--episodes", filepath.Join(rec, "episode_starts.npy"),
		"--actions", filepath.Join(rec, "actions.npy"), "--policy", "fresh", "--family", "meanpool", "--resamples", "200", "--out", out)
	if code != 0 {
		t.Fatalf("probe of a recording: exit %d: %s", code, stderr)
	}
	var info struct {
		Plan struct {
			Sequences []struct {
				Start int `json:"start"`
				Len   int `json:"len"`
			} `json:"sequences"`
		} `json:"plan"`
	}
	b, _ = os.ReadFile(filepath.Join(out, "probe.json"))
	if err := json.Unmarshal(b, &info); err != nil || len(info.Plan.Sequences) != 2 {
		t.Fatalf("probe.json: %v, sequences %+v", err, info.Plan.Sequences)
	}
	for i, e := range m.Episodes {
		if q := info.Plan.Sequences[i]; q.Start != e.Start || q.Len != e.Steps {
			t.Errorf("sequence %d is %+v, the manifest's episode starts at %d for %d steps", i, q, e.Start, e.Steps)
		}
	}
}
