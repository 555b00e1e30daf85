package main

import "tilebench/patch"

// corruptFlagHelp is the help of --corrupt where one chain is taken
// (export, play, record, watch, train); stress, sizes and probe take a
// swept list (transformOptions' sweepHelp). The rule both state: '+'
// joins a chain, a comma separates cells of a sweep.
const corruptFlagHelp = "frame corruptions before tokenizing, one chain applied in order, its steps joined by + (as in stress, sizes and probe; a comma joins them here too): blur:S, motionblur:L[:ANGLE], resolution:F, jpeg:Q, gamma:G, sharpen:S, saltpepper:R, dead:R, shift:DX[:DY][:fill|wrap|edge], shake:A, rotate:DEG, scale:S, or KIND:s1..s5 (docs/export.md) (e.g. --corrupt blur:s2+jpeg:40)"

// checkCorrupt reads a --corrupt value as a usage error of cmd.
func checkCorrupt(cmd, v string) error {
	if err := (patch.Spec{Corrupt: v}).Check(); err != nil {
		return usagef("%s: --corrupt: %v", cmd, err)
	}
	return nil
}
