package policies_test

import (
	"fmt"

	"tilebench/games"
	"tilebench/vision/policies"
)

func ExampleKind() {
	for _, s := range []string{"expert", "fresh", "meanpool", "runs/drive-p{patch}.safetensors", "exec:python3 my_policy.py", "tcp://10.0.0.7:7000"} {
		fmt.Printf("%-33s %s\n", s, policies.Kind(s))
	}
	// Output:
	// expert                            expert
	// fresh                             fresh
	// meanpool                          family
	// runs/drive-p{patch}.safetensors   file
	// exec:python3 my_policy.py         external
	// tcp://10.0.0.7:7000               external
}

func ExampleOpen() {
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		fmt.Println(err)
		return
	}
	// No --patch given and not a weights file: a patch size that divides
	// the frame.
	grid, err := policies.GridFor("meanpool", g.Spec(), "")
	if err != nil {
		fmt.Println(err)
		return
	}
	pol, err := policies.Open("meanpool", g, grid, policies.Options{InitSeed: 7})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer policies.Close(pol)
	fmt.Println(pol.Info().Family, grid.PatchW)
	// Output: meanpool 8
}
