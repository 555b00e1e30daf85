package train_test

import (
	"context"
	"fmt"
	"time"

	_ "tilebench/games/all"
	"tilebench/vision/nets"
	"tilebench/vision/train"
)

// Adam minimising f(x) = (x−3)².
func ExampleAdam() {
	x := []float32{0}
	opt := train.Adam{LR: 0.1}
	for i := 0; i < 500; i++ {
		opt.Step(x, []float32{2 * (x[0] - 3)})
	}
	fmt.Printf("%.2f\n", x[0])
	// Output: 3.00
}

// The ES maximising −‖x − 1‖² in 5 dimensions.
func ExampleES() {
	es, _ := train.NewES(train.ESConfig{Sigma: 0.02, Seed: 1}, make([]float32, 5))
	fit := func(_, _ int, x []float32) (float64, error) {
		s := 0.0
		for _, v := range x {
			s -= float64((v - 1) * (v - 1))
		}
		return s, nil
	}
	for i := 0; i < 300; i++ {
		es.Step(context.Background(), fit)
	}
	fmt.Printf("%.1f\n", es.Theta)
	// Output: [1.0 1.0 1.0 1.0 1.0]
}

// Behaviour cloning an attention policy on drive for one minute, then
// scoring it on held-out circuits and writing it.
func ExampleTrainer() {
	tr, err := train.New(train.Config{Game: "drive", Patch: 8, Net: nets.Config{Family: nets.Attention}, Budget: time.Minute})
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := tr.Run(context.Background(), nil, 0, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	held, _ := tr.HeldOut(50)
	expert, _ := tr.ExpertHeldOut(50)
	_ = tr.WriteWeights("drive-attention-8.safetensors", tr.WeightsMeta(res, held, expert))
}
