package main

import (
	"flag"
	"fmt"
	"os"
	"slices"
	"strings"

	"tilebench/patch"
	"tilebench/vision/study"
)

// The transform options, declared the same way by every command that
// transforms what a policy sees (export, play, train, verify, stress,
// sizes). A command that plays one pipeline takes one value per option
// and fills a patch.Spec; a study (sweep) takes a list in the range syntax
// and fills study.Axes. To add an option: one line in transformOptions
// (and, for a sweep, a study.Axes field).
type transformOption struct {
	name, help string
	// example is the value shown in the help, after "e.g.".
	example string
	// spec points at the option's field of a Spec (string, int, float64
	// or bool); nil for options with their own parsing (shift).
	spec func(*patch.Spec) any
	// axis points at the study's list for the option; nil when a study
	// cannot sweep it. fill is a single value in a study too.
	axis func(*study.Axes) any
	// sweepHelp, if set, replaces help in a study.
	sweepHelp string
}

var transformOptions = []transformOption{
	{"scramble", "token order: none, full, partial:F or local:K", "partial:0.5",
		func(s *patch.Spec) any { return &s.Scramble }, func(a *study.Axes) any { return &a.Scramble }, ""},
	{"every", "draw a new permutation every T frames (steps); 0 draws one for the whole sequence (episode)", "10",
		func(s *patch.Spec) any { return &s.Every }, func(a *study.Axes) any { return &a.Every }, ""},
	{"rotate", "also turn each patch by a random multiple of 90° (square patches)", "",
		func(s *patch.Spec) any { return &s.Rotate }, nil, ""},
	{"flip", "also mirror each patch at random", "",
		func(s *patch.Spec) any { return &s.Flip }, nil, ""},
	{"occlude", "hide tokens: none, random:R, block:R, bands:R, sweep:R or mask:FILE.png", "block:0.3",
		func(s *patch.Spec) any { return &s.Occlude }, func(a *study.Axes) any { return &a.Occlude }, ""},
	{"fill", "what an occluded token becomes: black, mean, noise or drop", "noise",
		func(s *patch.Spec) any { return &s.Fill }, func(a *study.Axes) any { return &a.Fill }, ""},
	{"noise-tokens", "add K tokens of uniform noise (not drawn in frames)", "4",
		func(s *patch.Spec) any { return &s.NoiseTokens }, func(a *study.Axes) any { return &a.NoiseTokens }, ""},
	{"duplicates", "add K copies of random tokens", "2",
		func(s *patch.Spec) any { return &s.Duplicates }, nil, ""},
	{"brightness", "add this to every value, in [-1,1]", "0.1",
		func(s *patch.Spec) any { return &s.Brightness }, func(a *study.Axes) any { return &a.Brightness }, ""},
	{"contrast", "scale values about 0.5 by this factor", "1.5",
		func(s *patch.Spec) any { return &s.Contrast }, func(a *study.Axes) any { return &a.Contrast }, ""},
	{"shift", "per-channel shift R,G,B, each in [-1,1]", "0.1,0,-0.1", nil, nil, ""},
	{"pixel-noise", "standard deviation of Gaussian noise added to every value", "0.05",
		func(s *patch.Spec) any { return &s.PixelNoise }, func(a *study.Axes) any { return &a.PixelNoise }, ""},
	{"corrupt", corruptFlagHelp, "",
		func(s *patch.Spec) any { return &s.Corrupt }, func(a *study.Axes) any { return &a.Corrupt },
		"frame corruptions (docs/studies.md), a comma between cells, each none, KIND:VALUE, KIND:sN, KIND:sA:sB, KIND:START:STOP:STEP or a chain in one cell joined by + (as in play and export)"},
}

// transformFlags holds the parsed transform options of one command.
type transformFlags struct {
	fs    *flag.FlagSet
	sweep bool
	spec  patch.Spec
	shift string
	lists map[string]*string
	skip  []string
}

// addTransformFlags declares the transform options on fs but those in
// skip (names a command already uses for something else). def holds the
// defaults shown and used (Contrast 1 means unchanged; 0 is taken as 1).
func addTransformFlags(fs *flag.FlagSet, def patch.Spec, skip ...string) *transformFlags {
	t := &transformFlags{fs: fs, spec: def, skip: skip}
	if t.spec.Contrast == 0 {
		t.spec.Contrast = 1
	}
	for _, o := range transformOptions {
		if slices.Contains(skip, o.name) {
			continue
		}
		help := o.help
		switch {
		case strings.Contains(help, "(e.g."):
		case o.example != "":
			help += fmt.Sprintf(" (e.g. --%s %s)", o.name, o.example)
		default:
			help += fmt.Sprintf(" (e.g. --%s)", o.name)
		}
		if o.spec == nil {
			fs.StringVar(&t.shift, o.name, "", help)
			continue
		}
		switch p := o.spec(&t.spec).(type) {
		case *string:
			fs.StringVar(p, o.name, *p, help)
		case *int:
			fs.IntVar(p, o.name, *p, help)
		case *float64:
			fs.Float64Var(p, o.name, *p, help)
		case *bool:
			fs.BoolVar(p, o.name, *p, help)
		default:
			panic("transform option " + o.name + ": unsupported field type")
		}
	}
	return t
}

// addSweepFlags declares the transform options a study sweeps, each a
// list in the range syntax (docs/studies.md).
func addSweepFlags(fs *flag.FlagSet) *transformFlags {
	t := &transformFlags{fs: fs, sweep: true, lists: map[string]*string{}}
	for _, o := range transformOptions {
		if o.axis == nil {
			continue
		}
		help := o.help
		if o.sweepHelp != "" {
			help = o.sweepHelp
		}
		if _, list := o.axis(&study.Axes{}).(*study.Axis); list {
			help = "a `LIST` in the range syntax, each value: " + help + "; e.g. " + sweepExample(o)
		}
		t.lists[o.name] = fs.String(o.name, "", help)
	}
	return t
}

func sweepExample(o transformOption) string {
	switch o.name {
	case "occlude":
		return "random:0:0.9:0.1,block:0.3"
	case "scramble":
		return "none,full"
	case "every":
		return "0,10,100"
	case "noise-tokens":
		return "0,16,64"
	case "brightness":
		return "-0.2,0,0.2"
	case "contrast":
		return "0.5,1"
	case "pixel-noise":
		return "0:0.2:0.05"
	case "corrupt":
		return "blur:s1:s5,jpeg:40,blur:s2+jpeg:40"
	}
	return o.example
}

// names are the declared options.
func (t *transformFlags) names() []string {
	var out []string
	for _, o := range transformOptions {
		if slices.Contains(t.skip, o.name) {
			continue
		}
		if !t.sweep || o.axis != nil {
			out = append(out, o.name)
		}
	}
	return out
}

// Spec returns the pipeline the options describe, checked. A mask file
// that cannot be read is reported now.
func (t *transformFlags) Spec() (patch.Spec, error) {
	s := t.spec
	if s.Contrast == 1 {
		s.Contrast = 0 // the Spec's spelling of "unchanged"
	}
	if err := (patch.Spec{Corrupt: s.Corrupt}).Check(); err != nil {
		return s, usagef("--corrupt: %v", err)
	}
	if t.shift != "" {
		var err error
		if s.Shift, err = patch.ParseShift(t.shift); err != nil {
			return s, usagef("--shift: %v", err)
		}
	}
	if err := s.Check(); err != nil {
		return s, usagef("%v", err)
	}
	if m, ok := strings.CutPrefix(s.Occlude, "mask:"); ok {
		if _, err := os.Stat(m); err != nil {
			return s, fmt.Errorf("occlude mask %s: %v", m, err)
		}
	}
	return s, nil
}

// apply writes the study options given (or all, when useAll) into d's axes.
func (t *transformFlags) apply(ax *study.Axes, useAll bool) {
	set := setFlags(t.fs)
	for _, o := range transformOptions {
		if o.axis == nil {
			continue
		}
		v := *t.lists[o.name]
		switch p := o.axis(ax).(type) {
		case *study.Axis:
			if set[o.name] || (useAll && v != "") {
				*p = study.ParseAxis(v)
			}
		case *string:
			if set[o.name] || useAll {
				*p = v
			}
		}
	}
}

// setFlags is the set of flags given on the command line.
func setFlags(fs *flag.FlagSet) map[string]bool {
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	return set
}
