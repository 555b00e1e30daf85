package nets

// TokenWeights implements vision.AttentionReporter for the attention
// families: the softmax weights P = softmax(Q·Kᵀ/√d) of the last Forward,
// read from what the forward pass kept (e^(S − max S) and the inverse row
// sums) without changing it, so that a later Backward is unaffected.
func (n *attnNet) TokenWeights(sum, perQuery []float32) (queries, tokens int, ok bool) {
	a := &n.att
	if !a.have {
		return 0, 0, false
	}
	m, nt := a.m, a.n
	if len(sum) < nt {
		return m, nt, false
	}
	s := sum[:nt]
	clear(s)
	full := len(perQuery) >= m*nt
	for i := 0; i < m; i++ {
		scale := a.inv[i]
		if a.normalized {
			scale = 1
		}
		row := a.p[i*nt : (i+1)*nt]
		if full {
			pq := perQuery[i*nt : (i+1)*nt]
			for j, v := range row {
				w := v * scale
				pq[j] = w
				s[j] += w
			}
			continue
		}
		for j, v := range row {
			s[j] += v * scale
		}
	}
	return m, nt, true
}

// Reset starts an episode: the temporal context is emptied and the last
// step's weights are forgotten.
func (n *attnNet) Reset(seed uint64) {
	n.core.Reset(seed)
	n.att.have = false
}
