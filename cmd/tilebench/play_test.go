package main

import (
	"encoding/json"
	"image"
	"image/gif"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
)

func TestPlayExpertLines(t *testing.T) {
	code, out, errs := runCLI(t, "", "play", "--game", "drive", "--episodes", "2")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) < 4 {
		t.Fatalf("output:\n%s", out)
	}
	for i, want := range []string{"seed 1000000", "seed 1000001"} {
		if !strings.Contains(lines[i], want) || !strings.Contains(lines[i], "completed") {
			t.Errorf("line %d %q: want %s and completed", i, lines[i], want)
		}
	}
	if !strings.Contains(out, "2 episodes: mean return") || !strings.Contains(out, "caution:") {
		t.Errorf("no summary or caution:\n%s", out)
	}
}

func TestPlayJSONAndDeterminism(t *testing.T) {
	args := []string{"play", "--game", "paddle", "--episodes", "3", "--seed", "42", "--variation", "drifter", "--json"}
	code, out, errs := runCLI(t, "", args...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s playSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if s.Format != 1 || s.Game != "paddle" || s.Variation != "drifter" || !s.ReadsState || len(s.Episodes) != 3 {
		t.Fatalf("summary %+v", s)
	}
	for i, e := range s.Episodes {
		if e.Seed != 42+uint64(i) || e.Steps == 0 || e.Reason == "" {
			t.Errorf("episode %d: %+v", i, e)
		}
	}
	// The same command gives the same episodes.
	_, out2, _ := runCLI(t, "", args...)
	var s2 playSummary
	if err := json.Unmarshal([]byte(out2), &s2); err != nil {
		t.Fatal(err)
	}
	for i := range s.Episodes {
		if s.Episodes[i] != s2.Episodes[i] {
			t.Errorf("episode %d: %+v then %+v", i, s.Episodes[i], s2.Episodes[i])
		}
	}
}

func TestPlayRecordsFrames(t *testing.T) {
	dir := t.TempDir()
	gifPath := filepath.Join(dir, "play.gif")
	frames := filepath.Join(dir, "frames")
	code, out, errs := runCLI(t, "", "play", "--game", "drive", "--variation", "small", "--episodes", "1", "--gif", gifPath, "--frames", frames, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s playSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	steps := s.Episodes[0].Steps
	f, err := os.Open(gifPath)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	an, err := gif.DecodeAll(f)
	if err != nil {
		t.Fatal(err)
	}
	if len(an.Image) != steps || an.Image[0].Bounds().Dx() != 64 {
		t.Fatalf("GIF has %d frames of %v, want %d of 64 wide", len(an.Image), an.Image[0].Bounds(), steps)
	}
	pngs, _ := filepath.Glob(filepath.Join(frames, "episode-001", "frame-*.png"))
	if len(pngs) != steps {
		t.Fatalf("%d PNG frames, want %d", len(pngs), steps)
	}
	// With the identity pipeline the recorded frames are the game's own:
	// frame 0 equals a fresh render of the episode's seed.
	pf, err := os.Open(pngs[0])
	if err != nil {
		t.Fatal(err)
	}
	defer pf.Close()
	got, err := png.Decode(pf)
	if err != nil {
		t.Fatal(err)
	}
	g, err := games.Build("drive", games.Setup{Variation: "small"})
	if err != nil {
		t.Fatal(err)
	}
	g.Reset(s.Episodes[0].Seed)
	want := image.NewRGBA(image.Rect(0, 0, 64, 48))
	g.Render(want)
	if got.Bounds() != want.Bounds() {
		t.Fatalf("frame %v, want %v", got.Bounds(), want.Bounds())
	}
	for y := 0; y < 48; y++ {
		for x := 0; x < 64; x++ {
			r1, g1, b1, _ := got.At(x, y).RGBA()
			r2, g2, b2, _ := want.At(x, y).RGBA()
			if r1 != r2 || g1 != g2 || b1 != b2 {
				t.Fatalf("recorded frame 0 differs from the game's render at (%d,%d)", x, y)
			}
		}
	}
}

func TestPlayBadInput(t *testing.T) {
	for _, args := range [][]string{
		{"play"},
		{"play", "--game", "chess"},
		{"play", "--game", "drive", "--policy", "oracle"},
		{"play", "--game", "drive", "--episodes", "0"},
		{"play", "--game", "drive", "--variation", "meadow"},
		{"play", "--game", "paddle", "--size", "96x96"},
		{"play", "--game", "paddle", "--patch", "100"},
		{"play", "--game", "drive", "--size", "bad"},
		{"play", "--game", "drive", "--fps", "0"},
		{"play", "--game", "drive", "extra"},
		{"play", "--game", "drive", "--episodes", "x"},
	} {
		code, _, errs := runCLI(t, "", args...)
		if code != 2 || strings.Count(errs, "\n") != 1 {
			t.Errorf("%v: exit %d, stderr %q; want 2 and one line", args, code, errs)
		}
	}
	code, out, _ := runCLI(t, "", "play", "-help")
	if code != 0 || !strings.Contains(out, "--game drive") || !strings.Contains(out, "-variation") || strings.Count(out, "usage:") != 1 {
		t.Errorf("help: exit %d\n%s", code, out)
	}
}

func TestPlayWeightsFile(t *testing.T) {
	file := filepath.Join(reftest.Root(), "testdata", "policies", "drive-attention-p8.safetensors")
	code, out, stderr := runCLI(t, "", "play", "--game", "drive", "--policy", file, "--episodes", "1", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(out, `"format": 1`) && !strings.Contains(out, `"format":1`) {
		t.Fatalf("--json output without a format version: %s", out)
	}
	// The same file on the paddle game: one line naming both frame sizes.
	code, _, stderr = runCLI(t, "", "play", "--game", "paddle", "--policy", file, "--episodes", "1")
	if code != 1 || strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, "112x80") || !strings.Contains(stderr, "120x80") {
		t.Fatalf("exit %d, stderr %q: want one runtime-error line naming 112x80 and 120x80", code, stderr)
	}
}
