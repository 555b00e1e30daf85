package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// A study whose every episode failed writes its report but exits with
// status ExitFailedEpisodes (3) and says how many failed; it used to exit 0.
func TestStudyFailedEpisodesExitStatus(t *testing.T) {
	dir := t.TempDir()
	pol := filepath.Join(dir, "crash.sh")
	// A policy that answers the handshake, then exits at the first step.
	os.WriteFile(pol, []byte("read x\necho '{\"msg\":\"ready\",\"protocol\":1}'\nread y\nexit 3\n"), 0o755)
	out := filepath.Join(dir, "s")
	code, stdout, stderr := runCLI(t, "", "stress", "--game", "paddle", "--policy", "exec:sh "+pol, "--episodes", "2", "--resamples", "200", "--out", out)
	if code != ExitFailedEpisodes {
		t.Fatalf("exit %d, want %d (stdout %q, stderr %q)", code, ExitFailedEpisodes, stdout, stderr)
	}
	oneLine(t, stderr, "2 of 2 episodes could not be played")
	if _, err := os.Stat(filepath.Join(out, "report.html")); err != nil {
		t.Fatalf("no report: %v", err)
	}
}

// merge refuses folders that miss episodes of the study unless
// --allow-partial, which merges and exits 3; it used to exit 0 with a
// warning.
func TestMergeRefusesMissingShard(t *testing.T) {
	base := t.TempDir()
	shard0 := filepath.Join(base, "shard0")
	if code, _, stderr := runCLI(t, "", stressArgs(shard0, "--shard", "0/2")...); code != 0 {
		t.Fatal(stderr)
	}
	merged := filepath.Join(base, "merged")
	code, _, stderr := runCLI(t, "", "merge", merged, shard0)
	if code != 1 {
		t.Fatalf("merge of one of two shards: exit %d", code)
	}
	oneLine(t, stderr, "missing")
	if _, err := os.Stat(merged); err == nil {
		t.Fatal("a refused merge wrote its output folder")
	}
	code, stdout, stderr := runCLI(t, "", "merge", "--allow-partial", merged, shard0)
	if code != ExitFailedEpisodes || !strings.Contains(stdout, "missing") {
		t.Fatalf("--allow-partial: exit %d, %q %q", code, stdout, stderr)
	}
}

// Output paths are checked before the work: a folder where a file goes,
// a missing parent folder. train used to train first and then fail (and
// leave OUT.ckpt in the parent); play --gif DIR failed after playing.
func TestOutputPathsCheckedFirst(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"train", "--game", "paddle", "--out", dir}, "is a folder"},
		{[]string{"train", "--game", "paddle", "--out", filepath.Join(dir, "no", "w.safetensors")}, "does not exist"},
		{[]string{"train", "--game", "paddle", "--out", filepath.Join(dir, "w.safetensors"), "--checkpoint", dir}, "is a folder"},
		{[]string{"play", "--game", "paddle", "--gif", dir}, "is a folder"},
		{[]string{"play", "--game", "paddle", "--gif", filepath.Join(dir, "no", "p.gif")}, "does not exist"},
	} {
		code, _, stderr := runCLI(t, "", c.args...)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2 (%q)", c.args, code, stderr)
			continue
		}
		oneLine(t, stderr, c.want)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Fatalf("refused runs left %v", ents)
	}
	if _, err := os.Stat(dir + ".ckpt"); err == nil {
		t.Fatal("a checkpoint was left beside the folder")
	}
}

// --policy-start-timeout bounds the handshake, and its message names the
// flag; the handshake used to wait 30 s whatever the flags said.
func TestPolicyStartTimeoutFlag(t *testing.T) {
	dir := t.TempDir()
	pol := filepath.Join(dir, "silent.sh")
	os.WriteFile(pol, []byte("sleep 30\n"), 0o755)
	start := time.Now()
	code, _, stderr := runCLI(t, "", "play", "--game", "paddle", "--policy", "exec:sh "+pol, "--policy-start-timeout", "300ms")
	if el := time.Since(start); code != 1 || el > 5*time.Second {
		t.Fatalf("exit %d after %v: %q", code, el, stderr)
	}
	oneLine(t, stderr, "no reply within 300ms (the start timeout: raise it with --policy-start-timeout)")
	code, _, stderr = runCLI(t, "", "play", "--game", "paddle", "--policy", "exec:sh "+pol, "--policy-start-timeout", "0s")
	if code != 2 {
		t.Fatalf("--policy-start-timeout 0s: exit %d %q", code, stderr)
	}
}

// A study file without a patch key and with one weights file plays at the
// file's patch size through --config, as docs/studies.md says.
func TestConfigTakesWeightsPatch(t *testing.T) {
	dir := t.TempDir()
	src, _ := filepath.Abs(filepath.Join("..", "..", "testdata", "policies", "paddle-attention-p20.safetensors"))
	cfg := filepath.Join(dir, "s.toml")
	os.WriteFile(cfg, []byte("game = \"paddle\"\nepisodes = 1\n[policy]\nsource = '"+src+"'\n[stats]\nresamples = 200\n"), 0o644)
	out := filepath.Join(dir, "s")
	code, stdout, stderr := runCLI(t, "", "stress", "--config", cfg, "--out", out)
	if code != 0 {
		t.Fatalf("exit %d: %q %q", code, stdout, stderr)
	}
	b, err := os.ReadFile(filepath.Join(out, "study.json"))
	if err != nil || !strings.Contains(string(b), `"patch": [`) && !strings.Contains(string(b), `"patch":[`) || !strings.Contains(string(b), `"20"`) {
		t.Fatalf("study.json does not record patch 20: %v %.300s", err, b)
	}
}
