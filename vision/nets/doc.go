// Package nets holds the trainable policy families of tilebench, the
// layers they are made of, their weights files and their compute cost.
//
// # Families
//
//   - "attention": set attention pooling, invariant to the order of the
//     tokens. A key function shared by all tokens (linear, or one hidden
//     tanh layer) reads each token's pixels (optionally with the previous
//     action and with the same cell over the last k frames); a value
//     function (linear or identity) reads its pixels; a fixed bank of M
//     query rows, the sinusoidal positional encoding of Vaswani et al.
//     2017 (§3.5) times a learned projection, attends over the tokens with
//     softmax(Q·Kᵀ/√d)·V; tanh; a small MLP head.
//   - "posattention": the same, with a learned embedding of each token's
//     grid cell added to its key (not invariant).
//   - "mlp": an MLP over all tokens concatenated in the order of the token
//     set (not invariant; needs exactly the grid's token count).
//   - "meanpool": Deep Sets (Zaheer et al. 2017): a per-token tanh layer,
//     the mean over tokens, the MLP head (invariant).
//
// Every family has a continuous and a discrete head. The head is
// Linear → tanh → Linear; for a continuous action space its outputs go
// through tanh and the affine map of [−1, 1] onto [Low, High], so
// Forward's outputs are actions within bounds; for a discrete space they
// are logits and Act takes the arg max.
//
// # API
//
//	net, err := nets.New(nets.Config{Family: "attention"}, grid, space, seed)
//	err = net.Act(obs, action)          // vision.Policy
//	err = net.Forward(obs, out)         // out: OutputDim() values
//	net.Backward(dOut)                  // adds into net.Grads()
//	params := net.Params()              // flat, aliases the net
//	err = nets.Save(path, net, meta)    // safetensors with __metadata__
//	net, err = nets.Load(path)
//	f, err := nets.ToFile(net, meta)    // *weights.File; nets.FromFile(f) back
//	cost, err := nets.Estimate(cfg, grid, space)
//	d, err := nets.MeasureLatency(net, nets.RandomObservation(grid, space, 1), 15, 20)
//
// Tensor names, shapes and metadata keys of weights files are listed in
// docs/families.md. Net is not safe for concurrent use: give each
// goroutine its own Clone.
//
// Forward and Backward keep the activations of one observation; a
// minibatch is a loop of Forward/Backward pairs accumulating into Grads.
// With temporal context (Config.Context > 1) Forward also advances the
// net's per-cell history, so observations must come in episode order and
// Reset starts an episode. Buffers are allocated at New for
// Config.Capacity tokens; Act and Forward/Backward do not allocate in
// steady state.
//
// Layers (linear, tanh, softmax attention, mean pool) are written once,
// each with a forward and a backward pass checked by central finite
// differences. Matrix products go through a small kernel table: a plain
// reference, blocked kernels, and on amd64 with AVX and FMA an assembly
// kernel with an 8-wide exp for the softmax (disabled by the purego build
// tag); tests compare them.
package nets
