package patch

import (
	"fmt"
	"image"
	"image/color"
	"os"
	"sort"
	"testing"
	"time"

	"github.com/disintegration/imaging"
)

// benchCorruptions are the steps timed on a 96×96×3 frame; the targets
// (one core): blur σ=2 under 150 µs, resize down and back under 100 µs,
// grid shift under 10 µs, all but JPEG with no allocations.
var benchCorruptions = []struct{ name, spec string }{
	{"Blur2", "blur:2"},
	{"MotionBlur9", "motionblur:9:30"},
	{"Resolution05", "resolution:0.5"},
	{"JPEG40", "jpeg:40"},
	{"Gamma", "gamma:1.5"},
	{"Sharpen1", "sharpen:1"},
	{"SaltPepper", "saltpepper:0.05"},
	{"Dead", "dead:0.02"},
	{"Shift", "shift:3:2"},
	{"ShiftWrap", "shift:3:2:wrap"},
	{"Shake", "shake:3"},
	{"Rotate", "rotate:5"},
	{"Scale", "scale:0.9"},
}

func benchCorruptSetup(b testing.TB, spec string) (*Pipeline, *image.RGBA) {
	g := mustGrid(b, GridConfig{Width: 96, Height: 96, PatchW: 8})
	p, err := NewPipeline(g, Spec{Corrupt: spec})
	if err != nil {
		b.Fatal(err)
	}
	p.Reset(1)
	return p, photoFrame(b)
}

// BenchmarkCorrupt times each corruption alone (CorruptFrame: the frame
// copied into the pipeline's buffer, then the step). Copy is the
// baseline: one plain copy of the frame's bytes, to divide by.
func BenchmarkCorrupt(b *testing.B) {
	b.Run("Copy", func(b *testing.B) {
		_, f := benchCorruptSetup(b, "")
		dst := image.NewRGBA(f.Rect)
		b.ReportAllocs()
		for b.Loop() {
			copy(dst.Pix, f.Pix)
		}
	})
	for _, bc := range benchCorruptions {
		b.Run(bc.name, func(b *testing.B) {
			p, f := benchCorruptSetup(b, bc.spec)
			b.ReportAllocs()
			t := 0
			for b.Loop() {
				if _, err := p.CorruptFrame(t, f); err != nil {
					b.Fatal(err)
				}
				t++
			}
		})
	}
}

// BenchmarkCorruptImaging times the library calls the kernels replace
// (each allocates its result and fans out over goroutines).
func BenchmarkCorruptImaging(b *testing.B) {
	f := photoFrame(b)
	nr := &image.NRGBA{Pix: f.Pix, Stride: f.Stride, Rect: f.Rect}
	b.Run("Blur2", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			imaging.Blur(nr, 2)
		}
	})
	b.Run("Resolution05", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			imaging.Resize(imaging.Resize(nr, 48, 48, imaging.Box), 96, 96, imaging.Linear)
		}
	})
}

// imagingCalls are imaging's own functions for the kernels that follow
// them, timed beside ours by TestCorruptSpeed.
var imagingCalls = map[string]func(*image.NRGBA){
	"Blur2":        func(m *image.NRGBA) { imaging.Blur(m, 2) },
	"Sharpen1":     func(m *image.NRGBA) { imaging.Sharpen(m, 1) },
	"Gamma":        func(m *image.NRGBA) { imaging.AdjustGamma(m, 1.5) },
	"Resolution05": func(m *image.NRGBA) { imaging.Resize(imaging.Resize(m, 48, 48, imaging.Box), 96, 96, imaging.Linear) },
	"Rotate":       func(m *image.NRGBA) { imaging.Rotate(m, 5, color.Black) },
}

// TestCorruptSpeed times single frames of each corruption interleaved
// with a plain copy of the frame and logs the medians and their ratio
// (steadier than a benchmark's mean on a busy machine), checking the
// targets. Runs only with TILEBENCH_SPEED=1.
func TestCorruptSpeed(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("set TILEBENCH_SPEED=1 to time single frames")
	}
	targets := map[string]time.Duration{"Blur2": 150 * time.Microsecond, "Resolution05": 100 * time.Microsecond,
		"Shift": 10 * time.Microsecond, "ShiftWrap": 10 * time.Microsecond}
	median := func(v []float64) float64 { sort.Float64s(v); return v[len(v)/2] }
	for _, bc := range benchCorruptions {
		p, f := benchCorruptSetup(t, bc.spec)
		dst := image.NewRGBA(f.Rect)
		const n = 301
		var cor, cp []float64
		for i := 0; i < n; i++ {
			s := time.Now()
			if _, err := p.CorruptFrame(i, f); err != nil {
				t.Fatal(err)
			}
			cor = append(cor, float64(time.Since(s)))
			s = time.Now()
			copy(dst.Pix, f.Pix)
			cp = append(cp, float64(time.Since(s)))
		}
		mc, mp := median(cor), median(cp)
		lib := ""
		if call, ok := imagingCalls[bc.name]; ok {
			nr := &image.NRGBA{Pix: f.Pix, Stride: f.Stride, Rect: f.Rect}
			var im []float64
			for i := 0; i < 101; i++ {
				s := time.Now()
				call(nr)
				im = append(im, float64(time.Since(s)))
			}
			mi := median(im)
			lib = fmt.Sprintf("  imaging %8.1f µs (%.1fx ours)", mi/1e3, mi/mc)
		}
		t.Logf("speed: %-13s %8.1f µs  copy %6.2f µs  ratio %7.1f%s", bc.name, mc/1e3, mp/1e3, mc/mp, lib)
		if lim, ok := targets[bc.name]; ok && time.Duration(mc) > lim {
			t.Errorf("%s: median %.1f µs, target %v", bc.name, mc/1e3, lim)
		}
	}
}
