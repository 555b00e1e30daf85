package nets

import (
	"bytes"
	"testing"

	"tilebench/vision/weights"
)

// FuzzFromFile feeds arbitrary bytes through the safetensors decoder and
// the policy loader: no panic, and a loaded net acts without error on a
// full token set of its grid.
func FuzzFromFile(f *testing.F) {
	// Tiny nets keep the seeds small, so that the fuzzer's minimisation of
	// new inputs stays quick.
	g := testGrid(f, 4, 4, 2)
	tiny := []Config{
		{Family: Attention, KeySize: 2, Queries: 2, QueryDim: 2, ValueSize: 2, Hidden: 2},
		{Family: PosAttention, KeySize: 2, Queries: 2, QueryDim: 2, Value: "identity", Hidden: 2, PrevAction: true},
		{Family: MeanPool, TokenHidden: 2, Hidden: 2, Context: 2},
		{Family: MLP, Hidden: 2},
	}
	for i, cfg := range tiny {
		sp := contSpace
		if i%2 == 1 {
			sp = discSpace
		}
		n := mustNew(f, cfg, g, sp, 1)
		wf, err := ToFile(n, map[string]string{"seed": "1"})
		if err != nil {
			f.Fatal(err)
		}
		var buf bytes.Buffer
		if err := weights.Encode(&buf, wf); err != nil {
			f.Fatal(err)
		}
		f.Add(buf.Bytes())
	}
	f.Add([]byte("\x10\x00\x00\x00\x00\x00\x00\x00{\"__metadata__\":{}}"))
	f.Fuzz(func(t *testing.T, data []byte) {
		wf, err := weights.Decode(data)
		if err != nil {
			return
		}
		n, err := FromFile(wf)
		if err != nil {
			return
		}
		if n.Grid().N() > 4096 || n.Grid().D() > 4096 {
			return
		}
		obs := RandomObservation(n.Grid(), n.Space(), 1)
		if err := n.Act(obs, make([]float64, n.Space().Dim())); err != nil {
			t.Fatalf("loaded net cannot act: %v", err)
		}
	})
}
