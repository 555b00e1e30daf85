package train

import (
	"math"
	"strings"
	"testing"

	"tilebench/vision"
)

// Config.Validate refuses every out-of-range number before defaults are
// filled in; New calls it, so nothing is built (a NaN learning rate used
// to reach the JSON checkpoint and panic there; 20000 workers used 8 GB).
func TestConfigValidate(t *testing.T) {
	for _, c := range []struct {
		mod  func(*Config)
		want string
	}{
		{func(c *Config) { c.Clone.LR = math.NaN() }, "learning rate NaN"},
		{func(c *Config) { c.ES.LR = math.Inf(1) }, "es learning rate +Inf"},
		{func(c *Config) { c.Clone.LR = -1 }, "learning rate -1"},
		{func(c *Config) { c.Patience = -2 }, "patience -2"},
		{func(c *Config) { c.MinIters = -2 }, "min-iters -2"},
		{func(c *Config) { c.FitnessEpisodes = -1 }, "fitness episodes -1"},
		{func(c *Config) { c.ES.Pairs = 1 << 30 }, "es pairs"},
		{func(c *Config) { c.Workers = vision.MaxWorkers() + 1 }, "workers: at most"},
		{func(c *Config) { c.Net.Context = -1 }, "context -1"},
		{func(c *Config) { c.Clone.BetaDecay = 1 }, "beta decay 1"},
	} {
		cfg := Config{Game: "paddle"}
		c.mod(&cfg)
		if err := cfg.Validate(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v", c.want, err)
		}
		if _, err := New(cfg); err == nil {
			t.Errorf("%s: New accepted it", c.want)
		}
	}
	cfg := Config{Game: "paddle", Patience: -1, MinIters: -1, Workers: vision.MaxWorkers() + 1, ForceWorkers: true}
	if err := cfg.Validate(); err != nil {
		t.Fatalf("valid config: %v", err)
	}
}
