package study

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"regexp"
	"strconv"
	"strings"

	"github.com/BurntSushi/toml"

	"tilebench/vision/policies"
)

// Definition is a study as a user writes it, in a TOML file (see
// examples/study.toml and docs/studies.md) or through the flags of
// "tilebench stress" and "tilebench sizes". The zero value, after
// Normalize, is a valid study: the driving game's scripted expert on 30
// held-out circuits with no transform.
type Definition struct {
	// Name labels the study in reports. Default "study".
	Name string `toml:"name" json:"name"`
	// Kind is "stress" (default) or "sizes" (the patch-size trade-off:
	// adds the cost table, the Pareto front and the recommendation).
	Kind string `toml:"kind" json:"kind"`
	// Game is the built-in game, "drive" (default) or "paddle".
	Game string `toml:"game" json:"game"`
	// Variation is the game variation the policy is scored on when clean
	// ("" is the game's default).
	Variation string `toml:"variation" json:"variation"`
	// Seed is the study seed every episode's seeds derive from. Default 0.
	Seed uint64 `toml:"seed" json:"seed"`
	// Episodes is the number of episodes per cell. Default 30.
	Episodes int `toml:"episodes" json:"episodes"`
	// Seeds is the range game seeds are drawn from: "sealed" (default:
	// the sealed test range of held-out seeds, games.Sealed), "dev" (the
	// development range, games.Dev, where experts and defaults were
	// designed), "held-out" (both), "train", or "START:COUNT"
	// (COUNT ≥ Episodes).
	Seeds string `toml:"seeds" json:"seeds"`
	// Workers is the number of parallel workers; 0 means one per core.
	// It never changes results and is not part of the study's identity.
	// At most vision.MaxWorkers() unless ForceWorkers is set.
	Workers int `toml:"workers" json:"-"`
	// ForceWorkers accepts a Workers count above vision.MaxWorkers().
	ForceWorkers bool `toml:"force_workers" json:"-"`
	// Policy says what plays; with Policies it keeps the options every
	// listed policy shares (family, timeouts, obs, dtype, clamp) and its
	// Source stays empty.
	Policy PolicyDef `toml:"policy" json:"policy"`
	// Policies, when set, are several policies compared in one study
	// (TOML [[policies]] tables with label and source, or --policy
	// LABEL=SOURCE repeated): the policy is one more axis, every policy
	// plays the same seeds in every condition, and the report compares
	// them. Default: the one policy of Policy.Source.
	Policies []policies.Labelled `toml:"policies" json:"policies,omitempty"`
	// Floor is the baseline policy whose score is 0 on the normalised
	// scale, played clean on the study's own seeds: "idle" (default: the
	// zero action, or the discrete choice "stay"), "random" (uniform
	// actions), or any policy source.
	Floor string `toml:"floor" json:"floor,omitempty"`
	// Patch lists the patch sizes (square, in pixels). Default 8.
	Patch Axis `toml:"patch" json:"patch"`
	// Axes are the transforms swept; every combination is a cell.
	Axes Axes `toml:"axes" json:"axes"`
	// Stats configures the statistics.
	Stats StatsDef `toml:"stats" json:"stats"`
	// Budget limits the recommendation of a sizes study.
	Budget BudgetDef `toml:"budget" json:"budget"`
	// Strips lists the steps at which the frames the policy saw are kept
	// for the report (episode 0 of every cell). Default 0, 50, 100, 200, 400.
	Strips []int `toml:"strips" json:"strips"`
	// Overlay, when set, draws the policy's attention on the strips:
	// "attention", "top:K" or "attention+top:K" (vision/overlay). It is a
	// picture option: the study's fingerprint does not include it.
	Overlay string `toml:"overlay" json:"-"`
}

// PolicyDef names the policy of a study.
type PolicyDef struct {
	// Source is a policy source in the grammar of vision/policies:
	// "expert" (default: the game's scripted expert, which reads the game
	// state, not pixels), "fresh" (an untrained network of Family), a
	// family name, a weights file, "exec:COMMAND ARGS" or
	// "tcp://HOST:PORT" (an external policy process); the text "{patch}"
	// is replaced by each patch size.
	Source string `toml:"source" json:"source"`
	// Family is the network family for "fresh" policies and for training
	// in a sizes study. Default "attention".
	Family string `toml:"family" json:"family"`
	// Timeout is the per-step timeout of an external policy, as a Go
	// duration ("5s"). "" means the protocol's default.
	Timeout string `toml:"timeout" json:"timeout,omitempty"`
	// StartTimeout bounds starting an external policy and its handshake,
	// as a Go duration. "" means the protocol's default (30s).
	StartTimeout string `toml:"start_timeout" json:"start_timeout,omitempty"`
	// Obs is what an external policy is sent: "frame" (default) or
	// "tokens" (docs/policy-protocol.md).
	Obs string `toml:"obs" json:"obs,omitempty"`
	// Dtype is how an external policy's observation values are sent:
	// "uint8" (default) or "float32".
	Dtype string `toml:"dtype" json:"dtype,omitempty"`
	// Clamp clips an external policy's out-of-bounds continuous actions
	// instead of failing the episode. Default false.
	Clamp bool `toml:"clamp" json:"clamp,omitempty"`
}

// Axes are the transforms a study sweeps. Each is a list in the range
// syntax of ExpandList (a TOML string "random:0:0.9:0.1,block:0.3", or a
// TOML array of such strings or of numbers); an axis left out holds only
// its identity value.
type Axes struct {
	// Occlude lists occlusions: none, random:R, block:R, bands:R,
	// sweep:R, mask:FILE.png. Default none.
	Occlude Axis `toml:"occlude" json:"occlude"`
	// Fill is what occluded tokens become: black (default), mean, noise
	// or drop. One value for the whole study.
	Fill string `toml:"fill" json:"fill"`
	// Scramble lists scrambles: none, full, partial:F, local:K. Default none.
	Scramble Axis `toml:"scramble" json:"scramble"`
	// Every lists scramble schedules: 0 = one permutation per episode,
	// T = a new one every T steps. Default 0.
	Every Axis `toml:"every" json:"every"`
	// NoiseTokens lists counts of added noise tokens. Default 0.
	NoiseTokens Axis `toml:"noise_tokens" json:"noise_tokens"`
	// Brightness lists brightness offsets. Default 0.
	Brightness Axis `toml:"brightness" json:"brightness"`
	// Contrast lists contrast factors. Default 1.
	Contrast Axis `toml:"contrast" json:"contrast"`
	// PixelNoise lists standard deviations of Gaussian pixel noise. Default 0.
	PixelNoise Axis `toml:"pixel_noise" json:"pixel_noise"`
	// Corrupt lists frame corruptions (patch.Spec.Corrupt): none,
	// KIND:VALUE, KIND:sN (a severity 1..5), the ranges KIND:sA:sB and
	// KIND:START:STOP:STEP, and several corruptions of one cell joined
	// with '+' (blur:1+jpeg:40); see patch.ExpandCorrupt. Default none.
	Corrupt Axis `toml:"corrupt" json:"corrupt,omitempty"`
	// Variations lists game variations (held-out palettes, ...). Default:
	// the study's Variation only. Use "default" for the game's default.
	Variations Axis `toml:"variations" json:"variations"`
}

// StatsDef configures the per-cell statistics.
type StatsDef struct {
	// Resamples is the number of bootstrap resamples. Default 2000.
	Resamples int `toml:"resamples" json:"resamples"`
	// Confidence is the interval's coverage. Default 0.95.
	Confidence float64 `toml:"confidence" json:"confidence"`
	// Threshold is the normalised retention below which an axis counts
	// as broken. Default 0.5.
	Threshold float64 `toml:"threshold" json:"threshold"`
	// Margin is the non-inferiority margin of a sizes study's
	// recommendation, on the normalised scale (0 the floor policy, 1 the
	// reference). 0 means choose.DefaultMargin, 0.05.
	Margin float64 `toml:"margin" json:"margin,omitempty"`
}

// BudgetDef is the compute budget of a sizes study; zero fields are no limit.
type BudgetDef struct {
	// Microseconds is the largest measured latency per step.
	Microseconds float64 `toml:"us" json:"us,omitempty"`
	// MFLOP is the largest cost per step in millions of floating-point
	// operations (the cost model's count).
	MFLOP float64 `toml:"mflop" json:"mflop,omitempty"`
}

// Axis is one list of values in the range syntax (see ExpandList), kept
// as the items the user wrote.
type Axis []string

// UnmarshalTOML accepts a string (a comma list), a number, or an array of
// strings and numbers.
func (a *Axis) UnmarshalTOML(v any) error {
	var items []string
	add := func(x any) error {
		switch x := x.(type) {
		case string:
			items = append(items, x)
		case int64:
			items = append(items, strconv.FormatInt(x, 10))
		case float64:
			items = append(items, strconv.FormatFloat(x, 'f', -1, 64))
		default:
			return fmt.Errorf("want a string or a number, got %T", x)
		}
		return nil
	}
	switch v := v.(type) {
	case []any:
		for _, x := range v {
			if err := add(x); err != nil {
				return err
			}
		}
		if len(v) == 0 {
			return errors.New("empty list: give at least one value")
		}
	default:
		if err := add(v); err != nil {
			return err
		}
	}
	*a = items
	return nil
}

// ParseAxis reads a flag value in the range syntax into an Axis.
func ParseAxis(s string) Axis {
	if strings.TrimSpace(s) == "" {
		return nil
	}
	return Axis{s}
}

// Values expands the axis, or returns def if the axis is empty.
func (a Axis) Values(def string) ([]string, error) {
	if len(a) == 0 {
		return []string{def}, nil
	}
	var out []string
	for _, item := range a {
		vals, err := ExpandList(item)
		if err != nil {
			return nil, err
		}
		out = append(out, vals...)
		if len(out) > maxRangeValues {
			return nil, fmt.Errorf("more than %d values", maxRangeValues)
		}
	}
	return out, nil
}

// LoadFile reads a study definition from a TOML file.
func LoadFile(path string) (*Definition, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read study: %w", err)
	}
	d, err := Parse(data)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return d, nil
}

// Parse reads a study definition from TOML. Unknown keys are errors that
// name the key and its line; so are values that do not parse. The result
// is normalized and checked (see Normalize).
func Parse(data []byte) (*Definition, error) {
	var d Definition
	md, err := toml.NewDecoder(bytes.NewReader(data)).Decode(&d)
	if err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			msg := strings.ReplaceAll(pe.Message, "\n", " ")
			if pe.LastKey != "" {
				return nil, fmt.Errorf("line %d: key %q: %s", pe.Position.Line, pe.LastKey, msg)
			}
			return nil, fmt.Errorf("line %d: %s", pe.Position.Line, msg)
		}
		return nil, fmt.Errorf("study file: %s", strings.ReplaceAll(err.Error(), "\n", " "))
	}
	if und := md.Undecoded(); len(und) > 0 {
		k := und[0]
		return nil, fmt.Errorf("line %d: unknown key %q", keyLine(data, k), k.String())
	}
	if err := explicitValues(data, md, &d); err != nil {
		return nil, err
	}
	if err := d.Normalize(); err != nil {
		var fe *FieldError
		if errors.As(err, &fe) {
			if line := keyLine(data, strings.Split(fe.Key, ".")); line > 0 {
				return nil, fmt.Errorf("line %d: key %q: %w", line, fe.Key, fe.Err)
			}
		}
		return nil, err
	}
	return &d, nil
}

// FieldError is a bad value in a study definition, with the key it was
// given under (dotted, as in TOML: "axes.occlude").
type FieldError struct {
	Key string
	Err error
}

// Error is "key: problem".
func (e *FieldError) Error() string { return fmt.Sprintf("%s: %v", e.Key, e.Err) }

// Unwrap returns the problem.
func (e *FieldError) Unwrap() error { return e.Err }

func fieldErr(key string, err error) error { return &FieldError{Key: key, Err: err} }

var tableRE = regexp.MustCompile(`^\s*\[\s*([A-Za-z0-9_.\-" ]+?)\s*\]`)

// keyLine finds the line (from 1) where key is set: a "name =" line inside
// the table that holds it, or the table header for a table key. It
// returns 0 if it cannot tell.
func keyLine(data []byte, key []string) int {
	if len(key) == 0 {
		return 0
	}
	table := strings.Join(key[:len(key)-1], ".")
	last := key[len(key)-1]
	full := strings.Join(key, ".")
	current := ""
	lines := strings.Split(string(data), "\n")
	for i, ln := range lines {
		if m := tableRE.FindStringSubmatch(ln); m != nil {
			current = strings.ReplaceAll(strings.ReplaceAll(m[1], `"`, ""), " ", "")
			if current == full {
				return i + 1
			}
			continue
		}
		t := strings.TrimSpace(ln)
		name, _, ok := strings.Cut(t, "=")
		if !ok {
			continue
		}
		name = strings.Trim(strings.TrimSpace(name), `"`)
		if current == table && name == last {
			return i + 1
		}
		if current == "" && name == full {
			return i + 1
		}
	}
	return 0
}
