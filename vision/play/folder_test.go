package play

import (
	"image"
	"image/png"
	"os"
	"path/filepath"
	"testing"
	"tilebench/patch/frameio"
)

func TestFrameFolderCommitAndAbort(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "episode-001")
	img := image.NewRGBA(image.Rect(0, 0, 4, 3))
	for i := 3; i < len(img.Pix); i += 4 {
		img.Pix[i] = 255 // opaque, so that it decodes as RGBA
	}
	img.Pix[0] = 200

	// An aborted sequence leaves nothing behind, not even the stage.
	f, err := newFrameFolder(dir)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Add(0, img); err != nil {
		t.Fatal(err)
	}
	f.Abort()
	if entries, _ := os.ReadDir(parent); len(entries) != 0 {
		t.Fatalf("after Abort the parent holds %d entries", len(entries))
	}

	// A committed sequence replaces what was there before.
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "old.txt"), []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	f, err = newFrameFolder(dir)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 3 {
		if err := f.Add(i, img); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, frameio.FrameName(0))); err == nil {
		t.Fatal("a frame is visible before Commit")
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 3 {
		t.Fatalf("committed folder holds %d entries, want 3 frames only", len(entries))
	}
	r, err := os.Open(filepath.Join(dir, frameio.FrameName(2)))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	got, err := png.Decode(r)
	if err != nil {
		t.Fatal(err)
	}
	if r, _, _, _ := got.At(0, 0).RGBA(); got.Bounds().Dx() != 4 || r>>8 != 200 {
		t.Fatalf("decoded frame %v, first red %d", got.Bounds(), r>>8)
	}
}
