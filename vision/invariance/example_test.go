package invariance

import "fmt"

// A permutation-invariant policy (a mean over all token values) and one
// that weighs tokens by their place in the set.
func Example() {
	g, tok := blobsGame()
	r, _ := Run(g, tok, &sumPolicy{}, Config{Perms: 10, Seeds: []uint64{1}, Frames: 2})
	fmt.Printf("%s: invariant %v, pass %v, permute max %.1g\n", r.Family, r.Invariant, r.Pass, r.Permute.Max)
	r, _ = Run(g, tok, &orderPolicy{claim: true}, Config{Perms: 10, Seeds: []uint64{1}, Frames: 2})
	fmt.Printf("%s: invariant %v, pass %v, permute max > 0: %v\n", r.Family, r.Invariant, r.Pass, r.Permute.Max > 0)
	// Output:
	// sum: invariant true, pass true, permute max 0
	// order: invariant true, pass false, permute max > 0: true
}
