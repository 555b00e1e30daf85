// Package study defines studies and what they leave on disk. A
// Definition is what a user writes (a TOML file, see examples/study.toml
// and docs/studies.md, or the flags of "tilebench stress" and "tilebench
// sizes"): the game, the policy source (in the grammar of
// vision/policies), the patch sizes and the transform axes, each a list in
// the range syntax of ExpandList. NewPlan normalizes it into cells (every
// combination of the axes) and derives every seed from the study seed, so
// that any episode can be re-run alone. The records — study.json (Info),
// results.jsonl (Record), timing.jsonl (Timing), and the Shard a folder
// holds — are versioned ("format": 1).
//
// Running a study is vision/study/runner's job; turning its results into
// statistics and a report is vision/study/analysis's.
package study
