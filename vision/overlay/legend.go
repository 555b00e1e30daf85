package overlay

import (
	"image"
	"image/color"

	"tilebench/patch"
)

// LegendGrey is the base the legend's ramp is drawn on.
var LegendGrey = color.RGBA{R: 128, G: 128, B: 128, A: 255}

// Legend draws the overlay's key: on a grey base, a ramp of eight cells
// from no attention (left, dimmed) to the most (right, amber), and below
// it a cell outlined as the top cells are. cell is the ramp cell's side
// in pixels (at least 4).
func Legend(cell int) *image.RGBA {
	cell = max(cell, 4)
	const steps = 8
	w, h := steps*cell, 2*cell+cell/2
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for i := 0; i < len(img.Pix); i += 4 {
		img.Pix[i], img.Pix[i+1], img.Pix[i+2], img.Pix[i+3] = LegendGrey.R, LegendGrey.G, LegendGrey.B, 255
	}
	g, err := patch.NewGrid(patch.GridConfig{Width: w, Height: cell, PatchW: cell})
	if err != nil {
		return img
	}
	ramp := img.SubImage(image.Rect(0, 0, w, cell)).(*image.RGBA)
	cells := make([]float32, steps)
	for i := range cells {
		cells[i] = float32(i) / (steps - 1)
	}
	var d Drawer
	d.Draw(ramp, g, cells, Spec{Heat: true})
	x0 := (w - cell) / 2
	outline(img, image.Rect(x0, cell+cell/2, x0+cell, 2*cell+cell/2))
	return img
}
