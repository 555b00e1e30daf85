package main

import (
	"fmt"
	"os"
	"runtime/pprof"
)

// startProfile starts a CPU profile of the whole process into the file
// named by TILEBENCH_CPUPROFILE (for developers: read it with go tool
// pprof, DEVELOPERS.md), and returns the function that stops it. Without
// the variable it does nothing.
func startProfile() (stop func(), err error) {
	path := os.Getenv("TILEBENCH_CPUPROFILE")
	if path == "" {
		return func() {}, nil
	}
	f, err := os.Create(path)
	if err != nil {
		return nil, fmt.Errorf("TILEBENCH_CPUPROFILE: %v", err)
	}
	if err := pprof.StartCPUProfile(f); err != nil {
		f.Close()
		return nil, fmt.Errorf("TILEBENCH_CPUPROFILE: %v", err)
	}
	return func() {
		pprof.StopCPUProfile()
		f.Close()
	}, nil
}
