package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/vision"
)

// stressArgs is a small stress study of the driving game's expert.
func stressArgs(out string, more ...string) []string {
	return append([]string{"stress", "--game", "drive", "--policy", "expert", "--patch", "16",
		"--occlude", "random:0.5", "--scramble", "none,full", "--episodes", "2", "--resamples", "200", "--out", out}, more...)
}

func oneLine(t *testing.T, stderr, want string) {
	t.Helper()
	if strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, want) {
		t.Fatalf("stderr %q: want one line containing %q", stderr, want)
	}
}

func TestStressRunsRefusesAndResumes(t *testing.T) {
	out := filepath.Join(t.TempDir(), "s")
	code, stdout, stderr := runCLI(t, "", stressArgs(out)...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(stdout, "report: "+filepath.Join(out, "report.html")) || stderr != "" {
		t.Fatalf("stdout %q stderr %q", stdout, stderr)
	}
	if !strings.Contains(stdout, ": 3 cells × 2 episodes;") {
		t.Errorf("summary %q: want 3 cells × 2 episodes", stdout)
	}
	if !strings.HasSuffix(stdout, "\ncaution: "+vision.Caution+"\n") {
		t.Errorf("summary %q: want the caution as its last line", stdout)
	}
	for _, f := range []string{"study.json", "results.jsonl", "timing.jsonl", "report.html", "summary.md", "cells.csv"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Fatal(err)
		}
	}
	results, _ := os.ReadFile(filepath.Join(out, "results.jsonl"))
	// 3 cells (occluded, occluded and scrambled, the clean reference) × 2 episodes.
	if n := bytes.Count(results, []byte("\n")); n != 6 {
		t.Fatalf("%d records, want 3 cells × 2 episodes", n)
	}
	code, _, stderr = runCLI(t, "", stressArgs(out)...)
	if code != 1 {
		t.Fatalf("rerun without --resume: exit %d", code)
	}
	oneLine(t, stderr, "--resume")
	code, stdout, stderr = runCLI(t, "", stressArgs(out, "--resume", "--json")...)
	if code != 0 {
		t.Fatalf("resume: exit %d: %s", code, stderr)
	}
	var js map[string]any
	if err := json.Unmarshal([]byte(stdout), &js); err != nil || js["format"] != 1.0 || js["ran"] != 0.0 || js["kept"] != 6.0 || js["caution"] != vision.Caution {
		t.Fatalf("--json %q: %v", stdout, err)
	}
	after, _ := os.ReadFile(filepath.Join(out, "results.jsonl"))
	if !bytes.Equal(after, results) {
		t.Fatal("resume of a finished study changed its results")
	}
	// A different study on --resume.
	code, _, stderr = runCLI(t, "", append(stressArgs(out, "--resume"), "--episodes", "3")...)
	if code != 1 {
		t.Fatalf("different study on --resume: exit %d", code)
	}
	oneLine(t, stderr, "different study")
	if after, _ := os.ReadFile(filepath.Join(out, "results.jsonl")); !bytes.Equal(after, results) {
		t.Fatal("a refused resume changed the results")
	}
	// The same cells replay alone to the recorded return.
	code, stdout, stderr = runCLI(t, "", "replay", out, "--cell", "1", "--episode", "1")
	if code != 0 || !strings.Contains(stdout, "matches the recorded result") {
		t.Fatalf("replay: exit %d %q %q", code, stdout, stderr)
	}
	code, _, stderr = runCLI(t, "", "replay", out, "--cell", "9", "--episode", "0")
	if code != 1 {
		t.Fatalf("replay of a missing cell: exit %d", code)
	}
	oneLine(t, stderr, "cell 9")
	// The report is re-made byte for byte from the records.
	csv, _ := os.ReadFile(filepath.Join(out, "cells.csv"))
	page, _ := os.ReadFile(filepath.Join(out, "report.html"))
	os.Remove(filepath.Join(out, "cells.csv"))
	code, stdout, _ = runCLI(t, "", "report", out)
	if code != 0 || !strings.Contains(stdout, "report.html") {
		t.Fatalf("report: exit %d %q", code, stdout)
	}
	csv2, _ := os.ReadFile(filepath.Join(out, "cells.csv"))
	page2, _ := os.ReadFile(filepath.Join(out, "report.html"))
	if !bytes.Equal(csv, csv2) || !bytes.Equal(page, page2) {
		t.Fatal("tilebench report did not re-make the same files")
	}
	if !bytes.Contains(page2, []byte("not a safety certification")) {
		t.Fatal("the report lacks the safety caution")
	}
}

// A count of one is written in the singular in the summary.
func TestStressSummarySingular(t *testing.T) {
	out := filepath.Join(t.TempDir(), "s")
	stdout := mustRun(t, "", "stress", "--game", "drive", "--policy", "expert", "--patch", "16", "--occlude", "none",
		"--episodes", "1", "--resamples", "200", "--out", out)
	if !strings.Contains(stdout, ": 1 cell × 1 episode;") {
		t.Errorf("summary %q: want 1 cell × 1 episode", stdout)
	}
	if strings.Contains(stdout, "1 cells") || strings.Contains(stdout, "1 episodes") {
		t.Errorf("summary %q: a plural after 1", stdout)
	}
}

func TestStressBadInput(t *testing.T) {
	dir := t.TempDir()
	cfg := filepath.Join(dir, "study.toml")
	os.WriteFile(cfg, []byte("name = \"x\"\n[axes]\nocclude = \"random:0.2\"\nscrambel = \"full\"\n"), 0o644)
	out := filepath.Join(dir, "out")
	for _, c := range []struct {
		args []string
		code int
		want string
	}{
		{stressArgs(out, "--occlude", "random:0.9:0:0.1"), 2, "yields no values"},
		{stressArgs(out, "--every", "0,,10"), 2, "empty item"},
		{stressArgs(out, "--scramble", "sideways"), 2, "want none, full"},
		{stressArgs(out, "--shard", "3/3"), 2, "shard"},
		{stressArgs(out, "--fill", "purple"), 2, "--fill"},
		{[]string{"stress", "--config", cfg, "--out", out}, 2, `line 4: unknown key "axes.scrambel"`},
		{[]string{"stress", "--game", "drive"}, 2, "--out"},
		{stressArgs(out, "--game", "croquet"), 2, `--game: unknown game "croquet"`},
		{stressArgs(out, "--policy", filepath.Join(dir, "missing.safetensors")), 1, "missing.safetensors"},
		{stressArgs(out, "--episodes", "-1"), 2, "episodes"},
		// The floor plays after the episodes; a floor that cannot open is
		// refused before the folder is made.
		{stressArgs(out, "--floor", filepath.Join(dir, "nofloor.safetensors")), 1, `floor policy`},
		// A {patch} template names one policy per patch size: with one size
		// it is a mistake (docs/policies.md).
		{stressArgs(out, "--policy", "exec:python3 my_policy.py --patch {patch}", "--patch", "8"), 2, "one patch size (8)"},
		{stressArgs(out, "--policy", "tcp://127.0.0.1:70{patch}"), 2, "one patch size"},
		{[]string{"sizes", "--game", "paddle", "--patch", "7,12", "--episodes", "1", "--out", out, "--policy", "exec:python3 my_policy.py --patch {patch}"}, 2, "cost model"},
	} {
		code, _, stderr := runCLI(t, "", c.args...)
		if code != c.code {
			t.Errorf("%v: exit %d, want %d (%s)", c.args, code, c.code, stderr)
			continue
		}
		oneLine(t, stderr, c.want)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatal("bad input left an output folder")
	}
}

// A bad value from a flag is named by the flag, one from a study file by
// its key there.
func TestStudyErrorsNameTheFlag(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "out")
	for _, c := range [][]string{
		{"occlude", "random:2"}, {"scramble", "sideways"}, {"every", "0:10:0"}, {"noise-tokens", "-1"},
		{"brightness", "3"}, {"contrast", "-1"}, {"pixel-noise", "0:1:0"}, {"corrupt", "fog:1"}, {"fill", "purple"},
		{"variations", "a b"}, {"patch", "0"}, {"margin", "-1"}, {"episodes", "100000000"}, {"seeds", "bogus"},
	} {
		for _, cmd := range []string{"stress", "sizes"} {
			code, _, stderr := runCLI(t, "", cmd, "--game", "drive", "--family", "attention", "--"+c[0], c[1], "--out", out)
			if code != 2 {
				t.Errorf("%s --%s %s: exit %d, want 2 (%s)", cmd, c[0], c[1], code, stderr)
				continue
			}
			if !strings.HasPrefix(stderr, "tilebench: --"+c[0]+": ") || strings.Contains(stderr, "axes.") || strings.Count(stderr, "\n") != 1 {
				t.Errorf("%s --%s %s: stderr %q: want one line naming --%s", cmd, c[0], c[1], stderr, c[0])
			}
		}
	}
	// probe takes the same axis flags.
	frames, _ := framesDir(t, 4, 40, 32)
	for _, c := range [][]string{{"occlude", "random:2"}, {"noise-tokens", "-1"}, {"corrupt", "blur:s2+fog:1"}, {"patch", "0"}} {
		code, _, stderr := runCLI(t, "", "probe", "--in", frames, "--policy", "fresh", "--action-space", "continuous:2", "--"+c[0], c[1], "--out", out)
		if code != 2 {
			t.Errorf("probe --%s %s: exit %d, want 2 (%s)", c[0], c[1], code, stderr)
			continue
		}
		oneLine(t, stderr, "tilebench: --"+c[0]+": ")
	}
	// The same value in a study file keeps the file's key; a valid file
	// with a bad flag on top names the flag.
	bad := filepath.Join(dir, "bad.toml")
	good := filepath.Join(dir, "good.toml")
	os.WriteFile(bad, []byte("[axes]\nocclude = \"random:2\"\n"), 0o644)
	os.WriteFile(good, []byte("[axes]\nocclude = \"random:0.2\"\n"), 0o644)
	code, _, stderr := runCLI(t, "", "stress", "--config", bad, "--out", out)
	if code != 2 {
		t.Fatalf("stress --config %s: exit %d", bad, code)
	}
	oneLine(t, stderr, `key "axes.occlude"`)
	code, _, stderr = runCLI(t, "", "stress", "--config", good, "--noise-tokens", "-1", "--out", out)
	if code != 2 {
		t.Fatalf("stress --config %s --noise-tokens -1: exit %d", good, code)
	}
	oneLine(t, stderr, "tilebench: --noise-tokens: ")
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatal("bad input left an output folder")
	}
}

// TestStressPatchTemplateExternal: in "exec:COMMAND --want-patch {patch}"
// each patch size of the study starts its own process with its own size
// (the test binary serving a policy that fails on any other size); a
// process named without the template fails the other size's cells.
func TestStressPatchTemplateExternal(t *testing.T) {
	t.Setenv(serveEnv, "1") // for the exec: children only
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		policy string
		code   int
	}{
		{"exec:" + exe + " --want-patch {patch}", 0},
		{"exec:" + exe + " --want-patch 7", 3},
	} {
		out := filepath.Join(t.TempDir(), "s")
		code, _, stderr := runCLI(t, "", "stress", "--game", "paddle", "--patch", "7,12", "--episodes", "1", "--occlude", "none",
			"--resamples", "100", "--json", "--out", out, "--policy", c.policy)
		if code != c.code {
			t.Fatalf("%s: exit %d, want %d (%s)", c.policy, code, c.code, stderr)
		}
	}
}

func TestStressHelp(t *testing.T) {
	code, stdout, _ := runCLI(t, "", "stress", "-help")
	if code != 0 || !strings.Contains(stdout, "--occlude random:0:0.9:0.1,block:0.3") || !strings.Contains(stdout, "-resume") {
		t.Fatalf("help: %d %q", code, stdout)
	}
}

// --floor names the floor policy recorded in floors.json and the report;
// --retry-errors without --resume and a negative --margin are one-line
// usage errors.
func TestStressFloorAndMarginFlags(t *testing.T) {
	out := filepath.Join(t.TempDir(), "s")
	code, _, stderr := runCLI(t, "", "stress", "--game", "paddle", "--policy", "expert", "--patch", "10", "--occlude", "none,random:0.5",
		"--episodes", "3", "--resamples", "200", "--floor", "random", "--out", out)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	b, err := os.ReadFile(filepath.Join(out, "floors.json"))
	if err != nil || !strings.Contains(string(b), `"floor": "random"`) {
		t.Fatalf("floors.json %s (%v)", b, err)
	}
	if md, _ := os.ReadFile(filepath.Join(out, "summary.md")); !strings.Contains(string(md), "floor: random") {
		t.Fatal("summary.md does not name the random floor")
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--retry-errors"}, "--retry-errors goes with --resume"},
		{[]string{"--margin", "-0.1"}, "--margin: -0.1"},
		{[]string{"--floor", "exec:"}, "floor"},
	} {
		code, _, stderr := runCLI(t, "", append(stressArgs(filepath.Join(t.TempDir(), "x")), c.args...)...)
		if code != 2 {
			t.Fatalf("%v: exit %d, want 2 (%s)", c.args, code, stderr)
		}
		oneLine(t, stderr, c.want)
	}
}
