package main

import (
	"strings"
	"testing"
)

// Bad numbers on the command line end with exit status 2 and one line
// naming the flag, before any work: each of these used to be accepted
// (and ran without end, panicked, or ran out of memory).
func TestFlagRanges(t *testing.T) {
	out := t.TempDir() + "/w.safetensors"
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"train", "--game", "drive", "--lr", "NaN", "--out", out}, "learning rate NaN"},
		{[]string{"train", "--game", "drive", "--lr", "Inf", "--out", out}, "learning rate +Inf"},
		{[]string{"train", "--game", "drive", "--lr", "-1", "--out", out}, "learning rate -1"},
		{[]string{"train", "--game", "drive", "--workers", "20000", "--out", out}, "20000 workers: at most"},
		{[]string{"train", "--game", "drive", "--fitness-episodes", "0", "--out", out}, "--fitness-episodes 0"},
		{[]string{"train", "--game", "drive", "--method", "es", "--pairs", "0", "--out", out}, "--pairs 0"},
		{[]string{"train", "--game", "drive", "--min-iters", "-2", "--out", out}, "min-iters -2"},
		{[]string{"train", "--game", "drive", "--patience", "-2", "--out", out}, "patience -2"},
		{[]string{"cost", "--context", "-1"}, "context -1"},
		{[]string{"cost", "--reps", "1000000000"}, "want reps 0..1000"},
		{[]string{"cost", "--steps", "2000000000"}, "steps 1..100000"},
		{[]string{"stress", "--workers", "100000000", "--out", t.TempDir()}, "100000000 workers: at most"},
		{[]string{"stress", "--resamples", "0", "--out", t.TempDir()}, "--resamples 0"},
		{[]string{"export", "--in", "builtin:checker", "--out", t.TempDir(), "--max-pixels", "0"}, "--max-pixels 0"},
	} {
		code, stdout, stderr := runCLI(t, "", c.args...)
		if code != 2 || !strings.Contains(stderr, c.want) || strings.Count(stderr, "\n") != 1 || stdout != "" {
			t.Errorf("%v: exit %d, stderr %q, stdout %d bytes: want exit 2 and one line naming %q", c.args, code, stderr, len(stdout), c.want)
		}
	}
}

// A bad flag value prints one line, not the whole usage; -help still
// prints the usage.
func TestBadFlagOneLine(t *testing.T) {
	code, stdout, stderr := runCLI(t, "", "stress", "--episodes", "abc")
	if code != 2 || stdout != "" || strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, `invalid value "abc" for flag -episodes`) {
		t.Fatalf("exit %d, stdout %q, stderr %q", code, stdout, stderr)
	}
	code, stdout, _ = runCLI(t, "", "stress", "-help")
	if code != 0 || !strings.Contains(stdout, "usage: tilebench stress") {
		t.Fatalf("-help: exit %d, %q", code, stdout)
	}
}
