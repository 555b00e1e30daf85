package remote

import (
	"bufio"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"io"
	"math"
	"strconv"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
)

// ServeOptions configure Serve. The zero value is useful.
type ServeOptions struct {
	// Name is sent in the ready message. Default: the policy's Info label.
	Name string
	// Accept, if set, sees the hello message; a non-nil error refuses the
	// session with the error's text as the reason.
	Accept func(*Hello) error
	// Batch, if above 1, is offered in the ready message: the policy is
	// stateless and takes up to Batch observations in one batch message
	// (serve_batch.go). Default 0: no batches.
	Batch int
}

// Serve is the policy side of the protocol, for policies written in Go:
// it answers one session read from r and written to w with pol, until
// bye or the end of r. It is what the tests' helper processes and
// benchmark child run, and a reference for implementers in other
// languages. Serve builds each observation in buffers allocated once.
func Serve(r io.Reader, w io.Writer, pol vision.Policy, opt ServeOptions) error {
	br := bufio.NewReaderSize(r, MaxLine)
	bw := bufio.NewWriterSize(w, 4096)
	line, err := br.ReadSlice('\n')
	if err != nil {
		return fmt.Errorf("serve: read hello: %w", err)
	}
	var h Hello
	if err := json.Unmarshal(line, &h); err != nil || h.Msg != "hello" {
		return fmt.Errorf("serve: first message is not a hello")
	}
	refuse := func(reason string) error {
		b, _ := json.Marshal(map[string]string{"msg": "refuse", "reason": reason})
		bw.Write(append(b, '\n'))
		bw.Flush()
		return fmt.Errorf("serve: refused: %s", reason)
	}
	if h.Protocol != Version {
		return refuse(fmt.Sprintf("protocol %d not spoken (this side speaks %d)", h.Protocol, Version))
	}
	grid, err := h.Tokens.Grid()
	if err != nil {
		return refuse(err.Error())
	}
	space, err := h.Action.Space()
	if err != nil {
		return refuse(err.Error())
	}
	if h.Frame != [3]int{grid.OutH, grid.OutW, grid.Channels} {
		return refuse(fmt.Sprintf("frame %v does not match the token grid (%dx%dx%d)", h.Frame, grid.OutH, grid.OutW, grid.Channels))
	}
	if h.Tokens.Max < 0 || h.Tokens.Max > 1<<20 {
		return refuse(fmt.Sprintf("token capacity %d out of range", h.Tokens.Max))
	}
	if h.Obs != ObsFrame && h.Obs != ObsTokens || h.Dtype != Uint8 && h.Dtype != Float32 {
		return refuse(fmt.Sprintf("observation %s/%s not understood", h.Obs, h.Dtype))
	}
	if h.Limits.MaxPayload < 0 || h.Limits.MaxPayload > MaxPayload {
		return refuse("payload limit out of range")
	}
	if opt.Accept != nil {
		if err := opt.Accept(&h); err != nil {
			return refuse(err.Error())
		}
	}
	info := pol.Info()
	name := opt.Name
	if name == "" {
		name = info.Label
	}
	readyMsg := map[string]any{"msg": "ready", "protocol": Version, "name": name, "invariant": info.Invariant}
	if opt.Batch > 1 {
		readyMsg["batch"] = min(opt.Batch, MaxBatch)
	}
	ready, _ := json.Marshal(readyMsg)
	bw.Write(append(ready, '\n'))
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("serve: %w", err)
	}

	s := &server{h: &h, grid: grid, space: space, pol: pol}
	s.tokens = patch.NewTokenSet(h.Tokens.Max, grid.D())
	s.frame = image.NewRGBA(image.Rect(0, 0, h.Frame[1], h.Frame[0]))
	if h.Obs == ObsTokens && info.WantsFrame || h.Obs == ObsFrame && !info.WantsFrame && grid.OutW == grid.Width && grid.OutH == grid.Height {
		s.tok = patch.NewTokenizer(grid)
	}
	s.payload = make([]byte, h.Limits.MaxPayload)
	s.prev = make([]float64, space.Dim())
	s.action = make([]float64, space.Dim())
	s.obs = vision.Observation{Tokens: s.tokens, Grid: grid, PrevAction: s.prev}
	for {
		line, err := br.ReadSlice('\n')
		if err != nil {
			if errors.Is(err, io.EOF) && len(line) == 0 {
				return nil
			}
			return fmt.Errorf("serve: read: %w", err)
		}
		if err := s.hdr.parse(line[:len(line)-1]); err != nil {
			return fmt.Errorf("serve: %w", err)
		}
		switch {
		case s.hdr.isMsg("step"):
			if err := s.step(br, bw); err != nil {
				return err
			}
		case s.hdr.isMsg("batch") && opt.Batch > 1:
			if err := s.batch(br, bw); err != nil {
				return err
			}
		case s.hdr.isMsg("start"):
			seed, _, err := s.hdr.unsigned("seed")
			if err != nil {
				return fmt.Errorf("serve: start: %w", err)
			}
			pol.Reset(seed)
		case s.hdr.isMsg("end"):
		case s.hdr.isMsg("bye"):
			return nil
		default:
			return fmt.Errorf("serve: unknown message %q", s.hdr.msg())
		}
	}
}

type server struct {
	h       *Hello
	grid    *patch.Grid
	space   games.Controls
	pol     vision.Policy
	tok     *patch.Tokenizer
	hdr     header
	tokens  *patch.TokenSet
	frame   *image.RGBA
	payload []byte
	prev    []float64
	action  []float64
	obs     vision.Observation
	out     []byte
	bs      batchState
	wbuf    []float32 // weights of the served policy (weights.go)
}

func (s *server) step(br *bufio.Reader, bw *bufio.Writer) error {
	t, _, err := s.hdr.integer("t", 0, math.MaxInt32)
	if err != nil {
		return fmt.Errorf("serve: step: %w", err)
	}
	n, ok, err := s.hdr.integer("len", 0, int64(len(s.payload)))
	if err != nil || !ok {
		return fmt.Errorf("serve: step %d: bad payload length", t)
	}
	// The header aliases the reader's buffer: take what is needed before
	// reading the payload.
	count, _, cerr := s.hdr.integer("n", 0, int64(s.tokens.Cap()))
	buf := s.payload[:n]
	if _, err := io.ReadFull(br, buf); err != nil {
		return fmt.Errorf("serve: step %d: payload: %w", t, err)
	}
	if prev, ok, _ := s.hdr.floats("prev"); ok && len(prev) == len(s.prev) {
		copy(s.prev, prev)
	}
	if err := s.decode(t, buf, count, cerr); err != nil {
		return err
	}
	clear(s.action)
	if err := s.pol.Act(&s.obs, s.action); err != nil {
		b, _ := json.Marshal(map[string]string{"msg": "error", "reason": err.Error()})
		bw.Write(append(b, '\n'))
		bw.Flush()
		return fmt.Errorf("serve: step %d: %w", t, err)
	}
	b := append(s.out[:0], `{"msg":"action","t":`...)
	b = strconv.AppendInt(b, t, 10)
	b = append(b, `,"action":[`...)
	for i, v := range s.action {
		if i > 0 {
			b = append(b, ',')
		}
		b = appendJSONFloat(b, v)
	}
	b = append(s.appendWeights(append(b, ']')), "}\n"...)
	s.out = b
	bw.Write(b)
	return bw.Flush()
}

// decode builds s.obs for step t from its payload (count tokens for obs
// tokens, cerr the error reading the count).
func (s *server) decode(t int64, buf []byte, count int64, cerr error) error {
	n := len(buf)
	size := 1
	if s.h.Dtype == Float32 {
		size = 4
	}
	s.obs.Step = int(t)
	s.obs.Frame = nil
	if s.h.Obs == ObsTokens {
		if err := cerr; err != nil || int(n) != int(count)*(s.grid.D()*size+4) {
			return fmt.Errorf("serve: step %d: %d tokens (%v) and a payload of %d bytes disagree", t, count, err, n)
		}
		ts := s.tokens
		ts.N = int(count)
		vals := ts.Data[:ts.N*ts.D]
		if size == 1 {
			for i, v := range buf[:len(vals)] {
				vals[i] = float32(v) / 255
			}
		} else {
			raw := buf[:4*len(vals)]
			for i := range vals {
				vals[i] = math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i : 4*i+4]))
			}
		}
		pos := buf[len(vals)*size:]
		for i := 0; i < ts.N; i++ {
			ts.Pos[i] = patch.Pos{Row: int16(binary.LittleEndian.Uint16(pos[4*i:])), Col: int16(binary.LittleEndian.Uint16(pos[4*i+2:]))}
		}
		if s.tok != nil {
			if err := s.tok.Assemble(ts, s.frame); err != nil {
				return fmt.Errorf("serve: step %d: %w", t, err)
			}
			s.obs.Frame = s.frame
		}
	} else {
		hh, ww, cc := s.h.Frame[0], s.h.Frame[1], s.h.Frame[2]
		if int(n) != hh*ww*cc*size {
			return fmt.Errorf("serve: step %d: frame payload of %d bytes", t, n)
		}
		decodeFrame(s.frame.Pix, buf, hh*ww, cc, size)
		s.obs.Frame = s.frame
		// Token-reading policies get the frame's tokens, in grid order.
		s.tokens.N = 0
		if s.tok != nil {
			if err := s.tok.Tokenize(s.frame, s.tokens); err != nil {
				return fmt.Errorf("serve: step %d: %w", t, err)
			}
			s.tokens.N = s.grid.N()
		}
	}
	return nil
}

// appendJSONFloat writes v exactly, and NaN/±Inf as the literals Python
// writes (which the reader reports as non-finite actions).
func appendJSONFloat(b []byte, v float64) []byte {
	switch {
	case math.IsNaN(v):
		return append(b, "NaN"...)
	case math.IsInf(v, 1):
		return append(b, "Infinity"...)
	case math.IsInf(v, -1):
		return append(b, "-Infinity"...)
	}
	return appendFloat(b, v)
}

// decodeFrame fills RGBA pixels from n pixels of c channels (grey is
// spread to R, G and B) of 1-byte or float32 values.
func decodeFrame(pix, buf []byte, n, c, size int) {
	pix = pix[:4*n]
	switch {
	case size == 1 && c == 3:
		unpackRGB(pix, buf, n)
	case size == 1:
		for i := 0; i < n; i++ {
			v := buf[i]
			pix[4*i], pix[4*i+1], pix[4*i+2], pix[4*i+3] = v, v, v, 255
		}
	default:
		for i := 0; i < n; i++ {
			for ch := 0; ch < 3; ch++ {
				f := math.Float32frombits(binary.LittleEndian.Uint32(buf[4*(i*c+min(ch, c-1)):]))
				pix[4*i+ch] = uint8(math.Round(float64(min(1, max(0, f))) * 255))
			}
			pix[4*i+3] = 255
		}
	}
}
