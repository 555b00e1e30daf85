// Package record plays a built-in game with its scripted expert, or with
// any policy, and writes what was seen and done as a dataset that NumPy
// reads without tilebench: one .npy file (NEP 1) per array and a JSON
// manifest (docs/recording.md). Episodes stream to disk, so memory does
// not grow with the dataset, and an interrupted recording resumes where
// its last whole episode ended, byte for byte as if it had not stopped.
//
// When a policy other than the expert drives, the expert can still label
// every step (Config.Relabel): the policy chooses where the episode goes,
// the expert says what it would have done there, as in DAgger (Ross,
// Gordon & Bagnell 2011).
package record

import (
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"math"
	"os"
	"path/filepath"
	"runtime/debug"

	"tilebench/games"
	"tilebench/internal/atomicfile"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/play"
)

// Observation kinds.
const (
	// ObsFrame records the frame the policy saw, reassembled from the
	// (transformed) tokens: frames.npy, N×H×W×3 uint8.
	ObsFrame = "frame"
	// ObsTokens records the token set itself: tokens.npy (N×K×D uint8),
	// cells.npy (N×K×2 int16, -1 for padding and added tokens) and
	// token_count.npy (N int32), K the pipeline's capacity.
	ObsTokens = "tokens"
)

// ManifestName is the manifest's file name inside a dataset folder.
const ManifestName = "manifest.json"

// Config says what to record. Game, Grid and Dir are required.
type Config struct {
	// Game is the game to play; it must ship a scripted expert when the
	// expert drives or labels.
	Game games.Game
	// Grid is the patch grid the transforms work on.
	Grid *patch.Grid
	// Policy drives the episodes. Default (nil) the game's scripted expert.
	Policy vision.Policy
	// PolicySource is how the manifest names the policy. Default "expert".
	PolicySource string
	// Relabel asks the scripted expert for its action at every step the
	// policy drives, written to labels.npy. Default false: no labels file
	// (with the expert driving, actions are the expert's anyway).
	Relabel bool
	// Spec is the transform pipeline between the game and what is
	// recorded. Default none.
	Spec patch.Spec
	// Obs is ObsFrame (default) or ObsTokens.
	Obs string
	// Episodes is the number of episodes the dataset holds when done.
	// Default 1.
	Episodes int
	// Seed is the game seed of the first episode (default 0, the first
	// training seed); episode i plays seed Seed+i with the pipeline and
	// policy seed play.PipeSeed(Seed+i), as "tilebench play" does. The
	// seeds must stay in the training range.
	Seed uint64
	// Dir is the dataset folder. It must not exist or be empty, unless
	// Resume is set.
	Dir string
	// Resume continues the recording in Dir: the episodes its manifest
	// lists are kept, a partly written one is dropped, and recording goes
	// on until Episodes. Default false.
	Resume bool
	// OnEpisode, if set, is called after each episode is on disk (i from
	// 0, counting the episodes of earlier runs).
	OnEpisode func(i int, e Episode)
}

// Manifest describes a dataset folder (manifest.json, "format": 1).
type Manifest struct {
	Format  int    `json:"format"`
	Tool    string `json:"tool"`
	Version string `json:"version"`
	Game    string `json:"game"`
	// Variation is the game variation ("" the default).
	Variation string `json:"variation"`
	// Frame is [height, width, channels] of a recorded frame (the area
	// the grid covers).
	Frame [3]int   `json:"frame"`
	Grid  GridInfo `json:"grid"`
	// Obs is "frame" or "tokens".
	Obs string `json:"obs"`
	// Transforms is the pipeline applied before recording ("none").
	Transforms string     `json:"transforms"`
	Action     ActionInfo `json:"action"`
	// Policy names who drove; Relabel says whether labels.npy holds the
	// expert's action at every step.
	Policy  string `json:"policy"`
	Relabel bool   `json:"relabel"`
	// Seeds is the range of game seeds: First, First+1, ... one per
	// episode, Count episodes asked for.
	Seeds SeedRange `json:"seeds"`
	// Rows is the number of steps recorded (the first axis of every file).
	Rows     int       `json:"rows"`
	Episodes []Episode `json:"episodes"`
	Files    []File    `json:"files"`
	// Complete is true once every episode asked for is on disk.
	Complete bool   `json:"complete"`
	Caution  string `json:"caution"`
}

// GridInfo is the patch grid of a recording.
type GridInfo struct {
	Text   string  `json:"text"`
	Patch  [2]int  `json:"patch"`  // [h, w]
	Stride [2]int  `json:"stride"` // [y, x]
	Rows   int     `json:"rows"`
	Cols   int     `json:"cols"`
	Edge   string  `json:"edge"`
	Fill   float32 `json:"fill"`
	// Tokens is the most tokens one step holds (cells plus added tokens).
	Tokens int `json:"tokens"`
}

// ActionInfo is the game's action space.
type ActionInfo struct {
	Kind  string    `json:"kind"`
	Names []string  `json:"names"`
	Dim   int       `json:"dim"`
	Low   []float64 `json:"low,omitempty"`
	High  []float64 `json:"high,omitempty"`
}

// SeedRange is the game seeds of a recording.
type SeedRange struct {
	First uint64 `json:"first"`
	Count int    `json:"count"`
}

// Episode is one recorded episode: rows Start..Start+Steps-1.
type Episode struct {
	Seed   uint64  `json:"seed"`
	Start  int     `json:"start"`
	Steps  int     `json:"steps"`
	Return float64 `json:"return"`
	End    string  `json:"end"`
}

// File is one array of the dataset.
type File struct {
	Name  string `json:"name"`
	Dtype string `json:"dtype"`
	// Shape is the shape of one row (the array is Rows × Shape).
	Shape []int  `json:"shape"`
	Doc   string `json:"doc"`
}

// ToolVersion is the version the manifest records: the module version and
// VCS revision of the running binary, as far as the build knows them.
func ToolVersion() string {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "unknown"
	}
	v := bi.Main.Version
	for _, s := range bi.Settings {
		if s.Key == "vcs.revision" && len(s.Value) >= 12 {
			v += " " + s.Value[:12]
		}
		if s.Key == "vcs.modified" && s.Value == "true" {
			v += "+dirty"
		}
	}
	return v
}

// recorder is one run: the columns and the buffers of a step.
type recorder struct {
	cfg    Config
	m      *Manifest
	cols   map[string]*column
	order  []*column
	expert games.Expert
	label  []float64
	rgb    []byte
	tokBuf []byte
	cells  []byte
	reward [1]float64
	t      int
	seed   uint64
}

// Check reports a config that cannot be recorded, before anything is
// written.
func (cfg *Config) check() error {
	switch {
	case cfg.Game == nil || cfg.Grid == nil:
		return errors.New("record: Game and Grid are required")
	case cfg.Dir == "":
		return errors.New("record: no dataset folder given")
	case cfg.Obs != ObsFrame && cfg.Obs != ObsTokens:
		return fmt.Errorf("record: observation %q: want %s or %s", cfg.Obs, ObsFrame, ObsTokens)
	case cfg.Episodes < 1 || cfg.Episodes > 1_000_000:
		return fmt.Errorf("record: %d episodes: want 1 to 1000000", cfg.Episodes)
	}
	end := games.TrainSeedStart + games.SeedRangeLen
	if cfg.Seed < games.TrainSeedStart || cfg.Seed >= end || uint64(cfg.Episodes) > end-cfg.Seed {
		return fmt.Errorf("record: seeds %d..%d leave the training range %d..%d (held-out seeds are for evaluation)",
			cfg.Seed, cfg.Seed+uint64(cfg.Episodes)-1, games.TrainSeedStart, end-1)
	}
	sp := cfg.Game.Spec()
	if cfg.Grid.Width != sp.Width || cfg.Grid.Height != sp.Height {
		return fmt.Errorf("record: patch grid is for %dx%d frames, game %s renders %dx%d", cfg.Grid.Width, cfg.Grid.Height, sp.Name, sp.Width, sp.Height)
	}
	return nil
}

// newManifest is the manifest of a fresh recording of cfg.
func newManifest(cfg *Config, pipe *patch.Pipeline) *Manifest {
	sp := cfg.Game.Spec()
	g := cfg.Grid
	m := &Manifest{Format: 1, Tool: "tilebench record", Version: ToolVersion(), Game: sp.Name, Variation: sp.Variation,
		Frame: [3]int{g.OutH, g.OutW, 3},
		Grid: GridInfo{Text: g.String(), Patch: [2]int{g.PatchH, g.PatchW}, Stride: [2]int{g.StrideY, g.StrideX},
			Rows: g.Rows, Cols: g.Cols, Edge: g.Edge.String(), Fill: g.Fill, Tokens: pipe.Capacity()},
		Obs: cfg.Obs, Transforms: cfg.Spec.String(), Policy: cfg.PolicySource, Relabel: cfg.Relabel,
		Action: ActionInfo{Kind: sp.Action.Kind.String(), Names: sp.Action.Names, Dim: sp.Action.Dim()},
		Seeds:  SeedRange{First: cfg.Seed, Count: cfg.Episodes}, Episodes: []Episode{}, Caution: vision.Caution}
	if sp.Action.Kind == games.Continuous {
		m.Action.Low, m.Action.High = sp.Action.Low, sp.Action.High
	}
	for _, c := range columnsFor(m) {
		m.Files = append(m.Files, File{Name: c.file(), Dtype: c.descr, Shape: c.shape, Doc: docs[c.name]})
	}
	return m
}

var docs = map[string]string{
	"frames":         "the frame the policy saw (after the transforms), RGB",
	"tokens":         "the token set the policy saw, token after token, each patch row-major with channels last; zero rows pad to the grid's token capacity",
	"cells":          "each token's grid cell (row, col); (-1, -1) for an added token and for padding",
	"token_count":    "the number of tokens in use at the step",
	"actions":        "the action taken (a discrete game: the choice index)",
	"labels":         "the scripted expert's action at the step, clamped to the bounds (relabelling)",
	"prev_actions":   "the action taken at the step before (zeros at an episode's first step), as the policy is shown it",
	"rewards":        "the reward of the step",
	"episode_starts": "true at each episode's first step",
	"seeds":          "the episode's game seed",
	"steps":          "the step index within the episode",
}

// columnsFor lists the files of a manifest's dataset, in order.
func columnsFor(m *Manifest) []*column {
	a := m.Action.Dim
	var cs []*column
	if m.Obs == ObsTokens {
		d := m.Grid.Patch[0] * m.Grid.Patch[1] * m.Frame[2]
		cs = append(cs, newColumn("tokens", "|u1", m.Grid.Tokens, d), newColumn("cells", "<i2", m.Grid.Tokens, 2),
			newColumn("token_count", "<i4"))
	} else {
		cs = append(cs, newColumn("frames", "|u1", m.Frame[0], m.Frame[1], m.Frame[2]))
	}
	cs = append(cs, newColumn("actions", "<f4", a))
	if m.Relabel {
		cs = append(cs, newColumn("labels", "<f4", a))
	}
	return append(cs, newColumn("prev_actions", "<f4", a), newColumn("rewards", "<f4"),
		newColumn("episode_starts", "|b1"), newColumn("seeds", "<u8"), newColumn("steps", "<i4"))
}

// ReadManifest reads the manifest of a dataset folder.
func ReadManifest(dir string) (*Manifest, error) {
	b, err := os.ReadFile(filepath.Join(dir, ManifestName))
	if err != nil {
		return nil, err
	}
	var m Manifest
	if err := json.Unmarshal(b, &m); err != nil {
		return nil, fmt.Errorf("%s: %w", filepath.Join(dir, ManifestName), err)
	}
	if m.Format != 1 || m.Tool != "tilebench record" {
		return nil, fmt.Errorf("%s: not a tilebench recording (format %d, tool %q)", filepath.Join(dir, ManifestName), m.Format, m.Tool)
	}
	return &m, nil
}

// Check reports a folder that Run would refuse for cfg: a folder that
// exists and holds files without Resume, or with Resume a folder that is
// not a recording of the same game, grid, transforms, policy and seeds.
// Nothing is written.
func Check(cfg Config) error {
	cfg.defaults()
	if err := cfg.check(); err != nil {
		return err
	}
	pipe, err := patch.NewPipeline(cfg.Grid, cfg.Spec)
	if err != nil {
		return fmt.Errorf("record: transforms: %w", err)
	}
	_, err = cfg.existing(pipe)
	return err
}

func (cfg *Config) defaults() {
	if cfg.Obs == "" {
		cfg.Obs = ObsFrame
	}
	if cfg.Episodes == 0 {
		cfg.Episodes = 1
	}
	if cfg.PolicySource == "" {
		cfg.PolicySource = "expert"
	}
}

// existing returns the manifest of the recording to resume (nil for a
// fresh one), or why the folder cannot be used.
func (cfg *Config) existing(pipe *patch.Pipeline) (*Manifest, error) {
	if err := atomicfile.CheckDir(cfg.Dir); err != nil {
		return nil, fmt.Errorf("record: %w", err)
	}
	ents, err := os.ReadDir(cfg.Dir)
	if errors.Is(err, os.ErrNotExist) || (err == nil && len(ents) == 0) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("record: %w", err)
	}
	if !cfg.Resume {
		return nil, fmt.Errorf("record: dataset folder %s exists and is not empty: give --resume to continue it, or another folder", cfg.Dir)
	}
	old, err := ReadManifest(cfg.Dir)
	if err != nil {
		return nil, fmt.Errorf("record: %s is not resumable: %w", cfg.Dir, err)
	}
	want := newManifest(cfg, pipe)
	for _, d := range []struct {
		what      string
		have, ask any
	}{
		{"game", old.Game, want.Game}, {"variation", old.Variation, want.Variation},
		{"frame", old.Frame, want.Frame}, {"grid", old.Grid, want.Grid}, {"obs", old.Obs, want.Obs},
		{"transforms", old.Transforms, want.Transforms}, {"policy", old.Policy, want.Policy},
		{"relabel", old.Relabel, want.Relabel}, {"first seed", old.Seeds.First, want.Seeds.First},
		{"action space", fmt.Sprint(old.Action), fmt.Sprint(want.Action)}, {"files", fmt.Sprint(old.Files), fmt.Sprint(want.Files)},
	} {
		if fmt.Sprint(d.have) != fmt.Sprint(d.ask) {
			return nil, fmt.Errorf("record: %s is not resumable: it records %s %v, this run %v", cfg.Dir, d.what, d.have, d.ask)
		}
	}
	if len(old.Episodes) > cfg.Episodes {
		return nil, fmt.Errorf("record: %s already holds %d episodes, more than the %d asked for", cfg.Dir, len(old.Episodes), cfg.Episodes)
	}
	rows := 0
	for i, e := range old.Episodes {
		if e.Seed != old.Seeds.First+uint64(i) || e.Start != rows || e.Steps < 1 {
			return nil, fmt.Errorf("record: %s is not resumable: manifest episode %d is inconsistent", cfg.Dir, i)
		}
		rows += e.Steps
	}
	if rows != old.Rows {
		return nil, fmt.Errorf("record: %s is not resumable: manifest rows %d, its episodes hold %d", cfg.Dir, old.Rows, rows)
	}
	return old, nil
}

// Run records the episodes of cfg into cfg.Dir and returns the manifest.
// On failure the episodes already on disk stay there, listed in the
// manifest, and a later run with Resume continues after them.
func Run(cfg Config) (*Manifest, error) {
	cfg.defaults()
	if err := cfg.check(); err != nil {
		return nil, err
	}
	pipe, err := patch.NewPipeline(cfg.Grid, cfg.Spec)
	if err != nil {
		return nil, fmt.Errorf("record: transforms: %w", err)
	}
	if cfg.Relabel && cfg.Policy == nil {
		return nil, errors.New("record: relabelling needs a policy other than the expert to drive")
	}
	r := &recorder{cfg: cfg}
	if cfg.Policy == nil || cfg.Relabel {
		w, ok := cfg.Game.(games.WithExpert)
		if !ok {
			return nil, fmt.Errorf("record: game %s ships no scripted expert", cfg.Game.Spec().Name)
		}
		r.expert = w.Expert()
	}
	old, err := cfg.existing(pipe)
	if err != nil {
		return nil, err
	}
	pol := cfg.Policy
	if pol == nil {
		pol, _ = vision.NewExpertPolicy(cfg.Game)
	}
	if err := r.open(old, pipe); err != nil {
		r.closeAll()
		return nil, err
	}
	defer r.closeAll()
	ep, err := vision.NewEpisode(&tap{Game: cfg.Game, r: r}, patch.NewTokenizer(cfg.Grid), pipe, pol)
	if err != nil {
		return nil, fmt.Errorf("record: %w", err)
	}
	r.label = make([]float64, cfg.Game.Spec().Action.Dim())
	for i := len(r.m.Episodes); i < cfg.Episodes; i++ {
		s := cfg.Seed + uint64(i)
		r.seed, r.t = s, 0
		start := r.m.Rows
		res, err := ep.Run(s, play.PipeSeed(s), r.hook)
		if err == nil {
			err = r.sync()
		}
		if err != nil {
			r.cut(start)
			return r.m, fmt.Errorf("record: episode %d (seed %d): %w", i+1, s, err)
		}
		e := Episode{Seed: s, Start: start, Steps: res.Steps, Return: res.Return, End: res.Reason.String()}
		r.m.Episodes = append(r.m.Episodes, e)
		r.m.Rows += res.Steps
		r.m.Complete = i+1 == cfg.Episodes
		if err := r.writeManifest(); err != nil {
			return r.m, err
		}
		if cfg.OnEpisode != nil {
			cfg.OnEpisode(i, e)
		}
	}
	if !r.m.Complete {
		r.m.Complete = true
		if err := r.writeManifest(); err != nil {
			return r.m, err
		}
	}
	return r.m, nil
}

// open creates the folder and files, or reopens those of old.
func (r *recorder) open(old *Manifest, pipe *patch.Pipeline) error {
	cfg := &r.cfg
	r.m = newManifest(cfg, pipe)
	r.cols = map[string]*column{}
	r.order = columnsFor(r.m)
	for _, c := range r.order {
		r.cols[c.name] = c
	}
	if old != nil {
		r.m.Version, r.m.Episodes, r.m.Rows = old.Version, old.Episodes, old.Rows
		r.m.Complete = len(old.Episodes) == cfg.Episodes
		for _, c := range r.order {
			if err := c.reopen(cfg.Dir, old.Rows); err != nil {
				return fmt.Errorf("record: %s is not resumable: %w", cfg.Dir, err)
			}
		}
		return r.writeManifest()
	}
	if err := os.MkdirAll(cfg.Dir, 0o755); err != nil {
		return fmt.Errorf("record: %w", err)
	}
	for _, c := range r.order {
		if err := c.create(cfg.Dir); err != nil {
			return fmt.Errorf("record: %w", err)
		}
	}
	return r.writeManifest()
}

func (r *recorder) writeManifest() error {
	b, err := json.MarshalIndent(r.m, "", "  ")
	if err != nil {
		return err
	}
	if err := atomicfile.WriteBytes(filepath.Join(r.cfg.Dir, ManifestName), append(b, '\n')); err != nil {
		return fmt.Errorf("record: manifest: %w", err)
	}
	return nil
}

func (r *recorder) sync() error {
	for _, c := range r.order {
		if err := c.sync(); err != nil {
			return err
		}
	}
	return nil
}

// cut drops the rows of a failed episode.
func (r *recorder) cut(rows int) {
	for _, c := range r.order {
		c.cut(rows)
	}
}

func (r *recorder) closeAll() {
	for _, c := range r.order {
		c.close()
	}
}

// hook writes everything of step t but the reward, which tap adds when
// the game has stepped.
func (r *recorder) hook(t int, _ *image.RGBA, obs *vision.Observation, _ *patch.FrameRecord, action []float64) {
	r.t = t
	if c := r.cols["frames"]; c != nil {
		r.rgb = packRGB(r.rgb[:0], obs.Frame)
		c.put(r.rgb)
	} else {
		r.putTokens(obs.Tokens)
	}
	r.cols["actions"].putF32(action)
	if c := r.cols["labels"]; c != nil {
		r.expert.Act(r.label)
		clampLabel(r.cfg.Game.Spec().Action, r.label)
		c.putF32(r.label)
	}
	r.cols["prev_actions"].putF32(obs.PrevAction)
	start := uint64(0)
	if t == 0 {
		start = 1
	}
	r.cols["episode_starts"].putScalar(start)
	r.cols["seeds"].putScalar(r.seed)
	r.cols["steps"].putScalar(uint64(t))
}

// putTokens writes a token set padded to the pipeline's capacity, values
// quantised as the protocol's uint8 observations are.
func (r *recorder) putTokens(ts *patch.TokenSet) {
	tc, cc := r.cols["tokens"], r.cols["cells"]
	if cap(r.tokBuf) < tc.row {
		r.tokBuf, r.cells = make([]byte, tc.row), make([]byte, cc.row)
	}
	tb, cb := r.tokBuf[:tc.row], r.cells[:cc.row]
	clear(tb)
	for i, v := range ts.Data[:ts.N*ts.D] {
		tb[i] = uint8(min(255, max(0, math.Round(float64(v)*255))))
	}
	for i := range cc.row / 4 {
		row, col := int16(-1), int16(-1)
		if i < ts.N {
			row, col = ts.Pos[i].Row, ts.Pos[i].Col
		}
		cb[4*i], cb[4*i+1] = byte(uint16(row)), byte(uint16(row)>>8)
		cb[4*i+2], cb[4*i+3] = byte(uint16(col)), byte(uint16(col)>>8)
	}
	tc.put(tb)
	cc.put(cb)
	r.cols["token_count"].putScalar(uint64(ts.N))
}

// packRGB appends the RGB bytes of img.
func packRGB(dst []byte, img *image.RGBA) []byte {
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		o := img.PixOffset(b.Min.X, y)
		row := img.Pix[o : o+4*b.Dx()]
		for x := 0; x < len(row); x += 4 {
			dst = append(dst, row[x], row[x+1], row[x+2])
		}
	}
	return dst
}

// clampLabel keeps a continuous label within the action bounds.
func clampLabel(space games.Controls, a []float64) {
	if space.Kind != games.Continuous {
		return
	}
	for i := range a {
		a[i] = math.Max(space.Low[i], math.Min(space.High[i], a[i]))
	}
}

// tap passes a game through and records each step's reward.
type tap struct {
	games.Game
	r *recorder
}

// Step steps the game and records the reward.
func (t *tap) Step(a []float64) (games.Step, error) {
	st, err := t.Game.Step(a)
	if err == nil {
		t.r.reward[0] = st.Reward
		t.r.cols["rewards"].putF32(t.r.reward[:])
	}
	return st, err
}
