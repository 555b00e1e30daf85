package record

import (
	"os"
	"path/filepath"
	"testing"
)

// FuzzResumeManifest: whatever manifest.json a folder holds, resuming
// into it returns an error or a consistent plan, and never panics; a
// refused folder keeps its bytes.
func FuzzResumeManifest(f *testing.F) {
	g, grid := setup(f, "paddle", 20)
	dir := filepath.Join(f.TempDir(), "seed")
	if _, err := Run(Config{Game: g, Grid: grid, Episodes: 1, Dir: dir}); err != nil {
		f.Fatal(err)
	}
	good, err := os.ReadFile(filepath.Join(dir, ManifestName))
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add([]byte(`{"format":1,"tool":"tilebench record","rows":-5,"episodes":[{"seed":0,"start":0,"steps":-5}]}`))
	f.Add([]byte(`{"format":1}`))
	f.Add([]byte(`[]`))
	f.Fuzz(func(t *testing.T, manifest []byte) {
		d := t.TempDir()
		if err := os.WriteFile(filepath.Join(d, ManifestName), manifest, 0o644); err != nil {
			t.Fatal(err)
		}
		err := Check(Config{Game: g, Grid: grid, Episodes: 3, Dir: d, Resume: true})
		if err != nil {
			if b, _ := os.ReadFile(filepath.Join(d, ManifestName)); string(b) != string(manifest) {
				t.Fatal("a refused folder's manifest changed")
			}
		}
	})
}
