package nets

import (
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/patch"
)

// Negative hyper-parameters are refused, not turned into defaults:
// "cost --context -1" used to be accepted as context 1.
func TestValidateNegatives(t *testing.T) {
	for _, c := range []Config{{Context: -1}, {KeySize: -2}, {Hidden: -1}, {Family: MeanPool, TokenHidden: -5}} {
		if err := c.Validate(); err == nil || !strings.Contains(err.Error(), "want 0 (the default) or more") {
			t.Errorf("%+v: %v", c, err)
		}
		grid, _ := patch.NewGrid(patch.GridConfig{Width: 16, Height: 16, PatchW: 4})
		if _, err := Estimate(c, grid, games.Controls{Kind: games.Discrete, Names: []string{"a", "b"}}); err == nil {
			t.Errorf("Estimate took %+v", c)
		}
	}
	if err := (Config{}).Validate(); err != nil {
		t.Fatalf("zero config: %v", err)
	}
}

// Weights metadata that states a zero patch side, stride or frame side,
// or a channel count other than 1 or 3, is refused by name: a 0 used to
// take the grid's default (patch_h = patch_w, stride = patch) and load.
func TestFileGeometryZeros(t *testing.T) {
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 16, Height: 12, PatchW: 4})
	n, err := New(Config{}, grid, games.Controls{Kind: games.Discrete, Names: []string{"a", "b"}}, 1)
	if err != nil {
		t.Fatal(err)
	}
	for key, v := range map[string]string{"patch_h": "0", "stride_x": "0", "stride_y": "0", "frame_width": "0", "channels": "2"} {
		f, err := ToFile(n, nil)
		if err != nil {
			t.Fatal(err)
		}
		f.Metadata[key] = v
		if _, err := FromFile(f); err == nil || !strings.Contains(err.Error(), key) {
			t.Errorf("%s = %s: %v", key, v, err)
		}
	}
	f, _ := ToFile(n, nil)
	if _, err := FromFile(f); err != nil {
		t.Fatalf("untouched file: %v", err)
	}
}
