//go:build race

package watch

// raceOn is true under the race detector, whose overhead makes rates
// meaningless.
const raceOn = true
