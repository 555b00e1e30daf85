package overlay

import (
	"image"
	"image/color"
	"testing"

	"tilebench/patch"
)

func grid(t testing.TB, w, h, p int) *patch.Grid {
	t.Helper()
	g, err := patch.NewGrid(patch.GridConfig{Width: w, Height: h, PatchW: p})
	if err != nil {
		t.Fatal(err)
	}
	return g
}

func TestParse(t *testing.T) {
	for in, want := range map[string]Spec{
		"": {}, "none": {}, "attention": {Heat: true}, "top:3": {Top: 3},
		"attention+top:2": {Heat: true, Top: 2}, "top:1+attention": {Heat: true, Top: 1},
	} {
		got, err := Parse(in)
		if err != nil || got != want {
			t.Errorf("Parse(%q) = %+v, %v; want %+v", in, got, err, want)
		}
		if again, err := Parse(got.String()); err != nil || again != got {
			t.Errorf("Parse(%q).String() = %q does not read back", in, got.String())
		}
	}
	for _, in := range []string{"heat", "top:", "top:0", "top:-1", "top:x", "top:99999999999", "attention+attention", "top:1+top:2", "+", "attention+"} {
		if _, err := Parse(in); err == nil {
			t.Errorf("Parse(%q) accepted", in)
		}
	}
}

func FuzzParse(f *testing.F) {
	for _, s := range []string{"attention", "top:3", "attention+top:2", "none", "top:x"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		sp, err := Parse(s)
		if err != nil {
			return
		}
		if sp.Top < 0 || sp.Top > MaxTop {
			t.Fatalf("Parse(%q) top %d", s, sp.Top)
		}
		if again, err := Parse(sp.String()); err != nil || again != sp {
			t.Fatalf("Parse(%q) = %+v does not read back from %q", s, sp, sp.String())
		}
	})
}

// Scrambled tokens: the weight of each token lands on the cell its
// content came from (SourceCells) and on the cell it sits in (SeenCells).
func TestCellsFollowTheRecord(t *testing.T) {
	g := grid(t, 32, 24, 8)
	pipe, err := patch.NewPipeline(g, patch.Spec{Scramble: "full", NoiseTokens: 2, Duplicates: 1})
	if err != nil {
		t.Fatal(err)
	}
	src := patch.NewTokenSet(g.N(), g.D())
	src.N = g.N()
	for i := 0; i < g.N(); i++ {
		src.Pos[i] = g.Cell(i)
	}
	dst := patch.NewTokenSet(pipe.Capacity(), g.D())
	var rec patch.FrameRecord
	pipe.Reset(7)
	if err := pipe.Apply(0, src, dst, &rec); err != nil {
		t.Fatal(err)
	}
	// Token k weighs 1 + its source cell, 100 for noise tokens.
	w := make([]float32, dst.N)
	for k := range w {
		if j := rec.Perm[k]; j >= 0 {
			w[k] = float32(1 + j)
		} else {
			w[k] = 100
		}
	}
	cells := make([]float32, g.N())
	SourceCells(cells, w, dst.Pos, &rec, g)
	dup := rec.Perm[dst.N-1]
	for j, v := range cells {
		want := float32(1 + j)
		if j == dup {
			want *= 2
		}
		if v != want {
			t.Fatalf("source cell %d: weight %v, want %v", j, v, want)
		}
	}
	SeenCells(cells, w, dst.Pos, g)
	var total float32
	for k := 0; k < rec.Real; k++ {
		c := g.Index(dst.Pos[k])
		if cells[c] < w[k] {
			t.Fatalf("seen cell %d holds %v, less than token %d's %v", c, cells[c], k, w[k])
		}
		total += w[k]
	}
	var sum float32
	for _, v := range cells {
		sum += v
	}
	if sum != total+w[dst.N-1] {
		t.Fatalf("seen cells sum to %v, real tokens and the duplicate weigh %v (noise tokens have no cell)", sum, total+w[dst.N-1])
	}
}

func flat(w, h int, c color.RGBA) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			img.SetRGBA(x, y, c)
		}
	}
	return img
}

func TestHeatTint(t *testing.T) {
	g := grid(t, 16, 8, 8) // two cells
	grey := color.RGBA{100, 150, 200, 255}
	img := flat(16, 8, grey)
	var d Drawer
	d.Draw(img, g, []float32{0.5, 0.25}, Spec{Heat: true})
	// Worked by hand from the formula on tint: cell 0 has t = 1:
	// f = 1, a = 0.45, out = pix·0.55 + amber·0.45.
	// R: 100·0.55 + 255·0.45 = 169.75 → 170; G: 150·0.55 + 176·0.45 = 161.7 → 162;
	// B: 200·0.55 + 0·0.45 = 110.
	if got, want := img.RGBAAt(3, 3), (color.RGBA{170, 162, 110, 255}); got != want {
		t.Errorf("most attended cell: %v, want %v", got, want)
	}
	// Cell 1 has t = 0.5: f = 0.675, a = 0.225, keep = 0.523125,
	// ink share = 0.251875. R: 100·0.523125 + 16·0.251875 + 255·0.225 =
	// 52.3125 + 4.03 + 57.375 = 113.7175 → 114; G: 78.46875 + 3.0225 +
	// 39.6 = 121.09 → 121; B: 104.625 + 10.075 + 0 = 114.7 → 115.
	if got, want := img.RGBAAt(12, 3), (color.RGBA{114, 121, 115, 255}); got != want {
		t.Errorf("half attended cell: %v, want %v", got, want)
	}
	// All zero: nothing drawn.
	img2 := flat(16, 8, grey)
	d.Draw(img2, g, []float32{0, 0}, Spec{Heat: true, Top: 2})
	if img2.RGBAAt(0, 0) != grey || img2.RGBAAt(12, 4) != grey {
		t.Error("zero weights changed the frame")
	}
}

func TestTopOutlines(t *testing.T) {
	g := grid(t, 32, 16, 8) // 4×2 cells
	grey := color.RGBA{90, 90, 90, 255}
	img := flat(32, 16, grey)
	cells := []float32{0.1, 0.7, 0, 0.2, 0.05, 0.7, 0.3, 0}
	var d Drawer
	d.Draw(img, g, cells, Spec{Top: 3})
	// The top three: cells 1 and 5 (0.7, lower index first), then 6 (0.3).
	if k := d.top(cells, 3); k != 3 || d.order[0] != 1 || d.order[1] != 5 || d.order[2] != 6 {
		t.Fatalf("top 3 = %v", d.order[:k])
	}
	for c := 0; c < g.N(); c++ {
		r := g.Rect(g.Cell(c))
		outlined := c == 1 || c == 5 || c == 6
		edge, inner, centre := img.RGBAAt(r.Min.X, r.Min.Y+3), img.RGBAAt(r.Min.X+1, r.Min.Y+3), img.RGBAAt(r.Min.X+3, r.Min.Y+3)
		if outlined && (edge != Ink || inner != Ring || centre != grey) {
			t.Errorf("cell %d: edge %v inner %v centre %v, want ink, ring, untouched", c, edge, inner, centre)
		}
		if !outlined && (edge != grey || inner != grey) {
			t.Errorf("cell %d is not among the top three but was drawn on", c)
		}
	}
	// Fewer positive weights than K: only those.
	if k := d.top([]float32{0, 2, 0}, 3); k != 1 || d.order[0] != 1 {
		t.Fatalf("top of one positive weight = %v", d.order[:k])
	}
}

func TestDrawClipsToFrame(t *testing.T) {
	// 20×20 frame at patch 8 with padding: 3×3 cells reaching to 24.
	g := grid(t, 20, 20, 8)
	img := flat(20, 20, color.RGBA{50, 60, 70, 255})
	cells := make([]float32, g.N())
	cells[8] = 1 // the corner cell, mostly padding
	var d Drawer
	d.Draw(img, g, cells, Spec{Heat: true, Top: 1})
	// The cell covers (16,16)-(24,24); the frame keeps (16,16)-(20,20).
	if img.RGBAAt(16, 18) != Ink || img.RGBAAt(17, 18) != Ring || img.RGBAAt(19, 19) != Ink {
		t.Errorf("corner cell outline: %v %v %v", img.RGBAAt(16, 18), img.RGBAAt(17, 18), img.RGBAAt(19, 19))
	}
	if img.RGBAAt(5, 5) == (color.RGBA{50, 60, 70, 255}) {
		t.Error("an unattended cell was not dimmed")
	}
}

func TestDrawDoesNotAllocate(t *testing.T) {
	g := grid(t, 96, 96, 8)
	img := flat(96, 96, color.RGBA{1, 2, 3, 255})
	cells := make([]float32, g.N())
	for i := range cells {
		cells[i] = float32(i % 7)
	}
	var d Drawer
	d.Draw(img, g, cells, Spec{Heat: true, Top: 5})
	if a := testing.AllocsPerRun(20, func() { d.Draw(img, g, cells, Spec{Heat: true, Top: 5}) }); a != 0 {
		t.Fatalf("%v allocations per draw", a)
	}
}

func BenchmarkDraw96(b *testing.B) {
	g := grid(b, 96, 96, 8)
	img := flat(96, 96, color.RGBA{1, 2, 3, 255})
	cells := make([]float32, g.N())
	for i := range cells {
		cells[i] = float32(i % 7)
	}
	var d Drawer
	b.ReportAllocs()
	for b.Loop() {
		d.Draw(img, g, cells, Spec{Heat: true, Top: 5})
	}
}

func TestLegend(t *testing.T) {
	img := Legend(6)
	if img.Rect.Dx() != 48 || img.Rect.Dy() != 15 {
		t.Fatalf("legend is %v", img.Rect)
	}
	// Left end dimmed towards ink, right end amber-washed: the tint of
	// weights 0 and 1 on grey (see TestHeatTint for the formula).
	left, right := img.RGBAAt(1, 1), img.RGBAAt(46, 1)
	if left.R >= LegendGrey.R || right.R <= LegendGrey.R || right.B >= LegendGrey.B {
		t.Fatalf("ramp ends %v and %v on grey %v", left, right, LegendGrey)
	}
	if img.RGBAAt(21, 9) != Ink || img.RGBAAt(22, 10) != Ring {
		t.Fatalf("outline sample: %v %v", img.RGBAAt(21, 9), img.RGBAAt(22, 10))
	}
}
