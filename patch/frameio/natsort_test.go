package frameio

import (
	"slices"
	"testing"
)

func TestNaturalSort(t *testing.T) {
	// Expected orders written out by hand (common practice for "natural"
	// file ordering: digit runs compare as numbers).
	got := []string{"f10.png", "f2.png", "f1.png", "f02.png", "g1.png", "f.png", "f1a.png", "f100.png", "F3.png", "f9.png"}
	SortNatural(got)
	want := []string{"F3.png", "f.png", "f1.png", "f1a.png", "f02.png", "f2.png", "f9.png", "f10.png", "f100.png", "g1.png"}
	if !slices.Equal(got, want) {
		t.Fatalf("got %v\nwant %v", got, want)
	}
	for _, c := range []struct {
		a, b string
		less bool
	}{
		{"frame-2", "frame-10", true},
		{"frame-10", "frame-2", false},
		{"a", "a", false},
		{"x007", "x7", true}, // equal numbers: plain byte order decides
		{"x7", "x007", false},
		{"99999999999999999999999", "100000000000000000000000", true}, // beyond int64
		{"img1-part2", "img1-part10", true},
		{"", "a", true},
	} {
		if naturalLess(c.a, c.b) != c.less {
			t.Errorf("naturalLess(%q, %q) = %v", c.a, c.b, !c.less)
		}
	}
}
