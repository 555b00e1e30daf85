// Command asmgen writes vision/nets/kernels_amd64.s (see package
// tilebench/vision/nets/internal/asmgen). Run from vision/nets:
//
//	go run ./internal/asmgen/cmd/asmgen -o kernels_amd64.s
package main

import (
	"flag"
	"fmt"
	"os"

	"tilebench/internal/atomicfile"
	"tilebench/vision/nets/internal/asmgen"
)

func main() {
	out := flag.String("o", "kernels_amd64.s", "output `file`, e.g. -o kernels_amd64.s")
	flag.Parse()
	if flag.NArg() != 0 {
		fmt.Fprintf(os.Stderr, "asmgen: unexpected argument %q\n", flag.Arg(0))
		os.Exit(2)
	}
	if err := atomicfile.WriteBytes(*out, asmgen.Generate()); err != nil {
		fmt.Fprintf(os.Stderr, "asmgen: %v\n", err)
		os.Exit(1)
	}
}
