//go:build tools

// Package deps pins the libraries tilebench builds on, so that go.mod lists
// them before every package that uses them exists.
package deps

import (
	_ "github.com/BurntSushi/toml"
	_ "github.com/google/shlex"
	_ "github.com/schollz/progressbar/v3"
	_ "golang.org/x/image/vector"
	_ "golang.org/x/term"
	_ "gonum.org/v1/gonum/mat"
	_ "gonum.org/v1/gonum/optimize"
	_ "gonum.org/v1/gonum/stat/distuv"
	_ "gonum.org/v1/plot"
)
