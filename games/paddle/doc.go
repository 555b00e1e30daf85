// Package paddle is the paddle game.
package paddle
