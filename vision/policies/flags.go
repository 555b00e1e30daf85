package policies

import (
	"flag"
	"fmt"
	"strings"
	"time"

	"tilebench/vision/nets"
	"tilebench/vision/remote"
)

// Flags are the --policy and --policy-* options, as every command that
// takes --policy declares them (AddFlags).
type Flags struct {
	// Source is --policy.
	Source string
	// InitSeed is --init-seed (when declared).
	InitSeed uint64
	// Timeout and StartTimeout are --policy-timeout and
	// --policy-start-timeout as typed ("" when not given), so that a study
	// records them in the user's spelling.
	Timeout, StartTimeout DurationText
	// Obs, Dtype, Clamp and LogDir are --policy-obs, --policy-dtype,
	// --policy-clamp and --policy-log.
	Obs, Dtype string
	Clamp      bool
	LogDir     string

	fs     *flag.FlagSet
	values []string // every --policy value, when FlagConfig.Multi
}

// FlagConfig says how a command declares the policy flags.
type FlagConfig struct {
	// Default is --policy's default ("" for none).
	Default string
	// Usage replaces --policy's standard description when set.
	Usage string
	// InitSeed declares --init-seed (commands whose untrained networks
	// take their seed from the user rather than from a study).
	InitSeed bool
	// Multi lets --policy be given several times, as LABEL=SOURCE (a
	// study comparing policies); read them with List.
	Multi bool
}

// SourceHelp is the standard description of --policy.
var SourceHelp = "policy: expert (the game's scripted expert, reads the game state), fresh (an untrained network), a family (" +
	strings.Join(nets.Families, ", ") + "), a weights FILE.safetensors ({patch} becomes the patch size), " +
	"exec:COMMAND ARGS or tcp://HOST:PORT (an external policy, docs/policy-protocol.md)"

// AddFlags declares --policy, --policy-timeout, --policy-start-timeout,
// --policy-obs, --policy-dtype, --policy-clamp, --policy-log and, if
// asked, --init-seed on fs.
func AddFlags(fs *flag.FlagSet, cfg FlagConfig) *Flags {
	f := &Flags{fs: fs}
	usage := cfg.Usage
	if usage == "" {
		usage = SourceHelp
	}
	if cfg.Multi {
		f.Source = cfg.Default
		fs.Var(listFlag{values: &f.values, last: &f.Source}, "policy", usage+"; repeat as --policy LABEL=SOURCE to compare several policies on the same seeds (e.g. --policy clean=a.safetensors --policy occl=b.safetensors)")
	} else {
		fs.StringVar(&f.Source, "policy", cfg.Default, usage+" (e.g. --policy 'exec:python3 examples/policy_stdlib.py')")
	}
	fs.Var(&f.Timeout, "policy-timeout", "external policy: longest wait (a `DURATION`) for one step's reply (default 5s) (e.g. --policy-timeout 10s)")
	fs.Var(&f.StartTimeout, "policy-start-timeout", "external policy: longest wait (a `DURATION`) to start or connect and finish the handshake (default 30s) (e.g. --policy-start-timeout 2m)")
	fs.StringVar(&f.Obs, "policy-obs", remote.ObsFrame, "external policy: what it is sent, frame (reassembled frame) or tokens (token set with grid cells) (e.g. --policy-obs tokens)")
	fs.StringVar(&f.Dtype, "policy-dtype", remote.Uint8, "external policy: observation values as uint8 (0..255) or float32 (0..1) (e.g. --policy-dtype float32)")
	fs.BoolVar(&f.Clamp, "policy-clamp", false, "external policy: clamp out-of-bounds continuous actions instead of failing (e.g. --policy-clamp)")
	fs.StringVar(&f.LogDir, "policy-log", "", "external policy: keep the child's stderr in this folder (e.g. --policy-log logs/)")
	if cfg.InitSeed {
		fs.Uint64Var(&f.InitSeed, "init-seed", 1, "parameter seed of an untrained network (fresh or a family name) (e.g. --init-seed 7)")
	}
	return f
}

// Options returns the --policy-* flags as Options, checked; errors name
// the flag and are *SourceError values. The source is checked by Open.
func (f *Flags) Options() (Options, error) {
	o := Options{Timeout: f.Timeout.D, StartTimeout: f.StartTimeout.D, Obs: f.Obs, Dtype: f.Dtype,
		Clamp: f.Clamp, LogDir: f.LogDir, InitSeed: f.InitSeed}
	switch {
	case f.Timeout.Text != "" && o.Timeout <= 0:
		return o, sourceErr("--policy-timeout %v: want a positive duration", f.Timeout.Text)
	case f.StartTimeout.Text != "" && o.StartTimeout <= 0:
		return o, sourceErr("--policy-start-timeout %v: want a positive duration", f.StartTimeout.Text)
	case o.Obs != remote.ObsFrame && o.Obs != remote.ObsTokens:
		return o, sourceErr("--policy-obs %q: want %s or %s", o.Obs, remote.ObsFrame, remote.ObsTokens)
	case o.Dtype != remote.Uint8 && o.Dtype != remote.Float32:
		return o, sourceErr("--policy-dtype %q: want %s or %s", o.Dtype, remote.Uint8, remote.Float32)
	}
	return o, nil
}

// Given reports whether the flag name was set on the command line.
func (f *Flags) Given(name string) bool {
	given := false
	f.fs.Visit(func(fl *flag.Flag) { given = given || fl.Name == name })
	return given
}

// DurationText is a duration flag that keeps the text the user typed.
type DurationText struct {
	D    time.Duration
	Text string
}

// String returns the text as typed.
func (d *DurationText) String() string { return d.Text }

// Set parses a Go duration ("5s", "1m30s").
func (d *DurationText) Set(s string) error {
	v, err := time.ParseDuration(s)
	if err != nil {
		return fmt.Errorf("want a duration such as 5s")
	}
	d.D, d.Text = v, s
	return nil
}
