package weights

// Metadata keys tilebench writes in "__metadata__" (all values are
// strings, as the format requires). docs/weights-format.md describes each.
const (
	// KeyFormat holds the version of tilebench's weights layout, "1".
	KeyFormat = "tilebench.format"
	// KeyFamily names the policy family ("attention", "posattention",
	// "mlp", "meanpool").
	KeyFamily = "family"
	// KeyHyper holds the family's hyper-parameters as one JSON object.
	KeyHyper = "hyper"
	// KeyGame names the game the policy was trained on ("drive", "paddle").
	KeyGame = "game"
	// KeyFrame is the frame size the policy expects, "WxHxC" (e.g. "96x96x3").
	KeyFrame = "frame"
	// KeyPatch and KeyStride give the patch geometry, "WxH" (e.g. "8x8").
	KeyPatch  = "patch"
	KeyStride = "stride"
	// KeyEdge is the grid's edge policy as the CLI spells it.
	KeyEdge = "edge"
	// KeyMethod names the training method ("bc", "es", "cmaes"; "init"
	// for untrained weights).
	KeyMethod = "train.method"
	// KeySeed is the training seed, decimal.
	KeySeed = "train.seed"
	// KeyHeldOutScore is the mean return on held-out seeds, decimal;
	// KeyHeldOutEpisodes the number of episodes it averages.
	KeyHeldOutScore    = "heldout.score"
	KeyHeldOutEpisodes = "heldout.episodes"
)

// FormatVersion is the value of KeyFormat that this package writes.
const FormatVersion = "1"
