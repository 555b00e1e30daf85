package remote

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
)

// batchState holds Serve's buffers for batch messages, allocated on the
// first batch and reused.
type batchState struct {
	steps   []int64
	counts  []int64
	prev    []float64
	payload []byte
	reply   []float64
}

// batch answers one batch message (ServeOptions.Batch): it decodes each
// observation in turn, asks the policy, and sends one actions reply.
func (s *server) batch(br *bufio.Reader, bw *bufio.Writer) error {
	k64, ok, err := s.hdr.integer("count", 1, MaxBatch)
	if err != nil || !ok {
		return fmt.Errorf("serve: batch: want \"count\" 1..%d", MaxBatch)
	}
	k := int(k64)
	dim := len(s.action)
	size := 1
	if s.h.Dtype == Float32 {
		size = 4
	}
	per := payloadSize(ObsFrame, s.h.Dtype, s.h.Frame, 0, 0)
	b := &s.bs
	// The header's numbers live in the parser's own slice, but the next
	// parse reuses it: copy them out before anything else is read.
	ts, ok, err := s.hdr.floats("t")
	if err != nil || !ok || len(ts) != k {
		return fmt.Errorf("serve: batch: want \"t\", an array of %d steps", k)
	}
	b.steps = b.steps[:0]
	for _, v := range ts {
		if v != math.Trunc(v) || v < 0 || v > math.MaxInt32 {
			return fmt.Errorf("serve: batch: step %v is not a whole number", v)
		}
		b.steps = append(b.steps, int64(v))
	}
	b.counts = b.counts[:0]
	total := k * per
	if s.h.Obs == ObsTokens {
		ns, ok, err := s.hdr.floats("n")
		if err != nil || !ok || len(ns) != k {
			return fmt.Errorf("serve: batch: want \"n\", an array of %d token counts", k)
		}
		total = 0
		for _, v := range ns {
			if v != math.Trunc(v) || v < 0 || int(v) > s.tokens.Cap() {
				return fmt.Errorf("serve: batch: token count %v: want 0..%d", v, s.tokens.Cap())
			}
			b.counts = append(b.counts, int64(v))
			total += int(v) * (s.grid.D()*size + 4)
		}
	}
	b.prev = b.prev[:0]
	if prev, ok, _ := s.hdr.floats("prev"); ok && len(prev) == k*dim {
		b.prev = append(b.prev, prev...)
	}
	n, ok, err := s.hdr.integer("len", 0, MaxPayload)
	if err != nil || !ok || int(n) != total {
		return fmt.Errorf("serve: batch: payload of %d bytes, the observations need %d", n, total)
	}
	if cap(b.payload) < total {
		b.payload = make([]byte, total)
	}
	buf := b.payload[:total]
	if _, err := io.ReadFull(br, buf); err != nil {
		return fmt.Errorf("serve: batch: payload: %w", err)
	}
	b.reply = b.reply[:0]
	off := 0
	for i := 0; i < k; i++ {
		sz, cnt := per, int64(0)
		if s.h.Obs == ObsTokens {
			cnt = b.counts[i]
			sz = int(cnt) * (s.grid.D()*size + 4)
		}
		if err := s.decode(b.steps[i], buf[off:off+sz], cnt, nil); err != nil {
			return err
		}
		off += sz
		if len(b.prev) == k*dim {
			copy(s.prev, b.prev[i*dim:(i+1)*dim])
		}
		clear(s.action)
		if err := s.pol.Act(&s.obs, s.action); err != nil {
			e, _ := json.Marshal(map[string]string{"msg": "error", "reason": err.Error()})
			bw.Write(append(e, '\n'))
			bw.Flush()
			return fmt.Errorf("serve: step %d: %w", b.steps[i], err)
		}
		b.reply = append(b.reply, s.action...)
	}
	out := append(s.out[:0], `{"msg":"actions","t":`...)
	out = strconv.AppendInt(out, b.steps[0], 10)
	out = append(out, `,"count":`...)
	out = strconv.AppendInt(out, int64(k), 10)
	out = append(out, `,"action":[`...)
	for i, v := range b.reply {
		if i > 0 {
			out = append(out, ',')
		}
		out = appendJSONFloat(out, v)
	}
	out = append(out, "]}\n"...)
	s.out = out
	bw.Write(out)
	return bw.Flush()
}
