package study

import (
	"fmt"

	"github.com/BurntSushi/toml"
)

// explicitValues refuses values that a study file states but that the
// decoded struct cannot tell from "left out": a key set to 0 where 0
// stands for the default (episodes, stats.resamples, stats.confidence,
// stats.threshold), and a negative seed (TOML integers are signed; the
// seed is not). Leaving the key out still gives the default.
func explicitValues(data []byte, md toml.MetaData, d *Definition) error {
	zeros := []struct {
		key  []string
		zero bool
		want string
	}{
		{[]string{"episodes"}, d.Episodes == 0, "want 1..1000000 (leave the key out for the default 30)"},
		{[]string{"stats", "resamples"}, d.Stats.Resamples == 0, "want 100..1000000 (leave the key out for the default 2000)"},
		{[]string{"stats", "confidence"}, d.Stats.Confidence == 0, "want a number between 0 and 1 (leave the key out for the default 0.95)"},
		{[]string{"stats", "threshold"}, d.Stats.Threshold == 0, "want a number in (0, 1] (leave the key out for the default 0.5)"},
	}
	for _, z := range zeros {
		if z.zero && md.IsDefined(z.key...) {
			return keyErr(data, z.key, fmt.Errorf("0: %s", z.want))
		}
	}
	if md.IsDefined("seed") {
		var raw struct {
			Seed any `toml:"seed"`
		}
		if _, err := toml.Decode(string(data), &raw); err == nil {
			if v, ok := raw.Seed.(int64); ok && v < 0 {
				return keyErr(data, []string{"seed"}, fmt.Errorf("%d: want 0 or more", v))
			}
		}
	}
	return nil
}

// keyErr is a FieldError for key, prefixed with the key's line when it
// can be found, as Parse reports every bad value.
func keyErr(data []byte, key []string, err error) error {
	fe := &FieldError{Key: joinKey(key), Err: err}
	if line := keyLine(data, key); line > 0 {
		return fmt.Errorf("line %d: key %q: %w", line, fe.Key, fe.Err)
	}
	return fe
}

func joinKey(key []string) string {
	s := ""
	for i, k := range key {
		if i > 0 {
			s += "."
		}
		s += k
	}
	return s
}
