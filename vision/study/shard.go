package study

import (
	"fmt"
	"strconv"
	"strings"
)

// Shard is one part of a study split for a cluster: the episodes whose
// index u = cell·episodes + episode satisfies u mod Count = Index.
// The zero value (and Count 1) is the whole study.
type Shard struct {
	// Index runs from 0 to Count-1.
	Index int `json:"index"`
	// Count is the number of shards; 0 or 1 means no split.
	Count int `json:"count"`
}

// Whole reports whether s is the whole study.
func (s Shard) Whole() bool { return s.Count <= 1 }

// Owns reports whether unit u belongs to the shard.
func (s Shard) Owns(u int) bool { return s.Whole() || u%s.Count == s.Index }

// String is "i/n", or "all" for the whole study.
func (s Shard) String() string {
	if s.Whole() {
		return "all"
	}
	return fmt.Sprintf("%d/%d", s.Index, s.Count)
}

// ParseShard reads "i/n" with 0 ≤ i < n.
func ParseShard(s string) (Shard, error) {
	a, b, ok := strings.Cut(strings.TrimSpace(s), "/")
	i, e1 := strconv.Atoi(a)
	n, e2 := strconv.Atoi(b)
	if !ok || e1 != nil || e2 != nil || n < 1 || n > 1_000_000 || i < 0 || i >= n {
		return Shard{}, fmt.Errorf("shard %q: want i/n with 0 ≤ i < n (shards count from 0)", s)
	}
	return Shard{Index: i, Count: n}, nil
}
