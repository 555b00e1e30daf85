// Package patch cuts frames into token sets on a grid of patches, applies a
// seeded pipeline of transforms (scramble, occlude, extra tokens,
// photometric shifts) to them, and records every transform in a manifest
// that can reproduce or invert it.
//
// Token layout: a token set holds N tokens of D = PatchW·PatchH·Channels
// float32 values in [0,1]. Inside a token the values are row-major over the
// patch's pixels with channels last: value index = (y·PatchW + x)·C + c.
// Tokens are numbered in grid order (row-major over the grid of cells)
// before any scrambling.
//
// Nothing in this package knows about games or policies.
package patch
