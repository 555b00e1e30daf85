// Package policies turns a policy source, the text a user gives to
// --policy or writes in a study file, into a vision.Policy. One grammar
// serves every command:
//
//	expert           the game's scripted expert (reads the game state)
//	idle, random     the baselines: doing nothing, uniform random actions
//	fresh            an untrained network of Options.Family
//	FAMILY           an untrained network of that family (attention, ...)
//	FILE             a weights file (.safetensors, written by tilebench train)
//	exec:COMMAND...  a process of the user's speaking docs/policy-protocol.md
//	tcp://HOST:PORT  a server speaking the same protocol
//
// In a FILE, exec: or tcp:// source the text "{patch}" is replaced by the
// patch size of the grid the policy sees, so that one source names a
// policy per patch size. A weights file must fit the game's frame size,
// the grid and the action space (CheckGeometry); a single file (not a
// template) also fixes the patch size when none is given (GridFor).
//
// To add a source kind (a baseline policy, say), add a word or prefix to
// Kind, a case to Cache.Open, and a row to the tables in
// docs/policies.md, whose every cell a test of cmd/tilebench runs. A
// labelled list of policies (--policy label=SOURCE, repeated) belongs in
// Flags: each entry is still one source of this grammar.
package policies

import (
	"errors"
	"fmt"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/remote"
)

// Source words.
const (
	// Expert is the game's scripted expert.
	Expert = "expert"
	// Fresh is an untrained network of Options.Family.
	Fresh = "fresh"
	// Placeholder is replaced by the patch size in a template source.
	Placeholder = "{patch}"
)

// Kinds of source, as Kind returns them.
const (
	KindExpert   = "expert"
	KindFresh    = "fresh"
	KindFamily   = "family"
	KindFile     = "file"
	KindExternal = "external"
)

// Options configure Open. The zero value opens every source with the
// protocol's defaults.
type Options struct {
	// Family is the network family of a "fresh" source. Default attention.
	Family string
	// InitSeed seeds the parameters of an untrained network (fresh or
	// FAMILY). Default 0.
	InitSeed uint64
	// Timeout bounds each step's round trip with an external policy.
	// Default (0) the protocol's, 5 s.
	Timeout time.Duration
	// StartTimeout bounds starting or connecting to an external policy and
	// its handshake. Default (0) the protocol's, 30 s.
	StartTimeout time.Duration
	// Obs is what an external policy is sent: remote.ObsFrame (default)
	// or remote.ObsTokens.
	Obs string
	// Dtype is how observation values are sent: remote.Uint8 (default)
	// or remote.Float32.
	Dtype string
	// Clamp clips an external policy's out-of-bounds continuous actions
	// instead of failing. Default false.
	Clamp bool
	// LogDir, if set, keeps an external policy's stderr there (created if
	// missing). Default: not kept.
	LogDir string
}

// SourceError is a source or an option that cannot be right whatever the
// files and processes hold: a misspelt source, an unknown family, a bad
// option value. Commands report it as a usage error.
type SourceError struct{ Err error }

// Error returns the problem.
func (e *SourceError) Error() string { return e.Err.Error() }

// Unwrap returns the problem.
func (e *SourceError) Unwrap() error { return e.Err }

func notSource(s string) error {
	return sourceErr("policy %q: not expert, idle, random, fresh, a family (%s), exec: or tcp://, and not a readable file", s, strings.Join(nets.Families, ", "))
}

func sourceErr(format string, a ...any) error { return &SourceError{fmt.Errorf(format, a...)} }

// isFamily reports whether s names a network family.
func isFamily(s string) bool { return slices.Contains(nets.Families, s) }

// Kind classifies a source: KindExpert, KindFresh, KindFamily,
// KindExternal or KindFile (anything else is taken as a file name).
func Kind(source string) string {
	switch {
	case source == Expert:
		return KindExpert
	case source == Fresh:
		return KindFresh
	case IsBaseline(source):
		return KindBaseline
	case isFamily(source):
		return KindFamily
	case remote.IsTarget(source):
		return KindExternal
	}
	return KindFile
}

// IsTemplate reports whether source holds the {patch} placeholder.
func IsTemplate(source string) bool { return strings.Contains(source, Placeholder) }

// ReadsPixels reports whether the policy a source names reads what the
// patch pipeline makes (every source but the scripted expert and the
// baselines).
func ReadsPixels(source string) bool {
	k := Kind(source)
	return k != KindExpert && k != KindBaseline
}

// Expand replaces {patch} in source by the patch size ps.
func Expand(source string, ps int) string {
	return strings.ReplaceAll(source, Placeholder, strconv.Itoa(ps))
}

// expandGrid replaces {patch} by the grid's patch size: N for a square
// patch, WxH otherwise.
func expandGrid(source string, grid *patch.Grid) string {
	if !IsTemplate(source) {
		return source
	}
	if grid.PatchW == grid.PatchH {
		return Expand(source, grid.PatchW)
	}
	return strings.ReplaceAll(source, Placeholder, fmt.Sprintf("%dx%d", grid.PatchW, grid.PatchH))
}

// Check reports a source that can be refused before anything is opened:
// an empty one, a malformed exec: or tcp:// target.
func Check(source string) error {
	switch Kind(source) {
	case KindExternal:
		var err error
		if strings.HasPrefix(source, "tcp://") {
			_, err = remote.ParseTCP(source)
		} else {
			_, err = remote.ParseExec(source)
		}
		if err != nil {
			return &SourceError{err}
		}
	case KindFile:
		if strings.TrimSpace(source) == "" {
			return sourceErr("no policy given: want expert, fresh, a family (%s), a weights FILE, exec:COMMAND or tcp://HOST:PORT", strings.Join(nets.Families, ", "))
		}
	}
	return nil
}

// Check reports an option value no source accepts.
func (o Options) Check() error {
	switch {
	case o.Timeout < 0:
		return sourceErr("policy timeout %v: want a positive duration", o.Timeout)
	case o.StartTimeout < 0:
		return sourceErr("policy start timeout %v: want a positive duration", o.StartTimeout)
	case o.Obs != "" && o.Obs != remote.ObsFrame && o.Obs != remote.ObsTokens:
		return sourceErr("policy observation %q: want %s or %s", o.Obs, remote.ObsFrame, remote.ObsTokens)
	case o.Dtype != "" && o.Dtype != remote.Uint8 && o.Dtype != remote.Float32:
		return sourceErr("policy dtype %q: want %s or %s", o.Dtype, remote.Uint8, remote.Float32)
	case o.Family != "" && !isFamily(o.Family):
		return sourceErr("family %q: want one of %s", o.Family, strings.Join(nets.Families, ", "))
	}
	return nil
}

// Open opens the policy source names for game g, whose frames are cut on
// grid. Close it with Close when done (it may hold a process).
func Open(source string, g games.Game, grid *patch.Grid, opt Options) (vision.Policy, error) {
	var c Cache
	return c.Open(source, g, grid, opt)
}

// Cache opens policies for many workers: each weights file is read and
// checked once and every caller gets its own copy. The zero value is
// ready; a Cache is safe for concurrent use.
type Cache struct {
	mu     sync.Mutex
	loaded map[string]nets.Net
}

// Open is the package-level Open, reading each weights file once.
func (c *Cache) Open(source string, g games.Game, grid *patch.Grid, opt Options) (vision.Policy, error) {
	if err := Check(source); err != nil {
		return nil, err
	}
	if err := opt.Check(); err != nil {
		return nil, err
	}
	if g == nil || grid == nil {
		return nil, errors.New("policies: Open needs a game and a grid")
	}
	sp := g.Spec()
	switch Kind(source) {
	case KindExpert:
		pol, ok := vision.NewExpertPolicy(g)
		if !ok {
			return nil, fmt.Errorf("game %s ships no scripted expert", sp.Name)
		}
		return pol, nil
	case KindBaseline:
		pol, _ := NewBaseline(source, sp)
		return pol, nil
	case KindFresh, KindFamily:
		fam := source
		if source == Fresh {
			fam = opt.Family
			if fam == "" {
				fam = nets.Attention
			}
		}
		n, err := nets.New(nets.Config{Family: fam}, grid, sp.Action, opt.InitSeed)
		if err != nil {
			return nil, &SourceError{err}
		}
		return n, nil
	case KindExternal:
		return openExternal(expandGrid(source, grid), g, grid, opt)
	}
	path := expandGrid(source, grid)
	n, err := c.load(path, sp, grid)
	if err != nil {
		return nil, err
	}
	return n.Clone(), nil
}

func (c *Cache) load(path string, sp games.Spec, grid *patch.Grid) (nets.Net, error) {
	c.mu.Lock()
	n, ok := c.loaded[path]
	c.mu.Unlock()
	if ok {
		return n, errors.Join(CheckGeometry(path, n, sp, grid), CheckGame(path, sp))
	}
	if _, err := os.Stat(path); err != nil && !strings.HasSuffix(path, ".safetensors") {
		return nil, notSource(path)
	}
	n, err := nets.Load(path)
	if err != nil {
		return nil, err
	}
	if err := errors.Join(CheckGeometry(path, n, sp, grid), CheckGame(path, sp)); err != nil {
		return nil, err
	}
	c.mu.Lock()
	if c.loaded == nil {
		c.loaded = map[string]nets.Net{}
	}
	c.loaded[path] = n
	c.mu.Unlock()
	return n, nil
}

func openExternal(target string, g games.Game, grid *patch.Grid, opt Options) (vision.Policy, error) {
	if opt.LogDir != "" {
		if err := os.MkdirAll(opt.LogDir, 0o755); err != nil {
			return nil, fmt.Errorf("policy log folder: %w", err)
		}
	}
	p, err := remote.Open(target, remote.Config{
		Game: g.Spec(), Grid: grid, Obs: opt.Obs, Dtype: opt.Dtype,
		StepTimeout: opt.Timeout, HandshakeTimeout: opt.StartTimeout, Clamp: opt.Clamp, LogDir: opt.LogDir,
	})
	if err != nil {
		return nil, err
	}
	return p, nil
}

// Close ends a policy that holds a process or a connection (an external
// policy); for the others it does nothing. Close returns only a fault
// that the step which met it has already reported, so callers may ignore
// its error.
func Close(pol vision.Policy) error {
	if c, ok := pol.(interface{ Close() error }); ok {
		return c.Close()
	}
	return nil
}
