// Package runner runs a study (vision/study) from start to end: it trains
// the policies a sizes study asks for, plays every episode of every cell
// on a pool of workers, appends each record to results.jsonl as it
// finishes (so a killed run resumes where it stopped), splits a study
// into shards for a cluster and merges them back, measures costs, and
// writes the report through vision/study/analysis. Results never depend
// on the worker count or the shard split.
package runner
