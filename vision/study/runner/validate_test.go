package runner

import (
	"bytes"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/policies"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
	"tilebench/vision/weights"
)

// A study file that states 0 for a key whose 0 means "the default", or a
// negative seed, is refused by line and key; it used to take the default
// silently (0) or wrap the seed to 2^64−1.
func TestParseExplicitValues(t *testing.T) {
	for _, c := range []struct{ toml, want string }{
		{"episodes = 0\n", `line 1: key "episodes": 0: want 1..1000000`},
		{"name = \"x\"\n[stats]\nresamples = 0\n", `line 3: key "stats.resamples": 0: want 100..1000000`},
		{"[stats]\nconfidence = 0.0\n", `key "stats.confidence": 0`},
		{"[stats]\nthreshold = 0.0\n", `key "stats.threshold": 0`},
		{"seed = -1\n", `line 1: key "seed": -1: want 0 or more`},
		{"workers = 100000000\n", `key "workers": 100000000 workers: at most`},
		{"workers = -3\n", `key "workers": -3 workers`},
	} {
		_, err := study.Parse([]byte(c.toml))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: %v, want %q", c.toml, err, c.want)
		}
	}
	// Left out, each takes its default; forced, many workers are taken.
	d, err := study.Parse([]byte("seed = 7\n"))
	if err != nil || d.Episodes != study.DefaultEpisodes || d.Stats.Resamples != study.DefaultResamples || d.Seed != 7 {
		t.Fatalf("defaults: %+v, %v", d, err)
	}
	if d, err := study.Parse([]byte("workers = 100000000\nforce_workers = true\n")); err != nil || d.Workers != 100000000 {
		t.Fatalf("forced workers: %v", err)
	}
	if vision.MaxWorkers() < vision.WorkersPerCore {
		t.Fatalf("MaxWorkers %d", vision.MaxWorkers())
	}
}

// A study with one weights file and no patch key plays at the file's
// patch size, as docs/studies.md says, whether it comes from a file or
// from the flags; it used to take patch 8 from a file.
func TestPatchFromWeightsFile(t *testing.T) {
	src := filepath.Join("..", "..", "..", "testdata", "policies", "paddle-attention-p20.safetensors")
	d, err := study.Parse([]byte("game = \"paddle\"\n[policy]\nsource = '" + src + "'\n"))
	if err != nil {
		t.Fatal(err)
	}
	if len(d.Patch) != 1 || d.Patch[0] != "20" {
		t.Fatalf("patch %v, want the file's 20", d.Patch)
	}
	d, err = study.Parse([]byte("game = \"paddle\"\npatch = 4\n[policy]\nsource = '" + src + "'\n"))
	if err != nil || d.Patch[0] != "4" {
		t.Fatalf("a patch key still wins: %v %v", d.Patch, err)
	}
}

// A weights file that says it was trained on another game is refused
// when played, even when its geometry happens to fit; it used to load
// and play.
func TestWeightsGameMismatch(t *testing.T) {
	src := filepath.Join("..", "..", "..", "testdata", "policies", "paddle-attention-p20.safetensors")
	f, err := weights.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	if f.Metadata[weights.KeyGame] != "paddle" {
		t.Fatalf("fixture says game %q", f.Metadata[weights.KeyGame])
	}
	n, err := nets.FromFile(f)
	if err != nil {
		t.Fatal(err)
	}
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	if err := policies.CheckGeometry(src, n, g.Spec(), n.Grid()); err != nil {
		t.Fatalf("own game: %v", err)
	}
	f.SetMeta(weights.KeyGame, "drive")
	other := filepath.Join(t.TempDir(), "w.safetensors")
	if err := weights.WriteFile(other, f); err != nil {
		t.Fatal(err)
	}
	if err := policies.CheckGeometry(other, n, g.Spec(), n.Grid()); err != nil {
		t.Fatalf("geometry alone no longer checks the game: %v", err)
	}
	if err := policies.CheckGame(other, g.Spec()); err == nil || !strings.Contains(err.Error(), "trained on game drive, this run plays paddle") {
		t.Fatalf("game mismatch: %v", err)
	}
}

// A strip image whose header claims a huge size is skipped from its
// header, with next to nothing allocated, and the report still builds.
func TestCraftedStripSkipped(t *testing.T) {
	p := testPlan(t)
	dir := t.TempDir()
	runStudy(t, p, dir, Options{Workers: 2})
	// A real PNG with its IHDR size patched to 30000×30000 (CRC redone).
	var b bytes.Buffer
	png.Encode(&b, image.NewGray(image.Rect(0, 0, 1, 1)))
	data := b.Bytes()
	binary.BigEndian.PutUint32(data[16:], 30000)
	binary.BigEndian.PutUint32(data[20:], 30000)
	binary.BigEndian.PutUint32(data[29:], crc32.ChecksumIEEE(data[12:29]))
	os.WriteFile(filepath.Join(dir, study.StripsDir, "cell-0000.png"), data, 0o644)
	var m0, m1 runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&m0)
	img, _ := analysis.LoadStrip(dir, 0)
	runtime.ReadMemStats(&m1)
	if img != nil {
		t.Fatal("crafted strip loaded")
	}
	if n := m1.TotalAlloc - m0.TotalAlloc; n > 4<<20 {
		t.Fatalf("%d bytes allocated for a crafted strip", n)
	}
	if err := analysis.WriteReport(dir); err != nil {
		t.Fatalf("report with a crafted strip: %v", err)
	}
}
