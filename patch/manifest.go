package patch

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"os"

	"tilebench/internal/atomicfile"
)

// manifestFormat is the version written in every manifest's "format".
const manifestFormat = 1

// GridJSON is a grid's geometry as a manifest stores it. Cols, Rows, OutW
// and OutH are derived; a reader checks that they agree.
type GridJSON struct {
	Width    int     `json:"width"`
	Height   int     `json:"height"`
	Channels int     `json:"channels"`
	PatchW   int     `json:"patch_w"`
	PatchH   int     `json:"patch_h"`
	StrideX  int     `json:"stride_x"`
	StrideY  int     `json:"stride_y"`
	Edge     string  `json:"edge"`
	Fill     float32 `json:"fill"`
	Cols     int     `json:"cols"`
	Rows     int     `json:"rows"`
	OutW     int     `json:"out_w"`
	OutH     int     `json:"out_h"`
}

func gridJSON(g *Grid) GridJSON {
	return GridJSON{g.Width, g.Height, g.Channels, g.PatchW, g.PatchH, g.StrideX, g.StrideY,
		g.Edge.String(), g.Fill, g.Cols, g.Rows, g.OutW, g.OutH}
}

// Manifest records a pipeline run over one sequence: the grid, the spec,
// the seed given to Reset and one FrameRecord per frame. It can invert
// each frame's scramble (Unscramble) and rebuild the pipeline
// (NewPipeline) to replay it.
type Manifest struct {
	// Format is manifestFormat (1).
	Format int `json:"format"`
	// Grid is the geometry the frames were cut on.
	Grid GridJSON `json:"grid"`
	// Spec is the pipeline's spec; Line is Spec.String(), for people (a
	// reader ignores it).
	Spec Spec   `json:"spec"`
	Line string `json:"spec_line"`
	// Corrupt says, for each frame corruption of the spec, how it can be
	// undone (an exact inverse, an approximate one, or none and why); for
	// people (a reader ignores it). Left out without corruptions.
	Corrupt []CorruptNote `json:"corrupt,omitempty"`
	// Seed is the seed given to Pipeline.Reset for the sequence.
	Seed uint64 `json:"seed"`
	// Frames holds one record per frame, in increasing Frame order.
	Frames []FrameRecord `json:"frames"`

	g *Grid
}

// NewManifest starts a manifest for a sequence run by a pipeline on g with
// spec, Reset to seed.
func NewManifest(g *Grid, spec Spec, seed uint64) *Manifest {
	return &Manifest{Format: manifestFormat, Grid: gridJSON(g), Spec: spec, Line: spec.String(), Corrupt: corruptNotes(spec), Seed: seed, g: g}
}

// GridOf returns the manifest's grid.
func (m *Manifest) GridOf() *Grid { return m.g }

// Append adds a deep copy of rec, so the caller may reuse rec.
func (m *Manifest) Append(rec *FrameRecord) {
	c := *rec
	c.Perm = append([]int{}, rec.Perm...)
	if len(rec.Orient) > 0 {
		c.Orient = append([]int{}, rec.Orient...)
	} else {
		c.Orient = nil
	}
	c.Mask = append([]int{}, rec.Mask...)
	c.Cells = nil
	if len(rec.Cells) > 0 {
		c.Cells = append([]int{}, rec.Cells...)
	}
	m.Frames = append(m.Frames, c)
}

// Write writes m as indented JSON.
func (m *Manifest) Write(w io.Writer) error {
	b, err := json.MarshalIndent(m, "", " ")
	if err != nil {
		return fmt.Errorf("manifest: %w", err)
	}
	b = append(b, '\n')
	_, err = w.Write(b)
	return err
}

// WriteFile writes m to path atomically.
func (m *Manifest) WriteFile(path string) error {
	return atomicfile.Write(path, m.Write)
}

// ReadManifestFile reads and checks the manifest at path (see
// ReadManifest).
func ReadManifestFile(path string, g *Grid) (*Manifest, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read manifest: %w", err)
	}
	defer f.Close()
	m, err := ReadManifest(f, g)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return m, nil
}

// ReadManifest reads a manifest and checks it completely: format 1, a
// valid grid (equal to g unless g is nil), a valid spec, and frame records
// that fit the grid and spec. Errors are one line.
func ReadManifest(r io.Reader, g *Grid) (*Manifest, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("read manifest: %w", err)
	}
	var m Manifest
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&m); err != nil {
		return nil, fmt.Errorf("manifest: malformed JSON: %v", oneLine(err))
	}
	if dec.More() {
		return nil, errors.New("manifest: trailing data after the JSON document")
	}
	if m.Format != manifestFormat {
		return nil, fmt.Errorf("manifest: format %d, this tilebench reads format %d", m.Format, manifestFormat)
	}
	edge, err := ParseEdge(m.Grid.Edge)
	if err != nil || m.Grid.Edge == "" {
		return nil, fmt.Errorf("manifest: grid edge %q: want pad, crop or strict", m.Grid.Edge)
	}
	gj := m.Grid
	mg, err := NewGrid(GridConfig{Width: gj.Width, Height: gj.Height, Channels: gj.Channels, PatchW: gj.PatchW, PatchH: gj.PatchH,
		StrideX: gj.StrideX, StrideY: gj.StrideY, Edge: edge, Fill: gj.Fill})
	if err != nil {
		return nil, fmt.Errorf("manifest: grid: %w", err)
	}
	if gridJSON(mg) != gj {
		return nil, fmt.Errorf("manifest: grid fields disagree (%s resolves to %dx%d cells covering %dx%d)", mg, mg.Cols, mg.Rows, mg.OutW, mg.OutH)
	}
	if g != nil && gridJSON(g) != gj {
		return nil, fmt.Errorf("manifest: made for grid %s, not %s", mg, g)
	}
	m.g = mg
	pr, err := m.Spec.parse()
	if err != nil {
		return nil, fmt.Errorf("manifest: spec: %w", err)
	}
	if m.Spec.Rotate && mg.PatchW != mg.PatchH {
		return nil, errors.New("manifest: spec rotates non-square patches")
	}
	N := mg.N()
	capa := N + m.Spec.NoiseTokens + m.Spec.Duplicates
	seen := make([]bool, N)
	for fi := range m.Frames {
		if err := checkRecord(&m.Frames[fi], N, capa, m.Spec, pr, seen); err != nil {
			return nil, fmt.Errorf("manifest: frame record %d: %w", fi, err)
		}
		if fi > 0 && m.Frames[fi].Frame <= m.Frames[fi-1].Frame {
			return nil, fmt.Errorf("manifest: frame record %d: frame %d does not follow frame %d", fi, m.Frames[fi].Frame, m.Frames[fi-1].Frame)
		}
	}
	return &m, nil
}

func oneLine(err error) string {
	return string(bytes.ReplaceAll([]byte(err.Error()), []byte("\n"), []byte(" ")))
}

// checkRecord checks one frame record against a grid of N cells.
func checkRecord(r *FrameRecord, N, capa int, spec Spec, pr parsedSpec, seen []bool) error {
	n := len(r.Perm)
	switch {
	case r.Frame < 0:
		return fmt.Errorf("frame %d is negative", r.Frame)
	case r.Real < 0 || r.Noise < 0 || r.Dups < 0 || r.Real > N || r.Real+r.Noise+r.Dups != n:
		return fmt.Errorf("real %d + noise %d + dups %d tokens does not match %d permutation entries (grid has %d cells)", r.Real, r.Noise, r.Dups, n, N)
	case n > capa:
		return fmt.Errorf("%d tokens, the spec allows at most %d", n, capa)
	case r.Noise != spec.NoiseTokens:
		return fmt.Errorf("%d noise tokens, the spec adds %d", r.Noise, spec.NoiseTokens)
	case len(r.Orient) != 0 && len(r.Orient) != n:
		return fmt.Errorf("%d orientations for %d tokens", len(r.Orient), n)
	case r.Epoch < 0:
		return fmt.Errorf("epoch %d is negative", r.Epoch)
	case r.Offset != [2]int{} && !translates(pr):
		return fmt.Errorf("offset %v but the spec neither shifts nor shakes the frame", r.Offset)
	}
	clear(seen)
	for i, j := range r.Perm {
		switch {
		case i < r.Real:
			if j < 0 || j >= N {
				return fmt.Errorf("perm[%d] = %d is not a cell of the %d-cell grid", i, j, N)
			}
			if seen[j] {
				return fmt.Errorf("perm names source token %d twice", j)
			}
			seen[j] = true
		case i < r.Real+r.Noise:
			if j != -1 {
				return fmt.Errorf("perm[%d] = %d, want -1 for a noise token", i, j)
			}
		default:
			if j < 0 || j >= N || !seen[j] {
				return fmt.Errorf("perm[%d] = %d duplicates no token of this frame", i, j)
			}
		}
	}
	for i, o := range r.Orient {
		if o < 0 || o > 7 || o&3 != 0 && !spec.Rotate || o&4 != 0 && !spec.Flip {
			return fmt.Errorf("orient[%d] = %d is not allowed by the spec", i, o)
		}
	}
	if len(r.Cells) != 0 && len(r.Cells) != r.Real {
		return fmt.Errorf("%d cells for %d real tokens", len(r.Cells), r.Real)
	}
	for i, c := range r.Cells {
		if c < 0 || c >= N || i > 0 && c <= r.Cells[i-1] {
			return fmt.Errorf("cells is not an ascending list of cells below %d", N)
		}
	}
	if pr.fill == fillDrop && r.Real < N && len(r.Cells) != r.Real {
		return fmt.Errorf("fill drop removed %d tokens but the record lists %d cells for %d tokens", N-r.Real, len(r.Cells), r.Real)
	}
	for i, c := range r.Mask {
		if c < 0 || c >= N || i > 0 && c <= r.Mask[i-1] {
			return fmt.Errorf("mask is not an ascending list of cells below %d", N)
		}
	}
	if pr.fill == fillDrop && r.Real+len(r.Mask) != N {
		return fmt.Errorf("fill drop: %d real tokens and %d occluded cells do not add up to %d", r.Real, len(r.Mask), N)
	}
	if pr.fill != fillDrop && r.Real != N {
		return fmt.Errorf("%d real tokens, want all %d", r.Real, N)
	}
	return nil
}

// translates reports whether a spec moves the frame (shift or shake).
func translates(pr parsedSpec) bool {
	for _, c := range pr.corr {
		if c.Kind == "shift" || c.Kind == "shake" {
			return true
		}
	}
	return false
}

// NewPipeline rebuilds the pipeline that made m, Reset to m's seed, so
// that applying it to the same frames gives the same records and bytes.
func (m *Manifest) NewPipeline() (*Pipeline, error) {
	p, err := NewPipeline(m.g, m.Spec)
	if err != nil {
		return nil, fmt.Errorf("manifest: %w", err)
	}
	p.Reset(m.Seed)
	return p, nil
}

// Record returns the record of frame t, or nil.
func (m *Manifest) Record(t int) *FrameRecord {
	for i := range m.Frames {
		if m.Frames[i].Frame == t {
			return &m.Frames[i]
		}
	}
	return nil
}

// Unscramble inverts the scramble, rotations and flips of frame t (see
// FrameRecord.Unscramble).
func (m *Manifest) Unscramble(frame int, src, dst *TokenSet) error {
	r, err := m.recordOf(frame)
	if err != nil {
		return err
	}
	return r.Unscramble(m.g, src, dst)
}

func (m *Manifest) recordOf(frame int) (*FrameRecord, error) {
	if r := m.Record(frame); r != nil {
		return r, nil
	}
	return nil, fmt.Errorf("unscramble: manifest has no frame %d", frame)
}

// Unscramble puts the tokens of src (the output of the pipeline step that
// r records) back into grid order in dst: slot j gets the real token that
// came from source cell j, turned back to its original orientation, with
// Pos Cell(j). Noise tokens and duplicates are left out; a dropped cell
// gets zeros and Pos NoCell, so Assemble draws it black. dst must have
// room for g.N() tokens.
func (r *FrameRecord) Unscramble(g *Grid, src, dst *TokenSet) error {
	if src.N != len(r.Perm) || src.D != g.D() || len(src.Data) < src.N*src.D {
		return fmt.Errorf("unscramble: frame %d has %d tokens of %d values, record has %d tokens of %d", r.Frame, src.N, src.D, len(r.Perm), g.D())
	}
	return r.unscramble(g, src, dst, func(k int) int { return k })
}

// UnscramblePicture is Unscramble for the picture of a step's output (as
// Assemble draws it and an export saves it): cells holds that picture
// tokenized in grid order (N tokens, e.g. by a Tokenizer on g.Covered()),
// so the token that output token k became is read from the cell it sat
// in. Exact for non-overlapping grids; with overlapping tiles the picture
// holds averages.
func (r *FrameRecord) UnscramblePicture(g *Grid, cells, dst *TokenSet) error {
	N := g.N()
	if cells.N != N || cells.D != g.D() || len(cells.Data) < N*cells.D {
		return fmt.Errorf("unscramble: picture of frame %d has %d tokens of %d values, grid has %d of %d", r.Frame, cells.N, cells.D, N, g.D())
	}
	if len(r.Cells) != 0 && len(r.Cells) != r.Real {
		return fmt.Errorf("unscramble: frame %d record is inconsistent", r.Frame)
	}
	return r.unscramble(g, cells, dst, func(k int) int {
		if len(r.Cells) != 0 {
			return r.Cells[k]
		}
		return k
	})
}

// unscramble moves token at(k) of src, for each real output token k, to
// dst slot Perm[k], undoing its orientation.
func (r *FrameRecord) unscramble(g *Grid, src, dst *TokenSet, at func(k int) int) error {
	N, D, C := g.N(), g.D(), g.Channels
	switch {
	case dst == src || dst.Cap() < N || len(dst.Data) < N*D:
		return fmt.Errorf("unscramble: destination has room for %d tokens, need %d (and must not be the source)", dst.Cap(), N)
	case r.Real < 0 || r.Real > len(r.Perm) || len(r.Orient) != 0 && len(r.Orient) != len(r.Perm):
		return fmt.Errorf("unscramble: frame %d record is inconsistent", r.Frame)
	}
	dst.N, dst.D = N, D
	for j := 0; j < N; j++ {
		dst.Pos[j] = NoCell
	}
	clear(dst.Data[:N*D])
	pw, ph := g.PatchW, g.PatchH
	for k := 0; k < r.Real; k++ {
		j, s := r.Perm[k], at(k)
		if j < 0 || j >= N || dst.Pos[j] != NoCell {
			return fmt.Errorf("unscramble: frame %d: perm[%d] = %d is not a fresh cell", r.Frame, k, j)
		}
		if s < 0 || s >= src.N {
			return fmt.Errorf("unscramble: frame %d: token %d has no place %d", r.Frame, k, s)
		}
		in := src.Data[s*D : (s+1)*D]
		out := dst.Data[j*D : (j+1)*D]
		var o uint8
		if len(r.Orient) != 0 {
			if r.Orient[k] < 0 || r.Orient[k] > 7 {
				return fmt.Errorf("unscramble: frame %d: orientation %d out of range", r.Frame, r.Orient[k])
			}
			o = uint8(r.Orient[k])
		}
		if o&3 != 0 && pw != ph {
			return fmt.Errorf("unscramble: frame %d: orientation %d does not fit %dx%d patches", r.Frame, o, pw, ph)
		}
		if o == 0 {
			copy(out, in)
		} else {
			for y := 0; y < ph; y++ {
				for x := 0; x < pw; x++ {
					sx, sy := orientSrc(o, x, y, pw, ph)
					dp, sp := y*pw+x, sy*pw+sx
					copy(out[sp*C:sp*C+C], in[dp*C:dp*C+C])
				}
			}
		}
		dst.Pos[j] = g.Cell(j)
	}
	return nil
}

// UnscramblePicture inverts the scramble of frame t from its picture (see
// FrameRecord.UnscramblePicture).
func (m *Manifest) UnscramblePicture(frame int, cells, dst *TokenSet) error {
	r, err := m.recordOf(frame)
	if err != nil {
		return err
	}
	return r.UnscramblePicture(m.g, cells, dst)
}

// maskCells decides which cells of g a user mask hides. The mask must be
// the source frame's size (Width×Height); a pixel is occluded when its
// grey value (color.GrayModel of the premultiplied colour, so transparent
// pixels count as black) is ≥ 128; a cell is occluded when at least half
// of its pixels that lie inside the source frame are.
func maskCells(g *Grid, mask image.Image) ([]bool, error) {
	b := mask.Bounds()
	if b.Dx() != g.Width || b.Dy() != g.Height {
		return nil, fmt.Errorf("mask is %dx%d, frames are %dx%d", b.Dx(), b.Dy(), g.Width, g.Height)
	}
	cells := make([]bool, g.N())
	for i := range cells {
		rc := g.Rect(g.Cell(i)).Intersect(image.Rect(0, 0, g.Width, g.Height))
		hit, all := 0, 0
		for y := rc.Min.Y; y < rc.Max.Y; y++ {
			for x := rc.Min.X; x < rc.Max.X; x++ {
				all++
				if color.GrayModel.Convert(mask.At(b.Min.X+x, b.Min.Y+y)).(color.Gray).Y >= 128 {
					hit++
				}
			}
		}
		cells[i] = all > 0 && 2*hit >= all
	}
	return cells, nil
}

func readMaskFile(g *Grid, path string) ([]bool, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("occlude mask: %w", err)
	}
	defer f.Close()
	// The header first: a mask of another size than the frames (however
	// large its header says it is) is refused before any pixel is decoded.
	cfg, err := png.DecodeConfig(f)
	if err != nil {
		return nil, fmt.Errorf("occlude mask %s: not a readable PNG: %v", path, err)
	}
	if cfg.Width != g.Width || cfg.Height != g.Height {
		return nil, fmt.Errorf("occlude mask %s: mask is %dx%d, frames are %dx%d", path, cfg.Width, cfg.Height, g.Width, g.Height)
	}
	if _, err := f.Seek(0, io.SeekStart); err != nil {
		return nil, fmt.Errorf("occlude mask %s: %w", path, err)
	}
	img, err := png.Decode(f)
	if err != nil {
		return nil, fmt.Errorf("occlude mask %s: not a readable PNG: %v", path, err)
	}
	cells, err := maskCells(g, img)
	if err != nil {
		return nil, fmt.Errorf("occlude mask %s: %w", path, err)
	}
	return cells, nil
}
