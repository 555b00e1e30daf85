package seeds

import (
	"hash/fnv"
	"testing"
)

// The first outputs of SplitMix64 from state 0 (Steele, Lea & Flood 2014;
// the reference C code by Vigna that seeds xoshiro): values from memory.
func TestSplitMix64MatchesReferenceSequence(t *testing.T) {
	want := []uint64{0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F}
	state := uint64(0)
	for i, w := range want {
		// The reference generator adds the golden gamma to its state and
		// mixes the new state; splitmix64(z) does both for state z.
		if got := splitmix64(state); got != w {
			t.Fatalf("output %d = %#x, want %#x", i, got, w)
		}
		state += 0x9E3779B97F4A7C15
	}
}

func TestDeriveSeedSeparatesKeys(t *testing.T) {
	seen := map[uint64][2]uint64{}
	for cell := uint64(0); cell < 64; cell++ {
		for ep := uint64(0); ep < 64; ep++ {
			s := DeriveSeed(7, cell, ep)
			if prev, dup := seen[s]; dup {
				t.Fatalf("(cell %d, episode %d) and %v derive the same seed", cell, ep, prev)
			}
			seen[s] = [2]uint64{cell, ep}
		}
	}
	if DeriveSeed(7, 1, 2) == DeriveSeed(7, 2, 1) {
		t.Fatal("key order does not matter: (1,2) and (2,1) collide")
	}
	if DeriveSeed(7) != 7 {
		t.Fatal("no keys must leave the base seed unchanged")
	}
}

// FNV-1a 64 of "a" is 0xaf63dc4c8601ec8c (the FNV reference test vectors,
// from memory).
func TestStreamKeyIsFNV1a(t *testing.T) {
	if got := StreamKey("a"); got != 0xaf63dc4c8601ec8c {
		t.Fatalf("StreamKey(a) = %#x", got)
	}
	if got := StreamKey(""); got != 14695981039346656037 {
		t.Fatalf("StreamKey(\"\") = %d, want the FNV offset basis", got)
	}
}

// StreamKey agrees with the standard library's FNV-1a on other names.
func TestStreamKeyAgreesWithHashFNV(t *testing.T) {
	for _, name := range []string{"scramble", "occlude", "noise", "episode-7"} {
		h := fnv.New64a()
		h.Write([]byte(name))
		if got, want := StreamKey(name), h.Sum64(); got != want {
			t.Fatalf("StreamKey(%q) = %#x, hash/fnv says %#x", name, got, want)
		}
	}
}
