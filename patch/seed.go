package patch

import (
	"math/rand/v2"

	"tilebench/internal/seeds"
)

// DeriveSeed mixes a base seed with any number of keys into a new seed.
// It is the project's one seed derivation (see tilebench/internal/seeds):
//
//	s = base
//	for each key k: s = splitmix64(s ^ splitmix64(k + 0x9E3779B97F4A7C15))
func DeriveSeed(base uint64, keys ...uint64) uint64 { return seeds.DeriveSeed(base, keys...) }

// NewRand returns a PCG generator seeded from seed (both PCG words derived
// from it with DeriveSeed).
func NewRand(seed uint64) *rand.Rand { return seeds.NewRand(seed) }

// StreamKey turns a short stream name into a DeriveSeed key (FNV-1a 64).
func StreamKey(name string) uint64 { return seeds.StreamKey(name) }
