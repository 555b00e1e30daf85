package weights_test

import (
	"bytes"
	"fmt"

	"tilebench/vision/weights"
)

func Example() {
	f := &weights.File{}
	f.Add("head.weight", []int{2, 3}, []float32{1, 2, 3, 4, 5, 6})
	f.SetMeta("family", "meanpool")
	var buf bytes.Buffer
	if err := weights.Encode(&buf, f); err != nil {
		fmt.Println(err)
		return
	}
	g, err := weights.Decode(buf.Bytes())
	if err != nil {
		fmt.Println(err)
		return
	}
	w, err := g.Want("head.weight", 2, 3)
	fmt.Println(w, err, g.Metadata["family"])
	_, err = g.Want("head.weight", 3, 2)
	fmt.Println(err)
	// Output:
	// [1 2 3 4 5 6] <nil> meanpool
	// tensor "head.weight" has shape [2 3], want [3 2]
}
