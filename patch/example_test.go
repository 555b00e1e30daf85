package patch_test

import (
	"bytes"
	"fmt"
	"image"
	"image/color"

	"tilebench/patch"
)

// Cut a 4×2 grey frame into 2×2 patches and put it back together.
func ExampleTokenizer() {
	frame := image.NewGray(image.Rect(0, 0, 4, 2))
	for i := range frame.Pix {
		frame.Pix[i] = uint8(i * 30)
	}
	g, err := patch.NewGrid(patch.GridConfig{Width: 4, Height: 2, Channels: 1, PatchW: 2})
	if err != nil {
		panic(err)
	}
	tk := patch.NewTokenizer(g)
	ts := patch.NewTokenSet(g.N(), g.D())
	if err := tk.Tokenize(frame, ts); err != nil {
		panic(err)
	}
	for i := 0; i < ts.N; i++ {
		fmt.Printf("token %d at %v: %.3f\n", i, ts.Pos[i], ts.Token(i))
	}
	back := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
	if err := tk.Assemble(ts, back); err != nil {
		panic(err)
	}
	fmt.Println("pixel (3,1):", color.GrayModel.Convert(back.At(3, 1)).(color.Gray).Y)
	// Output:
	// token 0 at {0 0}: [0.000 0.118 0.471 0.588]
	// token 1 at {0 1}: [0.235 0.353 0.706 0.824]
	// pixel (3,1): 210
}

// Scramble and occlude the tokens of a frame, record what was done, and
// undo the scramble from the record.
func ExamplePipeline() {
	g, _ := patch.NewGrid(patch.GridConfig{Width: 6, Height: 4, Channels: 1, PatchW: 2})
	frame := image.NewGray(image.Rect(0, 0, 6, 4))
	for i := range frame.Pix {
		frame.Pix[i] = uint8(i * 10)
	}
	tk := patch.NewTokenizer(g)
	src := patch.NewTokenSet(g.N(), g.D())
	_ = tk.Tokenize(frame, src)

	spec, err := patch.ParseSpec("scramble=full every=0 occlude=random:0.34 fill=black")
	if err != nil {
		panic(err)
	}
	p, err := patch.NewPipeline(g, spec)
	if err != nil {
		panic(err)
	}
	p.Reset(7)
	dst := patch.NewTokenSet(p.Capacity(), g.D())
	var rec patch.FrameRecord
	if err := p.Apply(0, src, dst, &rec); err != nil {
		panic(err)
	}
	fmt.Println("spec:", spec)
	fmt.Println("occluded cells:", len(rec.Mask), "of", g.N())

	back := patch.NewTokenSet(g.N(), g.D())
	if err := rec.Unscramble(g, dst, back); err != nil {
		panic(err)
	}
	same := 0
	for j := 0; j < g.N(); j++ {
		if fmt.Sprint(back.Token(j)) == fmt.Sprint(src.Token(j)) {
			same++
		}
	}
	fmt.Println("cells restored unchanged:", same)
	// Output:
	// spec: scramble=full occlude=random:0.34
	// occluded cells: 2 of 6
	// cells restored unchanged: 4
}

// Record a short scrambled sequence in a manifest, read it back and use
// it to put a frame's tokens back in order.
func ExampleManifest() {
	g, _ := patch.NewGrid(patch.GridConfig{Width: 8, Height: 8, Channels: 1, PatchW: 4})
	spec := patch.Spec{Scramble: "full", Every: 1, Rotate: true}
	p, _ := patch.NewPipeline(g, spec)
	p.Reset(42)
	m := patch.NewManifest(g, spec, 42)

	frame := image.NewGray(image.Rect(0, 0, 8, 8))
	for i := range frame.Pix {
		frame.Pix[i] = uint8(i)
	}
	src := patch.NewTokenSet(g.N(), g.D())
	_ = patch.NewTokenizer(g).Tokenize(frame, src)
	dst := patch.NewTokenSet(p.Capacity(), g.D())
	var rec patch.FrameRecord
	for t := 0; t < 3; t++ {
		_ = p.Apply(t, src, dst, &rec)
		m.Append(&rec)
	}

	var buf bytes.Buffer
	_ = m.Write(&buf) // or m.WriteFile(path), atomically
	back, err := patch.ReadManifest(&buf, g)
	if err != nil {
		panic(err)
	}
	restored := patch.NewTokenSet(g.N(), g.D())
	if err := back.Unscramble(2, dst, restored); err != nil {
		panic(err)
	}
	fmt.Println("frames:", len(back.Frames), "spec:", back.Spec)
	fmt.Println("restored exactly:", fmt.Sprint(restored.Data) == fmt.Sprint(src.Data))
	// Output:
	// frames: 3 spec: scramble=full every=1 rotate=true
	// restored exactly: true
}
