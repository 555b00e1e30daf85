package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// An unknown --game is a usage error of one line naming it and the games
// there are, in every command that takes --game, before any work.
func TestUnknownGameIsUsageError(t *testing.T) {
	dir := t.TempDir()
	for _, args := range [][]string{
		{"play"},
		{"record", "--out", filepath.Join(dir, "rec")},
		{"watch"},
		{"train", "--out", filepath.Join(dir, "w.safetensors")},
		{"verify", "--policy", "expert"},
		{"cost"},
		{"stress", "--out", filepath.Join(dir, "stress")},
		{"sizes", "--out", filepath.Join(dir, "sizes")},
	} {
		code, stdout, stderr := runCLI(t, "", append(args, "--game", "drvie")...)
		if code != 2 {
			t.Errorf("%s --game drvie: exit %d, want 2 (stderr %q)", args[0], code, stderr)
			continue
		}
		if strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, `unknown game "drvie"`) || !strings.Contains(stderr, "drive, paddle") ||
			strings.Contains(stderr, "variation") || strings.Contains(stderr, "reference") {
			t.Errorf("%s --game drvie: stderr %q: want one line naming the game and the known ones", args[0], stderr)
		}
		if stdout != "" {
			t.Errorf("%s --game drvie: stdout %q", args[0], stdout)
		}
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 0 {
		t.Errorf("a refused command left %d entries in %s", len(entries), dir)
	}
	// A study file's game is named by its key there.
	cfg := filepath.Join(dir, "study.toml")
	if err := os.WriteFile(cfg, []byte("game = \"drvie\"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr := runCLI(t, "", "stress", "--config", cfg, "--out", filepath.Join(dir, "s"))
	if code != 2 {
		t.Fatalf("stress --config with game drvie: exit %d", code)
	}
	oneLine(t, stderr, cfg+": game: unknown game \"drvie\"")
}
