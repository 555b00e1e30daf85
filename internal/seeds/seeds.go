// Package seeds is the one derivation of random streams used across tilebench:
// patch, games and vision all draw from it, so that any episode can be
// re-run alone from (study seed, cell, episode).
package seeds

import "math/rand/v2"

// DeriveSeed mixes a base seed with any number of keys (cell index,
// episode index, stream name hash, ...) into a new 64-bit seed. It is the
// one documented derivation used for every random stream in tilebench:
//
//	s = base
//	for each key k: s = splitmix64(s ^ splitmix64(k + 0x9E3779B97F4A7C15))
//
// splitmix64 is Steele, Lea & Flood's finaliser (OOPSLA 2014), as used to
// seed xoshiro generators (common practice).
func DeriveSeed(base uint64, keys ...uint64) uint64 {
	s := base
	for _, k := range keys {
		s = splitmix64(s ^ splitmix64(k+0x9E3779B97F4A7C15))
	}
	return s
}

func splitmix64(z uint64) uint64 {
	z += 0x9E3779B97F4A7C15
	z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
	z = (z ^ (z >> 27)) * 0x94D049BB133111EB
	return z ^ (z >> 31)
}

// NewRand returns a PCG generator seeded from seed (both PCG words derived
// from it with DeriveSeed).
func NewRand(seed uint64) *rand.Rand {
	return rand.New(rand.NewPCG(DeriveSeed(seed, 1), DeriveSeed(seed, 2)))
}

// Stream names for DeriveSeed keys, so that every component draws from its
// own stream. Hash of a short ASCII name, FNV-1a 64 (common practice).
func StreamKey(name string) uint64 {
	h := uint64(14695981039346656037)
	for i := 0; i < len(name); i++ {
		h ^= uint64(name[i])
		h *= 1099511628211
	}
	return h
}
