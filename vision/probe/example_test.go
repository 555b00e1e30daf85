package probe_test

import (
	"fmt"

	"tilebench/vision/probe"
)

func ExampleParseActionSpace() {
	a, _ := probe.ParseActionSpace("continuous:2:-1:1")
	fmt.Println(a.Kind, a.Dim, a.Low, a.High)
	d, _ := probe.ParseActionSpace("discrete:3")
	fmt.Println(d.Kind, d.Dim, d.Choices)
	// Output:
	// continuous 2 [-1 -1] [1 1]
	// discrete 1 3
}
