package policies

import (
	"fmt"
	"os"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
	"tilebench/vision/weights"
)

// CheckGeometry refuses a network whose frame size, patch grid or action
// space does not fit the game's frames and the grid they are cut on.
// path names the network in the message.
func CheckGeometry(path string, n nets.Net, sp games.Spec, grid *patch.Grid) error {
	ng := n.Grid()
	if ng.Width != sp.Width || ng.Height != sp.Height {
		return fmt.Errorf("%s: weights are for %dx%d frames, game %s renders %dx%d", path, ng.Width, ng.Height, sp.Name, sp.Width, sp.Height)
	}
	if ng.PatchW != grid.PatchW || ng.PatchH != grid.PatchH || ng.Channels != grid.Channels ||
		ng.StrideX != grid.StrideX || ng.StrideY != grid.StrideY || ng.Edge != grid.Edge {
		return fmt.Errorf("%s: weights are for patch %dx%d stride %dx%d (%s), this run cuts frames at patch %dx%d stride %dx%d (%s)",
			path, ng.PatchW, ng.PatchH, ng.StrideX, ng.StrideY, ng.Edge, grid.PatchW, grid.PatchH, grid.StrideX, grid.StrideY, grid.Edge)
	}
	a, b := n.Space(), sp.Action
	if a.Kind != b.Kind || a.Dim() != b.Dim() || a.Choices() != b.Choices() {
		return fmt.Errorf("%s: weights are for a %s action space of %d values, game %s takes %s actions of %d", path, a.Kind, a.Dim(), sp.Name, b.Kind, b.Dim())
	}
	return nil
}

// CheckGame refuses a weights file whose metadata names another game than
// the one played. Files without the key pass; probing recorded frames, which
// come from no built-in game, does not call it.
func CheckGame(path string, sp games.Spec) error {
	if g, ok := weightsGame(path); ok && g != sp.Name {
		return fmt.Errorf("%s: weights were trained on game %s, this run plays %s", path, g, sp.Name)
	}
	return nil
}

// weightsGame is the game a weights file says it was trained on
// (metadata key weights.KeyGame), when the file can be read and says so.
func weightsGame(path string) (string, bool) {
	f, err := weights.ReadFile(path)
	if err != nil {
		return "", false
	}
	g, ok := f.Metadata[weights.KeyGame]
	return g, ok && g != ""
}

// AutoPatch picks a patch size for a w×h frame: the first of 8, 7, 6, 12
// and 4 that divides both sides, else 8 (with padding).
func AutoPatch(w, h int) int {
	for _, p := range []int{8, 7, 6, 12, 4} {
		if w%p == 0 && h%p == 0 {
			return p
		}
	}
	return 8
}

// PatchOf returns the patch size a single weights file was made for (a
// source of KindFile without {patch}), or false when source is something
// else, cannot be read, or has non-square patches.
func PatchOf(source string) (int, bool) {
	if Kind(source) != KindFile || IsTemplate(source) || source == "" {
		return 0, false
	}
	n, err := nets.Load(source)
	if err != nil {
		return 0, false
	}
	g := n.Grid()
	if g.PatchW != g.PatchH {
		return 0, false
	}
	return g.PatchW, true
}

// GridFor is the grid frames of sp are cut on for source. patchSize is
// the patch size given by the user, N or WxH, or "": then a single
// weights file's own grid is used, and for any other source AutoPatch.
// A bad patchSize is a *SourceError.
func GridFor(source string, sp games.Spec, patchSize string) (*patch.Grid, error) {
	if patchSize == "" && Kind(source) == KindFile && !IsTemplate(source) {
		if err := Check(source); err != nil {
			return nil, err
		}
		if _, err := os.Stat(source); err != nil {
			return nil, notSource(source)
		}
		n, err := nets.Load(source)
		if err != nil {
			return nil, err
		}
		return n.Grid(), nil
	}
	pw := AutoPatch(sp.Width, sp.Height)
	ph := pw
	if patchSize != "" {
		var err error
		if pw, ph, err = patch.ParseSize(patchSize); err != nil {
			return nil, sourceErr("--patch: %v", err)
		}
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: pw, PatchH: ph})
	if err != nil {
		return nil, sourceErr("--patch: %v", err)
	}
	return grid, nil
}
