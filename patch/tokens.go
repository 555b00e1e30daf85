package patch

// Pos is a token's cell on the patch grid.
type Pos struct {
	Row, Col int16
}

// TokenSet is N tokens of D float32 values each, with each token's grid
// position. The backing slices are caller-owned and sized to a capacity so
// that transforms that add or drop tokens do not allocate.
type TokenSet struct {
	// N is the number of tokens in use; D the values per token.
	N, D int
	// Data holds N·D values, token after token (see the package doc for
	// the order inside a token). len(Data) ≥ N·D; cap gives the capacity.
	Data []float32
	// Pos holds the grid cell of each token in use. A token added by a
	// transform (a noise token) has Pos{-1,-1}.
	Pos []Pos
}

// NewTokenSet allocates a token set with room for capacity tokens of d values.
func NewTokenSet(capacity, d int) *TokenSet {
	return &TokenSet{D: d, Data: make([]float32, capacity*d), Pos: make([]Pos, capacity)}
}

// Cap is the number of tokens the set has room for.
func (t *TokenSet) Cap() int { return len(t.Pos) }

// Token returns the values of token i.
func (t *TokenSet) Token(i int) []float32 { return t.Data[i*t.D : (i+1)*t.D : (i+1)*t.D] }

// CopyFrom makes t an exact copy of src, growing t's buffers only if they
// are too small.
func (t *TokenSet) CopyFrom(src *TokenSet) {
	if len(t.Data) < src.N*src.D {
		t.Data = make([]float32, len(src.Data))
	}
	if len(t.Pos) < src.N {
		t.Pos = make([]Pos, len(src.Pos))
	}
	t.N, t.D = src.N, src.D
	copy(t.Data, src.Data[:src.N*src.D])
	copy(t.Pos, src.Pos[:src.N])
}

// NoCell is the position given to tokens that stand for no grid cell.
var NoCell = Pos{Row: -1, Col: -1}
