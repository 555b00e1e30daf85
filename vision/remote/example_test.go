package remote_test

import (
	"fmt"
	"image"
	"net"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/remote"
)

// brightness turns right when the frame's top-left pixel is bright.
type brightness struct{}

func (brightness) Info() vision.Info { return vision.Info{Family: "demo", WantsFrame: true} }
func (brightness) Reset(uint64)      {}
func (brightness) Act(obs *vision.Observation, a []float64) error {
	if obs.Frame.Pix[0] > 127 {
		a[0] = 2
	} else {
		a[0] = 0
	}
	return nil
}

// A policy served over TCP (here by remote.Serve in the same process; in
// practice a Python program on another machine) used as a vision.Policy.
func Example() {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer ln.Close()
	go func() {
		c, err := ln.Accept()
		if err != nil {
			return
		}
		defer c.Close()
		remote.Serve(c, c, brightness{}, remote.ServeOptions{Name: "brightness"})
	}()

	grid, _ := patch.NewGrid(patch.GridConfig{Width: 16, Height: 16, PatchW: 8})
	spec := games.Spec{Name: "demo", Width: 16, Height: 16,
		Action: games.Controls{Kind: games.Discrete, Names: []string{"left", "stay", "right"}}}
	pol, err := remote.Open("tcp://"+ln.Addr().String(), remote.Config{Game: spec, Grid: grid})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer pol.Close()
	fmt.Println(pol.Name())

	frame := image.NewRGBA(image.Rect(0, 0, 16, 16))
	obs := &vision.Observation{Frame: frame, Grid: grid, PrevAction: []float64{0}}
	action := []float64{0}
	pol.Reset(7)
	for t, v := range []uint8{10, 200} {
		frame.Pix[0] = v
		obs.Step = t
		if err := pol.Act(obs, action); err != nil {
			fmt.Println(err)
			return
		}
		fmt.Println(t, action[0])
	}
	// Output:
	// brightness
	// 0 0
	// 1 2
}
