package frameio

import (
	"bytes"
	"image"
	"os"
	"path/filepath"
	"sync"
	"testing"
)

// TestRandomMatchesSequential: frames read in any order, from many
// goroutines, equal the sequential reader's, for .npy (RGB and grey) and
// a frame folder.
func TestRandomMatchesSequential(t *testing.T) {
	dir := t.TempDir()
	src, err := Builtin("drift", 9, 20, 14)
	if err != nil {
		t.Fatal(err)
	}
	want, err := ReadAll(src)
	if err != nil {
		t.Fatal(err)
	}
	for _, ch := range []int{3, 1} {
		path := filepath.Join(dir, "f.npy")
		f, _ := os.Create(path)
		w, _ := NewNPYWriter(f, 20, 14, ch, len(want))
		for _, fr := range want {
			w.WriteFrame(fr)
		}
		w.Close()
		f.Close()
		seq, err := Open(path, Options{})
		if err != nil {
			t.Fatal(err)
		}
		exp, _ := ReadAll(seq)
		seq.Close()
		r, err := OpenRandom(path, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if r.Info().Frames != len(want) {
			t.Fatalf("frames %d", r.Info().Frames)
		}
		var wg sync.WaitGroup
		for g := 0; g < 4; g++ {
			wg.Add(1)
			go func(g int) {
				defer wg.Done()
				dst := image.NewRGBA(image.Rect(0, 0, 20, 14))
				for k := len(exp) - 1; k >= 0; k-- {
					i := (k + g) % len(exp)
					if err := r.ReadFrameAt(i, dst); err != nil {
						t.Error(err)
						return
					}
					if !bytes.Equal(dst.Pix, exp[i].Pix) {
						t.Errorf("%d channels: frame %d differs", ch, i)
					}
				}
			}(g)
		}
		wg.Wait()
		if err := r.ReadFrameAt(len(exp), image.NewRGBA(image.Rect(0, 0, 20, 14))); err == nil {
			t.Error("frame past the end: no error")
		}
		r.Close()
	}
}
