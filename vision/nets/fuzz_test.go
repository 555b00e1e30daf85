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
	g := testGrid(f, 16, 16, 8)
	for _, sc := range smallConfigs[:5] {
		n := mustNew(f, sc.cfg, g, contSpace, 1)
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
