package main

import (
	"bytes"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/internal/reftest"
)

func shippedPolicy(name string) string {
	return filepath.Join(reftest.Root(), "testdata", "policies", name)
}

func TestExportOverlay(t *testing.T) {
	pol := shippedPolicy("drive-attention-p8.safetensors")
	plain, marked := t.TempDir(), t.TempDir()
	common := []string{"export", "--in", "builtin:drift", "--frames", "6", "--size", "112x80", "--patch", "8", "--scramble", "full", "--occlude", "random:0.2", "--as", "png,sheet,gif"}
	if code, _, stderr := runCLI(t, "", append(common, "--out", plain)...); code != 0 {
		t.Fatalf("plain export: %d %s", code, stderr)
	}
	code, stdout, stderr := runCLI(t, "", append(common, "--out", marked, "--overlay", "attention+top:3", "--weights", pol)...)
	if code != 0 {
		t.Fatalf("overlay export: %d %s", code, stderr)
	}
	if !strings.Contains(stdout, "exported 6 frames") {
		t.Fatalf("stdout %q", stdout)
	}
	for _, f := range []string{"sheet.png", "frames.gif", "manifest.json"} {
		if _, err := os.Stat(filepath.Join(marked, f)); err != nil {
			t.Fatalf("no %s: %v", f, err)
		}
	}
	// Same frames, same pipeline: only the overlay differs.
	entries, _ := filepath.Glob(filepath.Join(plain, "*.png"))
	differ := 0
	for _, e := range entries {
		a, _ := os.ReadFile(e)
		b, err := os.ReadFile(filepath.Join(marked, filepath.Base(e)))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(a, b) {
			differ++
			if _, err := png.Decode(bytes.NewReader(b)); err != nil {
				t.Fatalf("%s: %v", e, err)
			}
		}
	}
	if differ < 6 {
		t.Fatalf("only %d of %d pictures carry the overlay", differ, len(entries))
	}
	ma, _ := os.ReadFile(filepath.Join(plain, "manifest.json"))
	mb, _ := os.ReadFile(filepath.Join(marked, "manifest.json"))
	if !bytes.Equal(ma, mb) {
		t.Fatal("the overlay changed the manifest")
	}
}

func TestOverlayUsageErrors(t *testing.T) {
	pol := shippedPolicy("drive-attention-p8.safetensors")
	out := t.TempDir()
	for _, args := range [][]string{
		{"export", "--in", "builtin:drift", "--out", out, "--overlay", "attention"},
		{"export", "--in", "builtin:drift", "--out", out, "--weights", pol},
		{"export", "--in", "builtin:drift", "--out", out, "--overlay", "heat", "--weights", pol},
		{"export", "--in", "builtin:drift", "--out", out, "--overlay", "top:2", "--weights", "expert"},
		{"export", "--in", "builtin:drift", "--out", out, "--overlay", "top:2", "--weights", pol, "--as", "npy"},
		{"export", "--in", "builtin:drift", "--out", out, "--overlay", "top:2", "--weights", pol, "--patch", "6"},
		{"play", "--game", "paddle", "--overlay", "attention", "--episodes", "1"},
		{"play", "--game", "paddle", "--overlay", "top:0", "--episodes", "1"},
	} {
		code, _, stderr := runCLI(t, "", args...)
		if code != 2 || strings.Count(stderr, "\n") != 1 {
			t.Errorf("%v: exit %d, stderr %q; want 2 and one line", args, code, stderr)
		}
		if strings.Contains(stderr, "export: export:") {
			t.Errorf("%v: stderr %q names the command twice", args, stderr)
		}
	}
}

func TestPlayOverlayGIF(t *testing.T) {
	dir := t.TempDir()
	gif := filepath.Join(dir, "play.gif")
	frames := filepath.Join(dir, "frames")
	code, _, stderr := runCLI(t, "", "play", "--game", "drive", "--policy", shippedPolicy("drive-attention-p8.safetensors"),
		"--episodes", "1", "--gif", gif, "--frames", frames, "--overlay", "top:4")
	if code != 0 {
		t.Fatalf("play: %d %s", code, stderr)
	}
	if st, err := os.Stat(gif); err != nil || st.Size() == 0 {
		t.Fatalf("no gif: %v", err)
	}
	pngs, _ := filepath.Glob(filepath.Join(frames, "episode-001", "*.png"))
	if len(pngs) == 0 {
		t.Fatal("no frames")
	}
	f, _ := os.Open(pngs[len(pngs)/2])
	img, err := png.Decode(f)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	// The outline's inner ring colour is on the frame.
	ring := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if r>>8 == 0 && g>>8 == 232 && bl>>8 == 255 {
				ring++
			}
		}
	}
	if ring < 4*4*4 {
		t.Fatalf("%d ring pixels on the frame, want the outlines of 4 patches", ring)
	}
}

func TestStressOverlayStrips(t *testing.T) {
	out := filepath.Join(t.TempDir(), "st")
	code, _, stderr := runCLI(t, "", "stress", "--game", "paddle", "--policy", shippedPolicy("paddle-attention-p10.safetensors"),
		"--occlude", "random:0,random:0.5", "--episodes", "1", "--resamples", "200", "--workers", "1", "--overlay", "top:2", "--out", out)
	if code != 0 {
		t.Fatalf("stress: %d %s", code, stderr)
	}
	meta, err := os.ReadFile(filepath.Join(out, "strips", "cell-0001.json"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(meta), `"overlay":"top:2"`) {
		t.Fatalf("strip meta %s", meta)
	}
	page, err := os.ReadFile(filepath.Join(out, "report.html"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(page), "Overlay top:2") {
		t.Fatal("the report does not explain the overlay")
	}
	if code, _, _ := runCLI(t, "", "stress", "--game", "paddle", "--overlay", "glow", "--out", filepath.Join(t.TempDir(), "x")); code != 2 {
		t.Fatalf("a bad --overlay: exit %d, want 2", code)
	}
}
