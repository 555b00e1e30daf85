package main

import (
	"flag"
	"io"
	"strings"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/remote"
)

// externalOptions are the --policy-* flags that configure an external
// policy (--policy exec:... or tcp://...); see docs/policy-protocol.md.
type externalOptions struct {
	timeout time.Duration
	start   time.Duration
	obs     string
	dtype   string
	clamp   bool
	logDir  string
}

// addExternalFlags registers the --policy-* flags on fs.
func addExternalFlags(fs *flag.FlagSet) *externalOptions {
	o := &externalOptions{}
	fs.DurationVar(&o.timeout, "policy-timeout", 5*time.Second, "external policy: longest wait for one step's reply (e.g. --policy-timeout 10s)")
	fs.DurationVar(&o.start, "policy-start-timeout", 30*time.Second, "external policy: longest wait for it to start and answer the handshake (e.g. --policy-start-timeout 2m)")
	fs.StringVar(&o.obs, "policy-obs", remote.ObsFrame, "external policy: what it is sent, frame (reassembled frame) or tokens (token set with grid cells) (e.g. --policy-obs tokens)")
	fs.StringVar(&o.dtype, "policy-dtype", remote.Uint8, "external policy: observation values as uint8 (0..255) or float32 (0..1) (e.g. --policy-dtype float32)")
	fs.BoolVar(&o.clamp, "policy-clamp", false, "external policy: clamp out-of-bounds continuous actions instead of failing (e.g. --policy-clamp)")
	fs.StringVar(&o.logDir, "policy-log", "", "external policy: keep the child's stderr in this folder (e.g. --policy-log logs/)")
	return o
}

// isExternal reports whether a --policy value names an external policy.
func isExternal(name string) bool { return remote.IsTarget(name) }

// openExternal starts or connects to the external policy named by target
// (exec:COMMAND... or tcp://HOST:PORT) for game g cut on grid. o may be
// nil for the defaults. Spelling errors of the target are usage errors.
func openExternal(target string, g games.Game, grid *patch.Grid, o *externalOptions) (vision.Policy, error) {
	if o == nil {
		o = &externalOptions{timeout: 5 * time.Second, start: 30 * time.Second, obs: remote.ObsFrame, dtype: remote.Uint8}
	}
	switch {
	case o.timeout <= 0:
		return nil, usagef("--policy-timeout %v: want a positive duration", o.timeout)
	case o.start <= 0:
		return nil, usagef("--policy-start-timeout %v: want a positive duration", o.start)
	case o.obs != remote.ObsFrame && o.obs != remote.ObsTokens:
		return nil, usagef("--policy-obs %q: want %s or %s", o.obs, remote.ObsFrame, remote.ObsTokens)
	case o.dtype != remote.Uint8 && o.dtype != remote.Float32:
		return nil, usagef("--policy-dtype %q: want %s or %s", o.dtype, remote.Uint8, remote.Float32)
	}
	check := remote.ParseExec
	if strings.HasPrefix(target, "tcp://") {
		check = func(t string) ([]string, error) { _, err := remote.ParseTCP(t); return nil, err }
	}
	if _, err := check(target); err != nil {
		return nil, usageError{err}
	}
	p, err := remote.Open(target, remote.Config{
		Game: g.Spec(), Grid: grid, Obs: o.obs, Dtype: o.dtype,
		StepTimeout: o.timeout, HandshakeTimeout: o.start, Clamp: o.clamp, LogDir: o.logDir,
	})
	if err != nil {
		return nil, err
	}
	return p, nil
}

// closePolicy ends a policy that holds a process or connection (an
// external policy); for the others it does nothing. Close returns only a
// fault that the step which met it has already reported.
func closePolicy(pol vision.Policy) {
	if c, ok := pol.(io.Closer); ok {
		c.Close()
	}
}
