package remote

import (
	"fmt"
	"math"
	"strconv"
	"time"

	"tilebench/vision"
)

// Batched messages (docs/policy-protocol.md, "Batches"): a stateless
// policy that says "batch": B in its ready may be sent up to B
// observations in one batch message and answers them in one actions
// reply. Version 1 sessions without the key are unchanged.

// MaxBatch is the largest batch a policy may offer.
const MaxBatch = 1024

// maxBatchValues bounds count·dim of one batch, so that the reply's
// action array (up to ~32 bytes a number) fits a header line.
const maxBatchValues = 1024

// readBatch reads the optional "batch" of a ready message.
func (p *Policy) readBatch() *FaultError {
	v, ok, err := p.hdr.integer("batch", 0, MaxBatch)
	if err != nil {
		return p.newFault("handshake", -1, Protocol, "ready: %v", err)
	}
	if ok {
		p.batch = int(v)
	}
	return nil
}

// BatchSize is the most observations ActBatch takes at once: the batch
// the policy offered, cut so that the header and payload limits hold;
// 0 when the policy offered none (send steps with Act).
func (p *Policy) BatchSize() int {
	if p.batch <= 1 {
		return 0
	}
	b := min(p.batch, maxBatchValues/max(1, p.dim))
	if per := payloadSize(p.cfg.Obs, p.cfg.Dtype, p.frameShape, p.cfg.MaxTokens, p.cfg.Grid.D()); per > 0 {
		b = min(b, MaxPayload/per)
	}
	return max(b, 1)
}

// ActBatch sends obs in one batch message and writes the reply's actions
// into actions (len(actions) == len(obs), each of the action dimension).
// The observations must belong to the current episode, in any order of
// steps. The timeout is the step timeout times len(obs). A reply of the
// wrong count or length, or any value that Act would refuse, is a fault
// naming the observation's step.
func (p *Policy) ActBatch(obs []*vision.Observation, actions [][]float64) error {
	return p.actBatch(obs, nil, nil, actions)
}

// actBatch is ActBatch, with the frames taken from packed (PackedFrame's
// layout, back to back), or from the file from, instead of each
// observation's Frame when packed or from is not nil.
func (p *Policy) actBatch(obs []*vision.Observation, packed []byte, from *fileFrames, actions [][]float64) error {
	if p.fault != nil {
		return p.fault
	}
	if p.closed {
		return fmt.Errorf("policy %s: closed", p.target)
	}
	k := len(obs)
	if k == 0 {
		return nil
	}
	if bs := p.BatchSize(); k > bs || len(actions) != k {
		return fmt.Errorf("policy %s: batch of %d observations and %d actions, the session takes at most %d", p.target, k, len(actions), bs)
	}
	for i, a := range actions {
		if len(a) != p.dim {
			return fmt.Errorf("policy %s: action buffer %d of %d values, the session's actions have %d", p.target, i, len(a), p.dim)
		}
	}
	if from != nil {
		packed = nil
		if err := p.checkPacked(0, 0); err != nil {
			return err
		}
	}
	if packed != nil {
		if err := p.checkPacked(len(packed), k); err != nil {
			return err
		}
	}
	if !p.started {
		p.Reset(0)
	}
	first := obs[0].Step
	b := p.out[:0]
	if packed != nil || from != nil {
		b = p.head[:0]
	}
	b = p.prefix(b)
	b = append(b, `{"msg":"batch","count":`...)
	b = strconv.AppendInt(b, int64(k), 10)
	b = append(b, `,"t":[`...)
	for i, o := range obs {
		if i > 0 {
			b = append(b, ',')
		}
		b = strconv.AppendInt(b, int64(o.Step), 10)
	}
	b = append(b, ']')
	total := 0
	if p.cfg.Obs == ObsTokens {
		b = append(b, `,"n":[`...)
		for i, o := range obs {
			ts := o.Tokens
			if ts == nil || ts.N > p.cfg.MaxTokens || ts.D != p.cfg.Grid.D() {
				return fmt.Errorf("policy %s: step %d: token set does not fit the session (at most %d tokens of %d values)", p.target, o.Step, p.cfg.MaxTokens, p.cfg.Grid.D())
			}
			if i > 0 {
				b = append(b, ',')
			}
			b = strconv.AppendInt(b, int64(ts.N), 10)
			total += payloadSize(ObsTokens, p.cfg.Dtype, p.frameShape, ts.N, p.cfg.Grid.D())
		}
		b = append(b, ']')
	} else {
		for _, o := range obs {
			if packed != nil || from != nil {
				break
			}
			if o.Frame == nil || o.Frame.Rect.Dx() != p.frameShape[1] || o.Frame.Rect.Dy() != p.frameShape[0] {
				return fmt.Errorf("policy %s: step %d: observation has no %dx%d frame", p.target, o.Step, p.frameShape[1], p.frameShape[0])
			}
		}
		total = k * payloadSize(ObsFrame, p.cfg.Dtype, p.frameShape, 0, 0)
	}
	b = append(b, `,"prev":[`...)
	for i, o := range obs {
		if len(o.PrevAction) != p.dim {
			return fmt.Errorf("policy %s: step %d: previous action of %d values, want %d", p.target, o.Step, len(o.PrevAction), p.dim)
		}
		for j, v := range o.PrevAction {
			if i > 0 || j > 0 {
				b = append(b, ',')
			}
			b = appendFloat(b, v)
		}
	}
	b = append(b, `],"len":`...)
	b = strconv.AppendInt(b, int64(total), 10)
	b = append(b, "}\n"...)
	to := p.cfg.StepTimeout * time.Duration(k)
	deadline := time.Now().Add(to)
	if from != nil {
		p.head = b
		if f := p.sendFile("batch", first, b, from, total, deadline, to); f != nil {
			return f
		}
	} else if packed != nil {
		p.head = b
		b = p.place(b, packed)
	} else {
		for _, o := range obs {
			if p.cfg.Obs == ObsTokens {
				b = appendTokens(b, o.Tokens, p.cfg.Dtype)
			} else {
				b = appendFrame(b, o.Frame, p.frameShape[2], p.cfg.Dtype)
			}
		}
		p.out = b
	}
	if from == nil {
		if f := p.write("batch", first, b, deadline, to); f != nil {
			return f
		}
	}
	line, f := p.readLine("batch", first, deadline, to)
	if f != nil {
		return f
	}
	if f := p.parseReply("batch", first, line); f != nil {
		return f
	}
	return p.checkBatch(obs, actions)
}

// checkBatch validates the parsed actions reply of a batch.
func (p *Policy) checkBatch(obs []*vision.Observation, actions [][]float64) error {
	k, first := len(obs), obs[0].Step
	if !p.hdr.isMsg("actions") {
		return p.newFault("batch", first, Protocol, "want actions, got %q", clipString(p.hdr.msg()))
	}
	if t, ok, err := p.hdr.integer("t", math.MinInt64, math.MaxInt64); err != nil || !ok || t != int64(first) {
		return p.newFault("batch", first, Protocol, "actions must carry \"t\":%d (the batch's first step)", first)
	}
	if c, ok, err := p.hdr.integer("count", 0, MaxBatch); err != nil || !ok || c != int64(k) {
		return p.newFault("batch", first, Shape, "actions must carry \"count\":%d", k)
	}
	vals, ok, err := p.hdr.floats("action")
	if err != nil || !ok {
		return p.newFault("batch", first, Shape, "action must be an array of numbers")
	}
	if len(vals) != k*p.dim {
		return p.newFault("batch", first, Shape, "action has %d values, want %d (%d observations × %d)", len(vals), k*p.dim, k, p.dim)
	}
	for i := range obs {
		if err := p.check(obs[i].Step, vals[i*p.dim:(i+1)*p.dim], actions[i]); err != nil {
			return err
		}
	}
	return nil
}

// FrameOnly reports whether the session sends frames (obs "frame"): the
// policy then never reads an observation's tokens.
func (p *Policy) FrameOnly() bool { return p.cfg.Obs == ObsFrame }
