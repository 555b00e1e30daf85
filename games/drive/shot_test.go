package drive

import (
	"image"
	"image/png"
	"os"
	"fmt"
	"testing"
	"tilebench/games"
)

func TestShot(t *testing.T) {
	for vi, v := range []string{"", "twisty+tarn", "clutter+grain", "large"} {
		g := newGame(t, v)
		g.Reset(games.HeldOut(3))
		act := make([]float64, 2)
		W, H := g.cfg.Width, g.cfg.Height
		sheet := image.NewRGBA(image.Rect(0, 0, 4*W, 2*H))
		img := image.NewRGBA(image.Rect(0, 0, W, H))
		for k := 0; k < 8; k++ {
			for j := 0; j < 60; j++ { g.Expert().Act(act); g.Step(act) }
			g.Render(img)
			for y := 0; y < H; y++ { copy(sheet.Pix[(y+(k/4)*H)*sheet.Stride+(k%4)*W*4:], img.Pix[y*img.Stride:y*img.Stride+4*W]) }
		}
		f, _ := os.Create(fmt.Sprintf("/tmp/shot%d.png", vi))
		png.Encode(f, sheet)
		f.Close()
		wd := g.world
		wimg := &image.RGBA{Pix: make([]byte, 4*wd.w*wd.h), Stride: 4 * wd.w, Rect: image.Rect(0, 0, wd.w, wd.h)}
		for i, p := range wd.pix { wimg.Pix[4*i], wimg.Pix[4*i+1], wimg.Pix[4*i+2], wimg.Pix[4*i+3] = uint8(p), uint8(p>>8), uint8(p>>16), 255 }
		f, _ = os.Create(fmt.Sprintf("/tmp/world%d.png", vi))
		png.Encode(f, wimg)
		f.Close()
	}
}
