// Package probe measures how much a policy's action moves when its camera
// input is transformed, on the user's own recorded frames, with no game:
// every sequence of the recording is run through the policy from a fresh
// state twice, clean and transformed (the same policy seed, the transform
// seeded per cell and sequence), and the per-frame change of the action is
// recorded, with the error against the recorded actions when they are
// given.
//
// The cells are those of a stress study (the axis grammar and range syntax
// of vision/study); results.jsonl holds one line per sequence per cell,
// appended as units finish so that a killed run resumes, and sharded runs
// join with MergeWith. Statistics (vision/stats): mean and upper
// quantiles of the drift, the share of frames whose action held, Wilson
// intervals for rates, and intervals by resampling whole sequences or,
// with few sequences, by the moving-block bootstrap over frames; a
// breaking point per axis where the drift interval lies wholly past a
// threshold.
// Reports are written with vision/report. docs/probe.md describes the
// measures and their formulas.
package probe
