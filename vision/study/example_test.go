package study_test

import (
	"fmt"

	"tilebench/vision/study"
)

func ExampleExpandList() {
	vals, err := study.ExpandList("random:0:0.3:0.1,block:0.3")
	if err != nil {
		panic(err)
	}
	fmt.Println(vals)
	// Output: [random:0 random:0.1 random:0.2 random:0.3 block:0.3]
}

func ExampleParse() {
	d, err := study.Parse([]byte(`
name = "occlusion"
episodes = 10
patch = [8]

[axes]
occlude = "random:0:0.5:0.25"
scramble = ["none", "full"]
`))
	if err != nil {
		panic(err)
	}
	p, err := study.NewPlan(*d)
	if err != nil {
		panic(err)
	}
	for i, c := range p.Cells {
		fmt.Println(i, c.Label())
	}
	fmt.Println(p.Units(), "episodes")
	// Output:
	// 0 clean
	// 1 scramble full
	// 2 occlude random:0.25
	// 3 occlude random:0.25, scramble full
	// 4 occlude random:0.5
	// 5 occlude random:0.5, scramble full
	// 60 episodes
}

func ExampleParse_unknownKey() {
	_, err := study.Parse([]byte("name = \"x\"\n[axes]\nocclusion = \"random:0.5\"\n"))
	fmt.Println(err)
	// Output: line 3: unknown key "axes.occlusion"
}
