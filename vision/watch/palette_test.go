package watch

import (
	"image"
	"image/color"
	"math"
	"testing"

	"tilebench/games"
	"tilebench/vision/overlay"
)

// The outline's inner ring must stand out on every game's frames, in
// every variation: no rendered pixel may come near its colour. Distance
// is Euclidean in RGB; 80 levels (about a third of the range) is the bar
// (common practice for "clearly different" in flat-colour graphics).
func TestRingStandsOutOnEveryPalette(t *testing.T) {
	ring := overlay.Ring
	for _, name := range games.Names() {
		for _, v := range append([]string{""}, games.Variations(name)...) {
			g, err := games.Build(name, games.Setup{Variation: v})
			if err != nil {
				continue // a variation that does not stand alone
			}
			sp := g.Spec()
			frame := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
			act := make([]float64, sp.Action.Dim())
			ex, _ := g.(games.WithExpert)
			closest := math.Inf(1)
			var at color.RGBA
			for seed := uint64(0); seed < 3; seed++ {
				g.Reset(games.HeldOut(int(seed)))
				for step := 0; step < 60; step++ {
					g.Render(frame)
					for i := 0; i < len(frame.Pix); i += 4 {
						c := color.RGBA{frame.Pix[i], frame.Pix[i+1], frame.Pix[i+2], 255}
						if d := dist(c, ring); d < closest {
							closest, at = d, c
						}
					}
					if ex != nil {
						ex.Expert().Act(act)
					}
					if st, err := g.Step(act); err != nil || st.Done {
						break
					}
				}
			}
			t.Logf("%s %q: nearest colour to the ring %v is %v at distance %.0f", name, v, ring, at, closest)
			if closest < 80 {
				t.Errorf("%s variation %q: colour %v is within %.0f of the outline's ring %v", name, v, at, closest, ring)
			}
		}
	}
}

func dist(a, b color.RGBA) float64 {
	dr, dg, db := float64(a.R)-float64(b.R), float64(a.G)-float64(b.G), float64(a.B)-float64(b.B)
	return math.Sqrt(dr*dr + dg*dg + db*db)
}
