package remote

import (
	"encoding/binary"
	"fmt"
	"image"
	"math"
	"strconv"

	"tilebench/games"
	"tilebench/patch"
)

// Version is the protocol version this package speaks.
const Version = 1

// Limits of the protocol (docs/policy-protocol.md, "Limits").
const (
	// MaxLine is the longest header line, in bytes with its newline, in
	// either direction.
	MaxLine = 64 << 10
	// MaxPayload is the largest payload tilebench sends; the hello
	// message states the largest of the session, which is usually far
	// smaller.
	MaxPayload = 256 << 20
	// MaxActionDim is the largest action vector.
	MaxActionDim = 1024
)

// Observation kinds and dtypes as the protocol spells them.
const (
	ObsFrame  = "frame"
	ObsTokens = "tokens"
	Uint8     = "uint8"
	Float32   = "float32"
)

// Hello is the first message tilebench sends: what the session will look
// like. The policy answers with ready or refuse.
type Hello struct {
	// Msg is "hello".
	Msg string `json:"msg"`
	// Protocol is the version tilebench speaks (Version).
	Protocol int `json:"protocol"`
	// Game is the game's name.
	Game string `json:"game"`
	// Obs is "frame" (the reassembled frame, H×W×C, channels last) or
	// "tokens" (the token set and each token's grid cell).
	Obs string `json:"obs"`
	// Dtype of observation values: "uint8" (0..255) or "float32" (0..1).
	Dtype string `json:"dtype"`
	// Frame is [height, width, channels] of the frame payload.
	Frame [3]int `json:"frame"`
	// Tokens describes the token payload (also sent with obs "frame", for
	// information).
	Tokens TokenLayout `json:"tokens"`
	// Action is the game's action space.
	Action ActionSpec `json:"action"`
	// Limits are the session's limits.
	Limits Limits `json:"limits"`
}

// TokenLayout describes the grid tokens are cut on.
type TokenLayout struct {
	// Max is the largest number of tokens in one step; Dim the values
	// per token (PatchH·PatchW·Channels, channels last).
	Max int `json:"max"`
	Dim int `json:"dim"`
	// Rows and Cols are the grid's cells; Patch [h, w] and Stride [y, x]
	// in pixels; Channels 1 or 3.
	Rows     int    `json:"rows"`
	Cols     int    `json:"cols"`
	Patch    [2]int `json:"patch"`
	Stride   [2]int `json:"stride"`
	Channels int    `json:"channels"`
	// Width and Height are the source frame's size (before padding or
	// cropping to whole patches).
	Width  int `json:"width"`
	Height int `json:"height"`
	// Edge ("pad", "crop", "strict") and Fill (the pad value in [0,1])
	// as the CLI spells them.
	Edge string  `json:"edge"`
	Fill float32 `json:"fill"`
}

// ActionSpec is the game's action space.
type ActionSpec struct {
	// Kind is "continuous" or "discrete".
	Kind string `json:"kind"`
	// Names of the dimensions (continuous) or of the choices (discrete).
	Names []string `json:"names"`
	// Low and High bound each continuous dimension (absent for discrete).
	Low  []float64 `json:"low,omitempty"`
	High []float64 `json:"high,omitempty"`
	// Dim is the length of the action array a reply carries.
	Dim int `json:"dim"`
}

// Limits are the session's limits.
type Limits struct {
	// MaxLine is the longest header line (MaxLine).
	MaxLine int `json:"max_line"`
	// MaxPayload is the largest payload of this session, in bytes.
	MaxPayload int `json:"max_payload"`
	// StepTimeoutMS bounds each step's round trip, in milliseconds.
	StepTimeoutMS int64 `json:"step_timeout_ms"`
	// HandshakeTimeoutMS bounds start-up and handshake, in milliseconds.
	HandshakeTimeoutMS int64 `json:"handshake_timeout_ms"`
}

// layoutOf describes grid g for capacity tokens.
func layoutOf(g *patch.Grid, capacity int) TokenLayout {
	return TokenLayout{
		Max: capacity, Dim: g.D(), Rows: g.Rows, Cols: g.Cols,
		Patch: [2]int{g.PatchH, g.PatchW}, Stride: [2]int{g.StrideY, g.StrideX},
		Channels: g.Channels, Width: g.Width, Height: g.Height, Edge: g.Edge.String(), Fill: g.Fill,
	}
}

// Grid rebuilds the patch grid a token layout describes.
func (l TokenLayout) Grid() (*patch.Grid, error) {
	edge, err := patch.ParseEdge(l.Edge)
	if err != nil {
		return nil, err
	}
	g, err := patch.NewGrid(patch.GridConfig{
		Width: l.Width, Height: l.Height, Channels: l.Channels,
		PatchW: l.Patch[1], PatchH: l.Patch[0], StrideX: l.Stride[1], StrideY: l.Stride[0],
		Edge: edge, Fill: l.Fill,
	})
	if err != nil {
		return nil, err
	}
	if g.Rows != l.Rows || g.Cols != l.Cols || g.D() != l.Dim {
		return nil, fmt.Errorf("token layout %dx%d cells of %d values does not match its geometry", l.Rows, l.Cols, l.Dim)
	}
	return g, nil
}

func specOf(a games.Controls) ActionSpec {
	return ActionSpec{Kind: a.Kind.String(), Names: a.Names, Low: a.Low, High: a.High, Dim: a.Dim()}
}

// Space rebuilds the action space.
func (a ActionSpec) Space() (games.Controls, error) {
	s := games.Controls{Names: a.Names, Low: a.Low, High: a.High}
	switch a.Kind {
	case "continuous":
		s.Kind = games.Continuous
		if len(a.Low) != len(a.Names) || len(a.High) != len(a.Names) {
			return s, fmt.Errorf("action space: %d names, %d lows, %d highs", len(a.Names), len(a.Low), len(a.High))
		}
	case "discrete":
		s.Kind = games.Discrete
	default:
		return s, fmt.Errorf("action kind %q: want continuous or discrete", a.Kind)
	}
	if len(a.Names) == 0 || s.Dim() != a.Dim {
		return s, fmt.Errorf("action space of dim %d with %d names", a.Dim, len(a.Names))
	}
	return s, nil
}

// payloadSize is the payload length of one step.
func payloadSize(obs string, dtype string, frame [3]int, n, dim int) int {
	size := 1
	if dtype == Float32 {
		size = 4
	}
	if obs == ObsFrame {
		return frame[0] * frame[1] * frame[2] * size
	}
	return n*dim*size + 4*n
}

// appendFloat appends v in the shortest form that reads back exactly.
func appendFloat(b []byte, v float64) []byte {
	return strconv.AppendFloat(b, v, 'g', -1, 64)
}

// appendFrame appends the H×W×C bytes (or float32s) of img.
func appendFrame(b []byte, img *image.RGBA, channels int, dtype string) []byte {
	w, h := img.Rect.Dx(), img.Rect.Dy()
	size := 1
	if dtype == Float32 {
		size = 4
	}
	start := len(b)
	need := w * h * channels * size
	if cap(b)-start < need {
		nb := make([]byte, start, start+need)
		copy(nb, b)
		b = nb
	}
	b = b[:start+need]
	dst := b[start:]
	k := 0
	for y := 0; y < h; y++ {
		row := img.Pix[y*img.Stride : y*img.Stride+4*w]
		switch {
		case size == 1 && channels == 3:
			packRGB(dst[k:k+3*w], row, w)
			k += 3 * w
		case size == 1:
			for x := 0; x < w; x++ {
				dst[k+x] = row[4*x]
			}
			k += w
		default:
			for x := 0; x < w; x++ {
				for c := 0; c < channels; c++ {
					binary.LittleEndian.PutUint32(dst[k:], math.Float32bits(float32(row[4*x+c])/255))
					k += 4
				}
			}
		}
	}
	return b
}

// appendTokens appends the N×D values then N (row, col) int16 pairs.
func appendTokens(b []byte, ts *patch.TokenSet, dtype string) []byte {
	vals := ts.Data[:ts.N*ts.D]
	size := 1
	if dtype == Float32 {
		size = 4
	}
	start := len(b)
	need := len(vals)*size + 4*ts.N
	if cap(b)-start < need {
		nb := make([]byte, start, start+need)
		copy(nb, b)
		b = nb
	}
	b = b[:start+need]
	dst := b[start:]
	if size == 1 {
		for i, v := range vals {
			q := math.Round(float64(v) * 255)
			dst[i] = uint8(min(255, max(0, q)))
		}
	} else {
		dst := dst[:4*len(vals)]
		for i, v := range vals {
			binary.LittleEndian.PutUint32(dst[4*i:4*i+4], math.Float32bits(v))
		}
	}
	pos := dst[len(vals)*size:]
	for i, p := range ts.Pos[:ts.N] {
		binary.LittleEndian.PutUint16(pos[4*i:], uint16(p.Row))
		binary.LittleEndian.PutUint16(pos[4*i+2:], uint16(p.Col))
	}
	return b
}

// packRGB copies the R, G, B bytes of w RGBA pixels from row into dst
// (3·w bytes), four pixels per step with 8-byte loads and stores.
func packRGB(dst, row []byte, w int) {
	x := 0
	for ; x+4 <= w; x += 4 {
		s := row[4*x : 4*x+16 : 4*x+16]
		a := binary.LittleEndian.Uint64(s[0:8])
		b := binary.LittleEndian.Uint64(s[8:16])
		p0, p1 := a&0xffffff, (a>>32)&0xffffff
		p2, p3 := b&0xffffff, (b>>32)&0xffffff
		d := dst[3*x : 3*x+12 : 3*x+12]
		binary.LittleEndian.PutUint64(d[0:8], p0|p1<<24|p2<<48)
		binary.LittleEndian.PutUint32(d[8:12], uint32(p2>>16|p3<<8))
	}
	for ; x < w; x++ {
		dst[3*x], dst[3*x+1], dst[3*x+2] = row[4*x], row[4*x+1], row[4*x+2]
	}
}

// unpackRGB is the inverse of packRGB: n RGB pixels of src into RGBA
// pixels of dst with alpha 255.
func unpackRGB(dst, src []byte, n int) {
	i := 0
	for ; i+4 <= n; i += 4 {
		s := src[3*i : 3*i+12 : 3*i+12]
		a := binary.LittleEndian.Uint64(s[0:8])
		c := uint64(binary.LittleEndian.Uint32(s[8:12]))
		p0, p1 := a&0xffffff, (a>>24)&0xffffff
		p2, p3 := (a>>48)|(c&0xff)<<16, c>>8
		const opaque = 0xff000000
		d := dst[4*i : 4*i+16 : 4*i+16]
		binary.LittleEndian.PutUint64(d[0:8], p0|opaque|(p1|opaque)<<32)
		binary.LittleEndian.PutUint64(d[8:16], p2|opaque|(p3|opaque)<<32)
	}
	for ; i < n; i++ {
		dst[4*i], dst[4*i+1], dst[4*i+2], dst[4*i+3] = src[3*i], src[3*i+1], src[3*i+2], 255
	}
}
