package nets

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/weights"
)

// Metadata returns the header entries that describe net: format, family,
// hyper-parameters, patch geometry and action space.
func Metadata(net Net) map[string]string {
	c := net.Config()
	g := net.Grid()
	s := net.Space()
	itoa := strconv.Itoa
	m := map[string]string{
		"format": "1", "family": c.Family,
		"key_size": itoa(c.KeySize), "key_hidden": itoa(c.KeyHidden), "value": c.Value,
		"value_size": itoa(c.ValueSize), "queries": itoa(c.Queries), "query_dim": itoa(c.QueryDim),
		"hidden": itoa(c.Hidden), "token_hidden": itoa(c.TokenHidden),
		"prev_action": strconv.FormatBool(c.PrevAction), "context": itoa(c.Context),
		"centre":      strconv.FormatBool(c.Centre),
		"frame_width": itoa(g.Width), "frame_height": itoa(g.Height), "channels": itoa(g.Channels),
		"patch_w": itoa(g.PatchW), "patch_h": itoa(g.PatchH), "stride_x": itoa(g.StrideX), "stride_y": itoa(g.StrideY),
		"edge": g.Edge.String(), "fill": strconv.FormatFloat(float64(g.Fill), 'g', -1, 32),
		"action_kind": s.Kind.String(),
	}
	names, _ := json.Marshal(s.Names)
	m["action_names"] = string(names)
	if s.Kind == games.Continuous {
		lo, _ := json.Marshal(s.Low)
		hi, _ := json.Marshal(s.High)
		m["action_low"], m["action_high"] = string(lo), string(hi)
	}
	return m
}

// ToFile returns the weights file content for net: its tensors (copied)
// and Metadata(net) merged with extra (training method, seed, score, ...).
// A key of extra that Save itself writes is an error.
func ToFile(net Net, extra map[string]string) (*weights.File, error) {
	f := &weights.File{Metadata: Metadata(net)}
	for k, v := range extra {
		if _, taken := f.Metadata[k]; taken {
			return nil, fmt.Errorf("metadata key %q is reserved for the policy description", k)
		}
		f.Metadata[k] = v
	}
	for _, t := range net.Tensors() {
		for i, v := range t.Data {
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return nil, fmt.Errorf("tensor %q: value %d is %v", t.Name, i, v)
			}
		}
		f.Add(t.Name, t.Shape, t.Data)
	}
	return f, nil
}

// Save writes net to path as a safetensors file (atomically), with
// Metadata(net) and extra in the header's __metadata__.
func Save(path string, net Net, extra map[string]string) error {
	f, err := ToFile(net, extra)
	if err != nil {
		return fmt.Errorf("save %s: %w", path, err)
	}
	return weights.WriteFile(path, f)
}

// Load reads a weights file written by Save and rebuilds the net.
func Load(path string) (Net, error) {
	f, err := weights.ReadFile(path)
	if err != nil {
		return nil, err
	}
	n, err := FromFile(f)
	if err != nil {
		return nil, fmt.Errorf("load %s: %w", path, err)
	}
	return n, nil
}

// FromFile rebuilds a net from decoded weights: the family, hyper-
// parameters, grid and action space from the metadata, the parameters
// from the tensors. It refuses missing or extra tensors, shapes that do
// not fit the family and non-finite values, naming the tensor.
func FromFile(f *weights.File) (Net, error) {
	cfg, grid, space, err := describe(f)
	if err != nil {
		return nil, err
	}
	n, err := plan(cfg, grid, space)
	if err != nil {
		return nil, err
	}
	c := n.base()
	want := map[string]bool{}
	for _, s := range c.specs {
		want[s.name] = true
		data, err := f.Want(s.name, s.shape...)
		if err != nil {
			return nil, fmt.Errorf("%s policy: %w", cfg.Family, err)
		}
		for i, v := range data {
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return nil, fmt.Errorf("tensor %q: value %d is %v", s.name, i, v)
			}
		}
	}
	for _, t := range f.Tensors {
		if !want[t.Name] {
			return nil, fmt.Errorf("tensor %q does not belong to a %s policy with these hyper-parameters", t.Name, cfg.Family)
		}
	}
	ready(n)
	for _, s := range c.specs {
		data, _ := f.Want(s.name, s.shape...)
		copy(c.params[s.off:s.off+s.size], data)
	}
	return n, nil
}

// describe reads the policy description from the metadata.
func describe(f *weights.File) (Config, *patch.Grid, games.Controls, error) {
	var cfg Config
	var space games.Controls
	if v, err := f.Meta("format"); err != nil || v != "1" {
		if err != nil {
			return cfg, nil, space, errors.New("weights metadata has no \"format\": not a tilebench policy file")
		}
		return cfg, nil, space, fmt.Errorf("weights format %q: this tilebench reads format 1", v)
	}
	fam, err := f.Meta("family")
	if err != nil {
		return cfg, nil, space, err
	}
	cfg.Family = fam
	ints := []struct {
		key string
		dst *int
	}{{"key_size", &cfg.KeySize}, {"key_hidden", &cfg.KeyHidden}, {"value_size", &cfg.ValueSize},
		{"queries", &cfg.Queries}, {"query_dim", &cfg.QueryDim}, {"hidden", &cfg.Hidden},
		{"token_hidden", &cfg.TokenHidden}, {"context", &cfg.Context}}
	for _, e := range ints {
		if *e.dst, err = f.MetaInt(e.key); err != nil {
			return cfg, nil, space, err
		}
		if *e.dst < 0 {
			return cfg, nil, space, fmt.Errorf("weights metadata %q = %d: must not be negative", e.key, *e.dst)
		}
	}
	if cfg.Value, err = f.Meta("value"); err != nil {
		return cfg, nil, space, err
	}
	pa, err := f.Meta("prev_action")
	if err != nil {
		return cfg, nil, space, err
	}
	if cfg.PrevAction, err = strconv.ParseBool(pa); err != nil {
		return cfg, nil, space, fmt.Errorf("weights metadata \"prev_action\" = %q: want true or false", pa)
	}
	// "centre" came after format 1's first files: absent means false.
	if ce, ok := f.Metadata["centre"]; ok {
		if cfg.Centre, err = strconv.ParseBool(ce); err != nil {
			return cfg, nil, space, fmt.Errorf("weights metadata \"centre\" = %q: want true or false", ce)
		}
	}
	if r := cfg.Resolved(); r != cfg {
		return cfg, nil, space, fmt.Errorf("weights metadata: hyper-parameters %+v are not complete for family %q", cfg, fam)
	}
	var gc patch.GridConfig
	for _, e := range []struct {
		key string
		dst *int
	}{{"frame_width", &gc.Width}, {"frame_height", &gc.Height}, {"channels", &gc.Channels},
		{"patch_w", &gc.PatchW}, {"patch_h", &gc.PatchH}, {"stride_x", &gc.StrideX}, {"stride_y", &gc.StrideY}} {
		if *e.dst, err = f.MetaInt(e.key); err != nil {
			return cfg, nil, space, err
		}
		// The file states the geometry it was trained on: a 0 here
		// would silently take patch.NewGrid's default instead.
		if *e.dst < 1 {
			return cfg, nil, space, fmt.Errorf("weights metadata %q = %d: want at least 1", e.key, *e.dst)
		}
	}
	if gc.Channels != 1 && gc.Channels != 3 {
		return cfg, nil, space, fmt.Errorf("weights metadata \"channels\" = %d: want 1 or 3", gc.Channels)
	}
	es, err := f.Meta("edge")
	if err != nil {
		return cfg, nil, space, err
	}
	if gc.Edge, err = patch.ParseEdge(es); err != nil {
		return cfg, nil, space, fmt.Errorf("weights metadata: %w", err)
	}
	fill, err := f.MetaFloat("fill")
	if err != nil {
		return cfg, nil, space, err
	}
	gc.Fill = float32(fill)
	grid, err := patch.NewGrid(gc)
	if err != nil {
		return cfg, nil, space, fmt.Errorf("weights metadata: patch geometry: %w", err)
	}
	kind, err := f.Meta("action_kind")
	if err != nil {
		return cfg, nil, space, err
	}
	switch kind {
	case "continuous":
		space.Kind = games.Continuous
	case "discrete":
		space.Kind = games.Discrete
	default:
		return cfg, nil, space, fmt.Errorf("weights metadata \"action_kind\" = %q: want continuous or discrete", kind)
	}
	if err := metaJSON(f, "action_names", &space.Names); err != nil {
		return cfg, nil, space, err
	}
	if space.Kind == games.Continuous {
		if err := metaJSON(f, "action_low", &space.Low); err != nil {
			return cfg, nil, space, err
		}
		if err := metaJSON(f, "action_high", &space.High); err != nil {
			return cfg, nil, space, err
		}
	}
	if err := checkSpace(space); err != nil {
		return cfg, nil, space, fmt.Errorf("weights metadata: %w", err)
	}
	return cfg, grid, space, nil
}

func metaJSON(f *weights.File, key string, dst any) error {
	s, err := f.Meta(key)
	if err != nil {
		return err
	}
	if err := json.Unmarshal([]byte(s), dst); err != nil {
		return fmt.Errorf("weights metadata %q = %q: not a JSON list of the right kind", key, s)
	}
	return nil
}
