package weights

// Metadata keys of tilebench policy files (all values are strings, as the
// format requires). The policy description — family, hyper-parameters,
// patch geometry, action space — is written by vision/nets (see
// docs/families.md); the keys below are the ones every file carries and
// the training record that the training commands add beside it.
// docs/weights-format.md describes each.
const (
	// KeyFormat holds the version of tilebench's policy-file layout, "1".
	KeyFormat = "format"
	// KeyFamily names the policy family ("attention", "posattention",
	// "mlp", "meanpool").
	KeyFamily = "family"
	// KeyGame names the game the policy was trained on ("drive", "paddle").
	KeyGame = "game"
	// KeyMethod names how the weights were made ("bc", "es", "cmaes";
	// "init" for untrained weights).
	KeyMethod = "train_method"
	// KeySeed is the training seed, decimal.
	KeySeed = "train_seed"
	// KeyHeldOutScore is the mean return on held-out seeds, decimal;
	// KeyHeldOutEpisodes the number of episodes it averages.
	KeyHeldOutScore    = "heldout_score"
	KeyHeldOutEpisodes = "heldout_episodes"
)

// FormatVersion is the value of KeyFormat for the layout described in
// docs/weights-format.md.
const FormatVersion = "1"
