package frameio_test

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"os"
	"path/filepath"
	"strings"

	"tilebench/patch"
	"tilebench/patch/frameio"
)

func ExampleSortNatural() {
	names := []string{"f10.png", "f2.png", "f1.png"}
	frameio.SortNatural(names)
	fmt.Println(names)
	// Output: [f1.png f2.png f10.png]
}

func ExampleNPYWriter() {
	var buf bytes.Buffer
	w, _ := frameio.NewNPYWriter(&buf, 4, 2, 3, 1) // 1 frame of 4×2 RGB
	w.WriteFrame(image.NewRGBA(image.Rect(0, 0, 4, 2)))
	w.Close()
	b := buf.Bytes()
	hdr := len(frameio.NPYHeader([]int{1, 2, 4, 3}))
	fmt.Printf("%q\n", strings.TrimRight(string(b[10:hdr]), " \n"))
	fmt.Println(hdr, len(b)-hdr)
	// Output:
	// "{'descr': '|u1', 'fortran_order': False, 'shape': (1, 2, 4, 3), }"
	// 128 24
}

func ExampleOpen() {
	r, err := frameio.Open("builtin:drift", frameio.Options{Width: 64, Height: 48, Frames: 10})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer r.Close()
	frames, _ := frameio.ReadAll(r)
	fmt.Println(r.Info().Name, len(frames), frames[0].Bounds().Size())
	// Output: builtin:drift 10 (64,48)
}

// ExampleTransform exports a scrambled sequence with its manifest, the
// way "tilebench export" does.
func ExampleTransform() {
	dir, _ := os.MkdirTemp("", "export-example")
	defer os.RemoveAll(dir)
	r, _ := frameio.Builtin("drift", 8, 60, 44)
	info := r.Info()
	g, _ := patch.NewGrid(patch.GridConfig{Width: info.Width, Height: info.Height, PatchW: 8, Edge: patch.EdgePad})
	spec := patch.Spec{Scramble: "full", Occlude: "random:0.25"}
	p, _ := patch.NewPipeline(g, spec)
	p.Reset(7)
	m := patch.NewManifest(g, spec, 7)
	out, _ := frameio.NewOutputs(frameio.OutputConfig{Dir: dir, Formats: []string{frameio.AsNPY, frameio.AsGIF}, Frames: info.Frames}, g.OutW, g.OutH)
	n, err := frameio.Transform(r, patch.NewTokenizer(g), p, m, out, nil)
	if err != nil {
		out.Abort()
		fmt.Println(err)
		return
	}
	files, _ := out.Commit()
	m.WriteFile(filepath.Join(dir, "manifest.json"))
	for _, f := range files {
		fmt.Println(filepath.Base(f))
	}
	fmt.Println(n, "frames of", g.OutW, "x", g.OutH)
	// Output:
	// frames.gif
	// frames.npy
	// 8 frames of 64 x 48
}

// A sequence of few colours gets exactly those colours as its GIF
// palette; past 256 colours the palette is built by median cut.
func ExampleColorCounts() {
	a := image.NewRGBA(image.Rect(0, 0, 4, 2))
	for i := range a.Pix {
		a.Pix[i] = 0xff
	}
	a.Set(1, 1, color.RGBA{200, 40, 10, 255})
	var c frameio.ColorCounts
	c.Add(a)
	fmt.Println(c.Len(), c.Palette(0))

	ramp := image.NewRGBA(image.Rect(0, 0, 64, 64))
	for y := range 64 {
		for x := range 64 {
			ramp.Set(x, y, color.RGBA{uint8(4 * x), uint8(4 * y), 128, 255})
		}
	}
	var r frameio.ColorCounts
	r.Add(ramp)
	fmt.Println(r.Len(), len(r.Palette(0)))
	// Output:
	// 2 [{200 40 10 255} {255 255 255 255}]
	// 4096 256
}
