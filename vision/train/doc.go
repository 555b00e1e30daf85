// Package train trains tilebench's policy families: behaviour cloning with
// DAgger-style aggregation (gradient descent with Adam), CMA-ES through
// gonum's optimize.CmaEsChol, and a natural-evolution-style ES (Salimans
// et al. 2017).
//
// The optimisers work on flat float32 parameter vectors, so they serve
// every family whose parameters are one slice (nets.Net.Params), and any
// other problem (the tests solve the sphere and Rosenbrock functions).
//
// # Seeds
//
// Training only ever plays games on training seeds (games.Train(i)):
//
//   - i in [0, ValidationStart) for data collection and ES/CMA-ES fitness;
//   - i in [ValidationStart, ValidationStart+ValidationLen) for early
//     stopping (the validation slice).
//
// The held-out seeds (games.HeldOut) that studies evaluate on are never
// touched while training; the held-out score recorded in a weights file is
// measured once, after training.
package train

// ValidationStart is the first training-seed index of the validation
// slice used for early stopping; ValidationLen is its length.
const (
	ValidationStart = 900_000
	ValidationLen   = 100_000
)
