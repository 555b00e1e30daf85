package overlay

import (
	"os"
	"path/filepath"
	"sort"
	"testing"
	"time"

	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision/nets"
)

// exportRun exports frames of a built-in scene as PNGs and a contact
// sheet, with the drive p8 policy's overlay when withOverlay, and returns
// the time per frame.
func exportRun(tb testing.TB, n nets.Net, frames int, withOverlay bool) time.Duration {
	tb.Helper()
	g := n.Grid()
	r, err := frameio.Open("builtin:drift", frameio.Options{Width: g.Width, Height: g.Height, Frames: frames})
	if err != nil {
		tb.Fatal(err)
	}
	defer r.Close()
	p, err := patch.NewPipeline(g, patch.Spec{Scramble: "full", Occlude: "random:0.3"})
	if err != nil {
		tb.Fatal(err)
	}
	p.Reset(1)
	dir := tb.TempDir()
	out, err := frameio.NewOutputs(frameio.OutputConfig{Dir: dir, Formats: []string{frameio.AsPNG, frameio.AsSheet}, Frames: frames,
		Channels: 3, Sheet: frameio.SheetConfig{MaxFrames: 16, Columns: 4, Scale: 2}}, g.OutW, g.OutH)
	if err != nil {
		tb.Fatal(err)
	}
	m := patch.NewManifest(g, patch.Spec{}, 1)
	start := time.Now()
	var k int
	if withOverlay {
		k, err = Export(r, patch.NewTokenizer(g), p, m, out, n, n.Space().Dim(), Spec{Heat: true, Top: 3}, nil)
	} else {
		k, err = frameio.Transform(r, patch.NewTokenizer(g), p, m, out, nil)
	}
	if err != nil {
		tb.Fatal(err)
	}
	if _, err := out.Commit(); err != nil {
		tb.Fatal(err)
	}
	el := time.Since(start)
	if k != frames {
		tb.Fatalf("%d frames written, want %d", k, frames)
	}
	if withOverlay {
		if _, err := os.Stat(filepath.Join(dir, "sheet.png")); err != nil {
			tb.Fatal(err)
		}
	}
	return el / time.Duration(frames)
}

func loadP8(tb testing.TB) nets.Net {
	tb.Helper()
	n, err := nets.Load(filepath.Join(reftest.Root(), "testdata", "policies", "drive-attention-p8.safetensors"))
	if err != nil {
		tb.Fatal(err)
	}
	return n
}

// TestSpeedExportOverlay measures, in one run, export's time per frame
// with and without the overlay (the policy's forward pass and the drawing
// included) and holds the overlay to at most 20% more. Medians of
// alternating runs; run with TILEBENCH_SPEED=1.
func TestSpeedExportOverlay(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("timing test: TILEBENCH_SPEED=1")
	}
	n := loadP8(t)
	var plain, marked []time.Duration
	for i := 0; i < 7; i++ {
		plain = append(plain, exportRun(t, n, 40, false))
		marked = append(marked, exportRun(t, n, 40, true))
	}
	med := func(d []time.Duration) time.Duration {
		sort.Slice(d, func(i, j int) bool { return d[i] < d[j] })
		return d[len(d)/2]
	}
	a, b := med(plain), med(marked)
	ratio := float64(b) / float64(a)
	t.Logf("export per frame: %v plain, %v with overlay: ratio %.3f", a, b, ratio)
	if ratio > 1.2 {
		t.Fatalf("overlay makes export %.0f%% slower per frame, want at most 20%%", 100*(ratio-1))
	}
}

func BenchmarkExportPlain(b *testing.B) {
	n := loadP8(b)
	for b.Loop() {
		exportRun(b, n, 20, false)
	}
}

func BenchmarkExportOverlay(b *testing.B) {
	n := loadP8(b)
	for b.Loop() {
		exportRun(b, n, 20, true)
	}
}
