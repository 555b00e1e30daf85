package patch

import (
	"fmt"
	"image"
	"strconv"
	"strings"
)

// Edge says what to do with the pixels left over when the patch size (and
// stride) does not divide the frame size.
type Edge int

const (
	// EdgePad extends the frame on the right and bottom with the fill value
	// so that the last partial patch becomes whole.
	EdgePad Edge = iota
	// EdgeCrop drops the remainder on the right and bottom.
	EdgeCrop
	// EdgeStrict refuses a frame size that the patch grid does not divide.
	EdgeStrict
)

// String returns the flag spelling of e: "pad", "crop" or "strict".
func (e Edge) String() string {
	switch e {
	case EdgePad:
		return "pad"
	case EdgeCrop:
		return "crop"
	case EdgeStrict:
		return "strict"
	}
	return fmt.Sprintf("edge(%d)", int(e))
}

// ParseEdge reads "pad", "crop" or "strict".
func ParseEdge(s string) (Edge, error) {
	switch s {
	case "pad", "":
		return EdgePad, nil
	case "crop":
		return EdgeCrop, nil
	case "strict":
		return EdgeStrict, nil
	}
	return 0, fmt.Errorf("edge policy %q: want pad, crop or strict", s)
}

// GridConfig describes how a frame is cut into patches. The zero value of
// every optional field is useful.
type GridConfig struct {
	// Width, Height and Channels are the source frame's size. Channels is
	// 1 (grey) or 3 (RGB); 0 means 3.
	Width, Height, Channels int
	// PatchW and PatchH are the patch size in pixels. PatchH 0 means PatchW.
	PatchW, PatchH int
	// StrideX and StrideY are the step between patch origins. 0 means the
	// patch size (non-overlapping tiles); smaller values give overlapping
	// tiles.
	StrideX, StrideY int
	// Edge is the policy for sizes that do not divide. Default EdgePad.
	Edge Edge
	// Fill is the pad value in [0,1] used by EdgePad. Default 0 (black).
	Fill float32
}

// Grid is the resolved geometry of a GridConfig: every number a tokenizer
// needs, computed once.
type Grid struct {
	GridConfig
	// Cols and Rows are the number of patch cells across and down.
	Cols, Rows int
	// OutW and OutH are the size of the frame the tokens cover: the padded
	// size with EdgePad, the cropped size with EdgeCrop.
	OutW, OutH int
}

// NewGrid checks cfg and resolves its geometry.
func NewGrid(cfg GridConfig) (*Grid, error) {
	if cfg.Channels == 0 {
		cfg.Channels = 3
	}
	if cfg.PatchH == 0 {
		cfg.PatchH = cfg.PatchW
	}
	if cfg.StrideX == 0 {
		cfg.StrideX = cfg.PatchW
	}
	if cfg.StrideY == 0 {
		cfg.StrideY = cfg.PatchH
	}
	switch {
	case cfg.Width <= 0 || cfg.Height <= 0:
		return nil, fmt.Errorf("frame size %dx%d: must be positive", cfg.Width, cfg.Height)
	case cfg.Channels != 1 && cfg.Channels != 3:
		return nil, fmt.Errorf("channels %d: want 1 or 3", cfg.Channels)
	case cfg.PatchW <= 0 || cfg.PatchH <= 0:
		return nil, fmt.Errorf("patch size %dx%d: must be positive", cfg.PatchW, cfg.PatchH)
	case cfg.PatchW > cfg.Width || cfg.PatchH > cfg.Height:
		return nil, fmt.Errorf("patch %dx%d is larger than the %dx%d frame", cfg.PatchW, cfg.PatchH, cfg.Width, cfg.Height)
	case cfg.StrideX <= 0 || cfg.StrideY <= 0 || cfg.StrideX > cfg.PatchW || cfg.StrideY > cfg.PatchH:
		return nil, fmt.Errorf("stride %dx%d: want 1..patch size %dx%d", cfg.StrideX, cfg.StrideY, cfg.PatchW, cfg.PatchH)
	case cfg.Fill < 0 || cfg.Fill > 1 || cfg.Fill != cfg.Fill:
		return nil, fmt.Errorf("fill value %v: want a number in [0,1]", cfg.Fill)
	}
	g := &Grid{GridConfig: cfg}
	var err error
	if g.Cols, g.OutW, err = axis(cfg.Width, cfg.PatchW, cfg.StrideX, cfg.Edge, "width"); err != nil {
		return nil, err
	}
	if g.Rows, g.OutH, err = axis(cfg.Height, cfg.PatchH, cfg.StrideY, cfg.Edge, "height"); err != nil {
		return nil, err
	}
	if g.Cols > maxCells || g.Rows > maxCells {
		return nil, fmt.Errorf("grid of %dx%d cells: at most %d along each axis", g.Cols, g.Rows, maxCells)
	}
	return g, nil
}

// maxCells is the most cells along one axis (Pos holds int16).
const maxCells = 1<<15 - 1

// Covered returns the grid for frames of the covered size OutW×OutH (the
// padded or cropped frames that Assemble draws), with the same patches,
// stride and channels and edge strict: it has the same cells as g, so a
// frame exported at the covered size tokenizes back onto g's cells.
func (g *Grid) Covered() *Grid {
	c := *g
	c.Width, c.Height, c.Edge = g.OutW, g.OutH, EdgeStrict
	return &c
}

// axis resolves one dimension: the number of cells and the covered length.
func axis(size, patch, stride int, edge Edge, name string) (cells, covered int, err error) {
	rem := (size - patch) % stride
	cells = (size-patch)/stride + 1
	if rem != 0 {
		switch edge {
		case EdgeStrict:
			return 0, 0, fmt.Errorf("frame %s %d is not covered by patch %d at stride %d (edge strict; use pad or crop)", name, size, patch, stride)
		case EdgePad:
			cells++
		}
	}
	return cells, (cells-1)*stride + patch, nil
}

// N is the number of tokens in a full (untransformed) token set.
func (g *Grid) N() int { return g.Cols * g.Rows }

// D is the number of values in one token: PatchW·PatchH·Channels.
func (g *Grid) D() int { return g.PatchW * g.PatchH * g.Channels }

// Overlapping reports whether neighbouring patches share pixels.
func (g *Grid) Overlapping() bool { return g.StrideX < g.PatchW || g.StrideY < g.PatchH }

// Cell returns the grid position of token i in grid order.
func (g *Grid) Cell(i int) Pos { return Pos{Row: int16(i / g.Cols), Col: int16(i % g.Cols)} }

// Index returns the grid-order index of the cell at p.
func (g *Grid) Index(p Pos) int { return int(p.Row)*g.Cols + int(p.Col) }

// Rect returns the pixel rectangle covered by the cell at p, in the
// coordinates of the (padded or cropped) frame of size OutW×OutH.
func (g *Grid) Rect(p Pos) image.Rectangle {
	x0 := int(p.Col) * g.StrideX
	y0 := int(p.Row) * g.StrideY
	return image.Rect(x0, y0, x0+g.PatchW, y0+g.PatchH)
}

// String describes the grid, e.g. "96x96x3 patch 8x8 stride 8x8 pad → 12x12 cells".
func (g *Grid) String() string {
	return fmt.Sprintf("%dx%dx%d patch %dx%d stride %dx%d %s → %dx%d cells",
		g.Width, g.Height, g.Channels, g.PatchW, g.PatchH, g.StrideX, g.StrideY, g.Edge, g.Cols, g.Rows)
}

// ParseSize reads a patch or frame size: "8" (square) or "8x6" (width x height).
func ParseSize(s string) (w, h int, err error) {
	a, b, found := strings.Cut(strings.ToLower(strings.TrimSpace(s)), "x")
	w, err = strconv.Atoi(a)
	if err != nil || w <= 0 {
		return 0, 0, fmt.Errorf("size %q: want N or WxH with positive whole numbers", s)
	}
	h = w
	if found {
		h, err = strconv.Atoi(b)
		if err != nil || h <= 0 {
			return 0, 0, fmt.Errorf("size %q: want N or WxH with positive whole numbers", s)
		}
	}
	return w, h, nil
}
