// Package all registers every built-in game; import it for its side effect.
package all

import (
	_ "tilebench/games/drive"
	_ "tilebench/games/paddle"
)
