// Package patch cuts frames into token sets on a grid of patches, applies a
// seeded pipeline of transforms (scramble, occlude, extra tokens,
// photometric shifts) to them, and records every transform in a manifest
// that can reproduce or invert it.
//
// Token layout: a token set holds N tokens of D = PatchW·PatchH·Channels
// float32 values in [0,1]. Inside a token the values are row-major over the
// patch's pixels with channels last: value index = (y·PatchW + x)·C + c.
// Tokens are numbered in grid order (row-major over the grid of cells)
// before any scrambling. A byte b becomes float32(b)/255; an RGB frame
// tokenized to one channel gives ITU-R BT.601 luma (see tokenize.go).
//
// The pieces:
//   - Grid (NewGrid): the geometry: patch size, stride, edge policy.
//   - Tokenizer: Tokenize a frame (fast paths for *image.RGBA,
//     *image.NRGBA, *image.Gray, *image.YCbCr, *image.Paletted; any
//     image.Image otherwise) and Assemble tokens back into a frame.
//   - Spec (ParseSpec, Spec.String, Spec.Check) names the transforms;
//     Pipeline (NewPipeline, Reset, Apply) runs them step by step in the
//     order photometric → occlude → scramble (+ rotate/flip) → drop →
//     noise tokens → duplicates, filling a FrameRecord per step.
//   - Frame corruptions (Spec.Corrupt, ParseCorrupt, ExpandCorrupt; see
//     corrupt.go for every kind and its severity table) act on the pixels
//     before a frame is cut: Pipeline.TokenizeFrame and CorruptFrame.
//   - Manifest (NewManifest, Append, WriteFile, ReadManifest) stores the
//     records as versioned JSON ("format": 1); FrameRecord.Unscramble and
//     Manifest.Unscramble invert a scramble exactly; Manifest.NewPipeline
//     replays the run.
//
// Determinism: every random stream is DeriveSeed(seed, StreamKey(name),
// keys...) fed to a PCG generator, and floating-point products are rounded
// explicitly (no fused multiply-add), so the same seed gives the same
// bytes on every machine and whatever the order of Apply calls.
//
// Caller-owned buffers: Tokenize (fast paths), Assemble and Apply allocate
// nothing per frame in steady state.
//
// Speed: on amd64 with AVX2 and FMA, RGBA frames are converted by a Go
// assembly routine (fastrgba_amd64.s) that gives bit for bit the values of
// the portable Go path; build with -tags purego to use only the portable
// path.
//
// Nothing in this package knows about games or policies.
package patch
