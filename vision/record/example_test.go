package record_test

import (
	"fmt"
	"os"
	"path/filepath"

	"tilebench/games"
	_ "tilebench/games/all" // registers drive and paddle
	"tilebench/patch"
	"tilebench/vision/record"
)

// Record two expert episodes of paddle, with random occlusion, and list
// the files NumPy will read.
func ExampleRun() {
	g, _ := games.Build("paddle", games.Setup{})
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 120, Height: 80, PatchW: 20})
	dir, _ := os.MkdirTemp("", "demos")
	defer os.RemoveAll(dir)
	m, err := record.Run(record.Config{Game: g, Grid: grid, Spec: patch.Spec{Occlude: "random:0.2"},
		Episodes: 2, Dir: filepath.Join(dir, "demos")})
	if err != nil {
		panic(err)
	}
	fmt.Println(m.Rows, m.Complete, m.Transforms)
	for _, f := range m.Files {
		fmt.Println(f.Name, f.Dtype, f.Shape)
	}
	// Output:
	// 2400 true occlude=random:0.2
	// frames.npy |u1 [80 120 3]
	// actions.npy <f4 [1]
	// prev_actions.npy <f4 [1]
	// rewards.npy <f4 []
	// episode_starts.npy |b1 []
	// seeds.npy <u8 []
	// steps.npy <i4 []
}
