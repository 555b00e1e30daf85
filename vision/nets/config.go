package nets

import (
	"fmt"
	"math"
)

// Family names.
const (
	Attention    = "attention"
	PosAttention = "posattention"
	MLP          = "mlp"
	MeanPool     = "meanpool"
)

// Families lists the family names New accepts.
var Families = []string{Attention, PosAttention, MLP, MeanPool}

// Config holds a family and its hyper-parameters. The zero value is the
// default set-attention policy; every zero field takes the default given
// on it. Fields that a family does not use are ignored by it (and reset to
// zero by Resolved, so that two configs of one network compare equal).
type Config struct {
	// Family is "attention" (default), "posattention", "mlp" or "meanpool".
	Family string
	// KeySize is the width d of keys and queries (attention families).
	// Default 16.
	KeySize int
	// KeyHidden, when > 0, gives the key function one hidden tanh layer of
	// this width; 0 (default) makes the key function linear.
	KeyHidden int
	// Value is "linear" (default: a learned linear map of each token's
	// pixels to ValueSize values) or "identity" (the pixels themselves).
	Value string
	// ValueSize is the width of a linear value. Default 16.
	ValueSize int
	// Queries is M, the number of rows of the fixed query bank. Default 16.
	Queries int
	// QueryDim is the width of the sinusoidal positional encoding rows
	// (Vaswani et al. 2017, §3.5) that the learned projection maps to
	// KeySize. Default 16; must be even.
	QueryDim int
	// Hidden is the width of the hidden tanh layer of the head (every
	// family). Default 32.
	Hidden int
	// TokenHidden is the width of the per-token tanh layer of meanpool.
	// Default 32.
	TokenHidden int
	// PrevAction concatenates the previous action to every token's key
	// input (attention families), token input (meanpool) or to the input
	// (mlp, once). Continuous actions as their values, discrete ones as a
	// one-hot row. Default false.
	PrevAction bool
	// Context is k, the number of frames each token carries: the token's
	// cell now and over the k−1 previous steps (zeros before the episode
	// began or for cells that had no token). 0 or 1 (default) is the
	// current frame only.
	Context int
	// Centre subtracts the token set's mean token from every token's
	// pixels (each of the k frames, value by value) before the family
	// reads them. The mean is over the set, so centring keeps a set
	// family's indifference to token order; it takes out what all tokens
	// share (a static backdrop's average, a global colour cast), which
	// lets a few informative tokens stand out. Default false.
	Centre bool
	// Capacity is the number of tokens the buffers are sized for. Default
	// twice the grid's token count; a larger set grows them once.
	Capacity int
}

// Limits on hyper-parameters, to refuse configs that would allocate
// absurd amounts of memory.
const (
	maxWidth   = 4096
	maxContext = 16
)

// Resolved returns c with every default filled in and the fields its
// family does not use set to zero. It does not check c (see New).
func (c Config) Resolved() Config {
	if c.Family == "" {
		c.Family = Attention
	}
	def := func(v *int, d int) {
		if *v == 0 {
			*v = d
		}
	}
	if c.Context <= 1 {
		c.Context = 1
	}
	def(&c.Hidden, 32)
	switch c.Family {
	case Attention, PosAttention:
		def(&c.KeySize, 16)
		def(&c.Queries, 16)
		def(&c.QueryDim, 16)
		if c.Value == "" {
			c.Value = "linear"
		}
		if c.Value == "linear" {
			def(&c.ValueSize, 16)
		} else {
			c.ValueSize = 0
		}
		c.TokenHidden = 0
	case MeanPool:
		def(&c.TokenHidden, 32)
		c.KeySize, c.KeyHidden, c.Value, c.ValueSize, c.Queries, c.QueryDim = 0, 0, "", 0, 0, 0
	case MLP:
		c.KeySize, c.KeyHidden, c.Value, c.ValueSize, c.Queries, c.QueryDim, c.TokenHidden = 0, 0, "", 0, 0, 0, 0
	}
	return c
}

// Validate checks c as given, before defaults: a negative width, count
// or context is refused (no default stands for it; 0 is the default),
// then the resolved config must be in range (see the Limits).
func (c Config) Validate() error {
	for _, f := range []struct {
		name string
		v    int
	}{{"key size", c.KeySize}, {"key hidden", c.KeyHidden}, {"value size", c.ValueSize}, {"queries", c.Queries},
		{"query dim", c.QueryDim}, {"hidden", c.Hidden}, {"token hidden", c.TokenHidden}, {"context", c.Context}, {"capacity", c.Capacity}} {
		if f.v < 0 {
			return fmt.Errorf("%s %d: want 0 (the default) or more", f.name, f.v)
		}
	}
	return c.Resolved().check()
}

// check validates a resolved config.
func (c Config) check() error {
	switch c.Family {
	case Attention, PosAttention, MLP, MeanPool:
	default:
		return fmt.Errorf("unknown policy family %q (have %v)", c.Family, Families)
	}
	pos := func(name string, v int) error {
		if v < 0 || v > maxWidth {
			return fmt.Errorf("%s %d: want 1..%d", name, v, maxWidth)
		}
		return nil
	}
	for _, f := range []struct {
		name string
		v    int
	}{{"key size", c.KeySize}, {"key hidden", c.KeyHidden}, {"value size", c.ValueSize}, {"queries", c.Queries},
		{"query dim", c.QueryDim}, {"hidden", c.Hidden}, {"token hidden", c.TokenHidden}, {"capacity", c.Capacity / 64}} {
		if err := pos(f.name, f.v); err != nil {
			return err
		}
	}
	if c.Context < 1 || c.Context > maxContext {
		return fmt.Errorf("context %d frames: want 1..%d", c.Context, maxContext)
	}
	if c.Family == Attention || c.Family == PosAttention {
		if c.Value != "linear" && c.Value != "identity" {
			return fmt.Errorf("value function %q: want linear or identity", c.Value)
		}
		if c.QueryDim%2 != 0 {
			return fmt.Errorf("query dim %d: must be even (sine and cosine pairs)", c.QueryDim)
		}
	}
	return nil
}

// PositionalEncoding returns the rows×dim sinusoidal encoding of
// Vaswani et al. 2017, §3.5, row-major:
//
//	PE(pos, 2i)   = sin(pos / 10000^(2i/dim))
//	PE(pos, 2i+1) = cos(pos / 10000^(2i/dim))
//
// for positions 0..rows−1, computed in float64 and rounded once.
func PositionalEncoding(rows, dim int) []float32 {
	pe := make([]float32, rows*dim)
	for p := 0; p < rows; p++ {
		for j := 0; j < dim; j++ {
			i2 := j - j%2
			ang := float64(p) / math.Pow(10000, float64(i2)/float64(dim))
			if j%2 == 0 {
				pe[p*dim+j] = float32(math.Sin(ang))
			} else {
				pe[p*dim+j] = float32(math.Cos(ang))
			}
		}
	}
	return pe
}
