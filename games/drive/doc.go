// Package drive is the top-down driving game.
package drive
