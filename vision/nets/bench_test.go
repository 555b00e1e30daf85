package nets

import (
	"testing"
)

// BenchmarkAttentionActDefault times one step of the default set-attention
// policy: 112×80×3 frames at patch 8 (140 tokens of 192 values), key 16,
// 16 queries, hidden 32, three continuous actions, batch 1, one goroutine.
// testdata/ref/nets_speed.py runs it beside the same network in PyTorch.
func BenchmarkAttentionActDefault(b *testing.B) {
	g := testGrid(b, 112, 80, 8)
	n := mustNew(b, Config{}, g, contSpace, 1)
	obs := RandomObservation(g, contSpace, 2)
	a := make([]float64, 3)
	b.ReportAllocs()
	for b.Loop() {
		if err := n.Act(obs, a); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAttentionActCentre is the default step with the token set
// centred first (Config.Centre): one more pass over the 140×192 inputs.
func BenchmarkAttentionActCentre(b *testing.B) {
	g := testGrid(b, 112, 80, 8)
	n := mustNew(b, Config{Centre: true}, g, contSpace, 1)
	obs := RandomObservation(g, contSpace, 2)
	a := make([]float64, 3)
	b.ReportAllocs()
	for b.Loop() {
		if err := n.Act(obs, a); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAttentionActPlain is the same step on the plain reference
// kernels.
func BenchmarkAttentionActPlain(b *testing.B) {
	saved := kern
	kern = plainKernels
	defer func() { kern = saved }()
	BenchmarkAttentionActDefault(b)
}

// BenchmarkForwardBackward times one training step (forward and backward)
// of each family at the default sizes.
func BenchmarkForwardBackward(b *testing.B) {
	g := testGrid(b, 112, 80, 8)
	for _, fam := range Families {
		b.Run(fam, func(b *testing.B) {
			n := mustNew(b, Config{Family: fam}, g, contSpace, 1)
			obs := RandomObservation(g, contSpace, 2)
			out := make([]float32, 3)
			d := []float32{0.1, -0.2, 0.3}
			b.ReportAllocs()
			for b.Loop() {
				n.Forward(obs, out)
				n.Backward(d)
			}
		})
	}
}

// Act and a training step allocate nothing once the buffers exist.
func TestNoAllocationsPerStep(t *testing.T) {
	g := testGrid(t, 112, 80, 8)
	for _, cfg := range []Config{{}, {Family: PosAttention, PrevAction: true, Context: 2}, {Family: MeanPool}, {Family: MLP}, {KeyHidden: 8, Value: "identity"}, {Centre: true}, {Family: MeanPool, Centre: true, Context: 2}} {
		n := mustNew(t, cfg, g, contSpace, 1)
		obs := RandomObservation(g, contSpace, 2)
		a := make([]float64, 3)
		out := make([]float32, 3)
		d := []float32{1, 2, 3}
		step := func() {
			if err := n.Act(obs, a); err != nil {
				t.Fatal(err)
			}
			n.Forward(obs, out)
			n.Backward(d)
		}
		step()
		if allocs := testing.AllocsPerRun(20, step); allocs != 0 {
			t.Errorf("%+v: %v allocations per step", cfg, allocs)
		}
	}
}

// BenchmarkAttentionActKeyHidden is a step of a policy shaped like the
// shipped paddle-attention-p5: a 120×80 frame in 5×5 patches (384
// tokens), centred, keys through a hidden tanh layer of 48, values of 32,
// a head of 64 and three discrete actions. The tanh of the key layer
// (384×48 values a step) is most of what the hidden layer adds.
func BenchmarkAttentionActKeyHidden(b *testing.B) {
	g := testGrid(b, 120, 80, 5)
	n := mustNew(b, Config{Centre: true, KeyHidden: 48, ValueSize: 32, Hidden: 64}, g, discSpace, 1)
	obs := RandomObservation(g, discSpace, 2)
	a := make([]float64, 1)
	b.ReportAllocs()
	for b.Loop() {
		if err := n.Act(obs, a); err != nil {
			b.Fatal(err)
		}
	}
}
