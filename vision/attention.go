package vision

// AttentionReporter is implemented by policies that can say how much
// attention each token of their last observation drew: the attention
// families of vision/nets, and external policies that send weights with
// their actions (docs/policy-protocol.md). Asking costs the policy nothing
// when nobody asks: Act keeps what it computed anyway and TokenWeights
// reads it.
type AttentionReporter interface {
	// TokenWeights writes the weights of the last Act, one per token of
	// that observation in the order of its token set. sum (length at
	// least n) receives each token's weight summed over the queries;
	// perQuery, when it holds at least queries·n values, receives the
	// weights of each query, query after query (it may be nil). Weights
	// are finite and ≥ 0. It returns the number of queries and tokens;
	// ok is false when there are no weights for the last step (none
	// computed, or sum too short), and then nothing was written. It does
	// not allocate.
	TokenWeights(sum, perQuery []float32) (queries, n int, ok bool)
}
