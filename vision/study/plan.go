package study

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/overlay"
	"tilebench/vision/policies"
)

// Defaults used by Normalize.
const (
	DefaultEpisodes   = 30
	DefaultResamples  = 2000
	DefaultConfidence = 0.95
	defaultThreshold  = 0.5
	defaultPatch      = 8
)

// defaultStrips are the steps whose frames are kept for the report.
var defaultStrips = []int{0, 50, 100, 200, 400}

// Normalize fills in defaults and checks every value, expanding each axis
// once. Errors are *FieldError values naming the key.
func (d *Definition) Normalize() error {
	if d.Name == "" {
		d.Name = "study"
	}
	switch d.Kind {
	case "":
		d.Kind = "stress"
	case "stress", "sizes":
	default:
		return fieldErr("kind", fmt.Errorf("%q: want stress or sizes", d.Kind))
	}
	if d.Game == "" {
		d.Game = "drive"
	}
	if !isWord(d.Game) {
		return fieldErr("game", fmt.Errorf("%q is not a game name", d.Game))
	}
	if d.Variation == "default" {
		d.Variation = ""
	}
	if d.Episodes == 0 {
		d.Episodes = DefaultEpisodes
	}
	if d.Episodes < 0 || d.Episodes > 1_000_000 {
		return fieldErr("episodes", fmt.Errorf("%d: want 1..1000000", d.Episodes))
	}
	if d.Seeds == "" {
		d.Seeds = "sealed"
	}
	if _, _, err := seedRange(d.Seeds, d.Episodes); err != nil {
		return fieldErr("seeds", err)
	}
	if err := vision.CheckWorkers(d.Workers, d.ForceWorkers); err != nil {
		return fieldErr("workers", err)
	}
	if len(d.Policies) > 0 {
		if d.Policy.Source != "" {
			return fieldErr("policies", fmt.Errorf("give policy.source or a list of policies, not both (policy.source is %q)", d.Policy.Source))
		}
		if err := policies.CheckList(d.Policies); err != nil {
			return fieldErr("policies", err)
		}
	} else if d.Policy.Source == "" {
		d.Policy.Source = "expert"
	}
	if d.Policy.Family == "" {
		d.Policy.Family = "attention"
	}
	if d.Policy.StartTimeout != "" {
		if t, err := time.ParseDuration(d.Policy.StartTimeout); err != nil || t <= 0 {
			return fieldErr("policy.start_timeout", fmt.Errorf("%q: want a positive duration such as 30s", d.Policy.StartTimeout))
		}
	}
	if d.Policy.Timeout != "" {
		if t, err := time.ParseDuration(d.Policy.Timeout); err != nil || t <= 0 {
			return fieldErr("policy.timeout", fmt.Errorf("%q: want a positive duration such as 5s", d.Policy.Timeout))
		}
	}
	if d.Policy.StartTimeout != "" {
		if t, err := time.ParseDuration(d.Policy.StartTimeout); err != nil || t <= 0 {
			return fieldErr("policy.start_timeout", fmt.Errorf("%q: want a positive duration such as 30s", d.Policy.StartTimeout))
		}
	}
	switch d.Policy.Obs {
	case "", "frame", "tokens":
	default:
		return fieldErr("policy.obs", fmt.Errorf("%q: want frame or tokens", d.Policy.Obs))
	}
	switch d.Policy.Dtype {
	case "", "uint8", "float32":
	default:
		return fieldErr("policy.dtype", fmt.Errorf("%q: want uint8 or float32", d.Policy.Dtype))
	}
	if !isWord(d.Policy.Family) {
		return fieldErr("policy.family", fmt.Errorf("%q is not a family name", d.Policy.Family))
	}
	if len(d.Patch) == 0 {
		// A single weights file plays at its own patch size
		// (docs/studies.md); anything else at defaultPatch.
		ps, err := d.OwnPatch()
		if err != nil {
			return fieldErr("patch", err)
		}
		if ps == 0 {
			ps = defaultPatch
		}
		d.Patch = Axis{strconv.Itoa(ps)}
	}
	if d.Axes.Fill == "" {
		d.Axes.Fill = "black"
	}
	switch d.Axes.Fill {
	case "black", "mean", "noise", "drop":
	default:
		return fieldErr("axes.fill", fmt.Errorf("%q: want black, mean, noise or drop", d.Axes.Fill))
	}
	if d.Stats.Resamples == 0 {
		d.Stats.Resamples = DefaultResamples
	}
	if d.Stats.Resamples < 100 || d.Stats.Resamples > 1_000_000 {
		return fieldErr("stats.resamples", fmt.Errorf("%d: want 100..1000000", d.Stats.Resamples))
	}
	if d.Stats.Confidence == 0 {
		d.Stats.Confidence = DefaultConfidence
	}
	if !(d.Stats.Confidence > 0 && d.Stats.Confidence < 1) {
		return fieldErr("stats.confidence", fmt.Errorf("%v: want a number between 0 and 1", d.Stats.Confidence))
	}
	if d.Stats.Threshold == 0 {
		d.Stats.Threshold = defaultThreshold
	}
	if !(d.Stats.Threshold > 0 && d.Stats.Threshold <= 1) {
		return fieldErr("stats.threshold", fmt.Errorf("%v: want a number in (0, 1]", d.Stats.Threshold))
	}
	if !(d.Stats.Margin >= 0 && d.Stats.Margin < 1) {
		return fieldErr("stats.margin", fmt.Errorf("%v: want a number in [0, 1) on the normalised scale (0: the default, 0.05)", d.Stats.Margin))
	}
	if d.Floor == "idle" {
		d.Floor = ""
	}
	if err := policies.Check(d.Floor); d.Floor != "" && err != nil {
		return fieldErr("floor", err)
	}
	if d.Budget.Microseconds < 0 || math.IsNaN(d.Budget.Microseconds) || math.IsInf(d.Budget.Microseconds, 0) {
		return fieldErr("budget.us", fmt.Errorf("%v: want a positive number", d.Budget.Microseconds))
	}
	if d.Budget.MFLOP < 0 || math.IsNaN(d.Budget.MFLOP) || math.IsInf(d.Budget.MFLOP, 0) {
		return fieldErr("budget.mflop", fmt.Errorf("%v: want a positive number", d.Budget.MFLOP))
	}
	if d.Strips == nil {
		d.Strips = append([]int(nil), defaultStrips...)
	}
	for _, s := range d.Strips {
		if s < 0 || s > 1_000_000 {
			return fieldErr("strips", fmt.Errorf("step %d: want 0..1000000", s))
		}
	}
	if len(d.Strips) > 16 {
		return fieldErr("strips", fmt.Errorf("%d steps: at most 16", len(d.Strips)))
	}
	if _, err := overlay.Parse(d.Overlay); err != nil {
		return fieldErr("overlay", err)
	}
	_, err := d.Cells()
	return err
}

// PolicyList is the study's policies: the labelled list, or the one
// policy of Policy.Source with an empty label.
func (d *Definition) PolicyList() []policies.Labelled {
	if len(d.Policies) > 0 {
		return d.Policies
	}
	return []policies.Labelled{{Source: d.Policy.Source}}
}

// Compares reports whether the study compares several policies.
func (d *Definition) Compares() bool { return len(d.Policies) > 1 }

// OwnPatch is the patch size the study's weights files fix when no patch
// size is given: that of a single weights file (not a template), the
// same for every policy that is one; 0 when no policy fixes it. Weights
// files of different patch sizes are an error.
func (d *Definition) OwnPatch() (int, error) {
	ps, from := 0, ""
	for _, l := range d.PolicyList() {
		n, ok := policies.PatchOf(l.Source)
		if !ok {
			continue
		}
		if ps != 0 && n != ps {
			return 0, fmt.Errorf("the policies' weights files are for different patch sizes (%s: %d, %s: %d): give the patch sizes", from, ps, l.Label, n)
		}
		ps, from = n, l.Label
	}
	return ps, nil
}

// seedRange resolves the Seeds field into the first seed and the count.
func seedRange(s string, episodes int) (start, count uint64, err error) {
	switch s {
	case "sealed":
		start, count = games.SealedSeedStart, games.SealedSeedLen
	case "dev":
		start, count = games.DevSeedStart, games.DevSeedLen
	case "held-out":
		start, count = games.HeldOutSeedStart, games.SeedRangeLen
	case "train":
		start, count = games.TrainSeedStart, games.SeedRangeLen
	default:
		a, b, ok := strings.Cut(s, ":")
		var e1, e2 error
		start, e1 = strconv.ParseUint(strings.TrimSpace(a), 10, 64)
		count, e2 = strconv.ParseUint(strings.TrimSpace(b), 10, 64)
		if !ok || e1 != nil || e2 != nil || count == 0 || start+count < start {
			return 0, 0, fmt.Errorf("%q: want sealed, dev, held-out, train or START:COUNT", s)
		}
	}
	if uint64(episodes) > count {
		return 0, 0, fmt.Errorf("%q holds %d seeds, fewer than the %d episodes", s, count, episodes)
	}
	return start, count, nil
}

// Cell is one combination of the study's axes: the unit whose episodes
// are scored together.
type Cell struct {
	// Patch is the square patch size in pixels.
	Patch int `json:"patch"`
	// Variation is the game variation ("" is the default).
	Variation string `json:"variation"`
	// Occlude, Fill, Scramble and Every are in the spelling of patch.Spec.
	Occlude  string `json:"occlude"`
	Fill     string `json:"fill"`
	Scramble string `json:"scramble"`
	Every    int    `json:"every"`
	// NoiseTokens is the number of noise tokens added.
	NoiseTokens int `json:"noise_tokens"`
	// Brightness, Contrast and PixelNoise are the photometric shifts.
	Brightness float64 `json:"brightness"`
	Contrast   float64 `json:"contrast"`
	PixelNoise float64 `json:"pixel_noise"`
	// Corrupt is the frame corruption list in canonical spelling
	// (patch.CanonCorrupt); "" or "none" for none.
	Corrupt string `json:"corrupt,omitempty"`
	// Policy is the label of the policy that plays the cell in a study
	// comparing policies ("" in a study of one unlabelled policy). It is
	// not part of Key: every policy plays the same seeds.
	Policy string `json:"policy,omitempty"`
}

// ID identifies the cell within its study: Key, and the policy label
// when there is one.
func (c Cell) ID() string {
	if c.Policy == "" {
		return c.Key()
	}
	return c.Key() + " policy=" + c.Policy
}

// Condition is the cell without its policy: what is done to the input,
// the same for every policy of a comparison.
func (c Cell) Condition() Cell { c.Policy = ""; return c }

// corrupted reports whether the cell corrupts frames.
// Corrupted reports whether the cell applies a frame corruption.
func (c Cell) Corrupted() bool { return c.Corrupt != "" && c.Corrupt != "none" }

// Key is the canonical description of the cell's condition, which also
// keys its seeds; it leaves out the policy label (see ID), so that every
// policy of a comparison plays the same seeds.
func (c Cell) Key() string {
	return fmt.Sprintf("patch=%d variation=%s occlude=%s fill=%s scramble=%s every=%d noise_tokens=%d brightness=%s contrast=%s pixel_noise=%s",
		c.Patch, c.Variation, c.Occlude, c.Fill, c.Scramble, c.Every, c.NoiseTokens,
		fnum(c.Brightness), fnum(c.Contrast), fnum(c.PixelNoise)) + c.corruptKey()
}

// corruptKey is the corruption part of Key: empty without one, so that
// the keys (and seeds) of cells from before corruptions existed stay.
func (c Cell) corruptKey() string {
	if !c.Corrupted() {
		return ""
	}
	return " corrupt=" + c.Corrupt
}

// Label is a short description of what is done to the input, "clean" for
// the identity.
func (c Cell) Label() string {
	var parts []string
	if c.Occlude != "none" {
		parts = append(parts, "occlude "+c.Occlude)
		if c.Fill != "black" {
			parts = append(parts, "fill "+c.Fill)
		}
	}
	if c.Scramble != "none" {
		s := "scramble " + c.Scramble
		if c.Every > 0 {
			s += fmt.Sprintf(" every %d", c.Every)
		}
		parts = append(parts, s)
	}
	if c.NoiseTokens > 0 {
		parts = append(parts, fmt.Sprintf("noise tokens %d", c.NoiseTokens))
	}
	if c.Brightness != 0 {
		parts = append(parts, "brightness "+fnum(c.Brightness))
	}
	if c.Contrast != 1 {
		parts = append(parts, "contrast "+fnum(c.Contrast))
	}
	if c.PixelNoise != 0 {
		parts = append(parts, "pixel noise "+fnum(c.PixelNoise))
	}
	if c.Corrupted() {
		parts = append(parts, "corrupt "+c.Corrupt)
	}
	if len(parts) == 0 {
		return "clean"
	}
	return strings.Join(parts, ", ")
}

// Clean reports whether the cell applies no transform.
func (c Cell) Clean() bool {
	return c.Occlude == "none" && c.Scramble == "none" && c.NoiseTokens == 0 &&
		c.Brightness == 0 && c.Contrast == 1 && c.PixelNoise == 0 && !c.Corrupted()
}

// Spec is the pipeline specification of the cell.
func (c Cell) Spec() patch.Spec {
	s := patch.Spec{Scramble: c.Scramble, Every: c.Every, Occlude: c.Occlude, Fill: c.Fill,
		NoiseTokens: c.NoiseTokens, Brightness: c.Brightness, PixelNoise: c.PixelNoise}
	if c.Contrast != 1 {
		s.Contrast = c.Contrast
	}
	if c.Corrupted() {
		s.Corrupt = c.Corrupt
	}
	return s
}

func fnum(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// Cells lists the study's cells in their fixed order: patch size, then
// variation, occlusion, scramble, schedule, noise tokens, brightness,
// contrast, pixel noise and corruption, the last varying fastest; in a
// study comparing policies that whole list once per policy, in the
// order the policies are given. Cells that do the
// same thing are listed once (a schedule without a scramble, a zero
// ratio); for every patch size a clean cell on the study's variation is
// added at the end if the axes hold none, so that every cell has a
// reference for its retention.
func (d *Definition) Cells() ([]Cell, error) {
	patches, err := d.Patch.Values("")
	if err != nil {
		return nil, fieldErr("patch", err)
	}
	var ps []int
	for _, p := range patches {
		n, err := strconv.Atoi(p)
		if err != nil || n < 1 || n > 4096 {
			return nil, fieldErr("patch", fmt.Errorf("%q: want a whole number of pixels 1..4096", p))
		}
		ps = append(ps, n)
	}
	vars, err := d.Axes.Variations.Values(d.Variation)
	if err != nil {
		return nil, fieldErr("axes.variations", err)
	}
	for i, v := range vars {
		if v == "default" {
			vars[i] = ""
		} else if v != "" && !isWord(v) {
			return nil, fieldErr("axes.variations", fmt.Errorf("%q is not a variation name", v))
		}
	}
	occ, err := d.Axes.Occlude.Values("none")
	if err != nil {
		return nil, fieldErr("axes.occlude", err)
	}
	for i, o := range occ {
		if occ[i], err = canonOcclude(o); err != nil {
			return nil, fieldErr("axes.occlude", err)
		}
	}
	scr, err := d.Axes.Scramble.Values("none")
	if err != nil {
		return nil, fieldErr("axes.scramble", err)
	}
	for i, s := range scr {
		if scr[i], err = canonScramble(s); err != nil {
			return nil, fieldErr("axes.scramble", err)
		}
	}
	every, err := intValues(d.Axes.Every, "0", 0, 1_000_000)
	if err != nil {
		return nil, fieldErr("axes.every", err)
	}
	noise, err := intValues(d.Axes.NoiseTokens, "0", 0, 100_000)
	if err != nil {
		return nil, fieldErr("axes.noise_tokens", err)
	}
	bright, err := floatValues(d.Axes.Brightness, "0", -1, 1)
	if err != nil {
		return nil, fieldErr("axes.brightness", err)
	}
	contrast, err := floatValues(d.Axes.Contrast, "1", 0, 100)
	if err != nil {
		return nil, fieldErr("axes.contrast", err)
	}
	pnoise, err := floatValues(d.Axes.PixelNoise, "0", 0, 10)
	if err != nil {
		return nil, fieldErr("axes.pixel_noise", err)
	}
	corr, err := corruptValues(d.Axes.Corrupt)
	if err != nil {
		return nil, fieldErr("axes.corrupt", err)
	}
	total := 1
	for _, n := range []int{len(ps), len(vars), len(occ), len(scr), len(every), len(noise), len(bright), len(contrast), len(pnoise), len(corr)} {
		total *= n
		if total > maxRangeValues {
			return nil, fieldErr("axes", fmt.Errorf("more than %d cells", maxRangeValues))
		}
	}
	seen := map[string]bool{}
	var cells []Cell
	label := ""
	add := func(c Cell) {
		if c.Scramble == "none" {
			c.Every = 0
		}
		c.Policy = label
		if k := c.ID(); !seen[k] {
			seen[k] = true
			cells = append(cells, c)
		}
	}
	if len(d.Policies)*total > maxRangeValues {
		return nil, fieldErr("policies", fmt.Errorf("more than %d cells", maxRangeValues))
	}
	for _, pol := range d.PolicyList() {
		label = pol.Label
		d.conditionCells(add, ps, vars, occ, scr, every, noise, bright, contrast, pnoise, corr)
	}
	return cells, nil
}

// conditionCells adds every condition of the axes, in the order Cells
// documents, and the clean cell of every patch size.
func (d *Definition) conditionCells(add func(Cell), ps []int, vars, occ, scr []string, every, noise []int, bright, contrast, pnoise []float64, corr []string) {
	for _, p := range ps {
		for _, v := range vars {
			for _, o := range occ {
				for _, s := range scr {
					for _, e := range every {
						for _, n := range noise {
							for _, b := range bright {
								for _, ct := range contrast {
									for _, pn := range pnoise {
										for _, cr := range corr {
											add(Cell{Patch: p, Variation: v, Occlude: o, Fill: d.Axes.Fill, Scramble: s, Every: e,
												NoiseTokens: n, Brightness: b, Contrast: ct, PixelNoise: pn, Corrupt: cr})
										}
									}
								}
							}
						}
					}
				}
			}
		}
	}
	for _, p := range ps {
		add(Cell{Patch: p, Variation: d.Variation, Occlude: "none", Fill: d.Axes.Fill, Scramble: "none", Contrast: 1})
	}
}

// corruptValues expands the corruption axis (patch.ExpandCorrupt on each
// comma-separated item); "none" is kept as "".
func corruptValues(a Axis) ([]string, error) {
	if len(a) == 0 {
		return []string{""}, nil
	}
	var out []string
	for _, list := range a {
		for _, item := range strings.Split(list, ",") {
			vals, err := patch.ExpandCorrupt(item)
			if err != nil {
				return nil, err
			}
			for _, v := range vals {
				if v == "none" {
					v = ""
				}
				out = append(out, v)
			}
			if len(out) > maxRangeValues {
				return nil, fmt.Errorf("more than %d values", maxRangeValues)
			}
		}
	}
	return out, nil
}

func canonOcclude(s string) (string, error) {
	if strings.HasPrefix(s, "mask:") {
		return s, nil
	}
	kind, val, has := strings.Cut(s, ":")
	switch kind {
	case "none":
		if has {
			return "", fmt.Errorf("%q: none takes no value", s)
		}
		return "none", nil
	case "random", "block", "bands", "sweep":
		if !has {
			return "", fmt.Errorf("%q: %s needs a ratio, %s:R", s, kind, kind)
		}
		r, err := strconv.ParseFloat(val, 64)
		if err != nil || r < 0 || r > 1 {
			return "", fmt.Errorf("%q: ratio must be in [0,1]", s)
		}
		if r == 0 {
			return "none", nil
		}
		return s, nil
	}
	return "", fmt.Errorf("%q: want none, random:R, block:R, bands:R, sweep:R or mask:FILE.png", s)
}

func canonScramble(s string) (string, error) {
	kind, val, has := strings.Cut(s, ":")
	switch kind {
	case "none", "full":
		if has {
			return "", fmt.Errorf("%q: %s takes no value", s, kind)
		}
		return kind, nil
	case "partial":
		r, err := strconv.ParseFloat(val, 64)
		if !has || err != nil || r < 0 || r > 1 {
			return "", fmt.Errorf("%q: want partial:F with F in [0,1]", s)
		}
		if r == 0 {
			return "none", nil
		}
		return s, nil
	case "local":
		k, err := strconv.Atoi(val)
		if !has || err != nil || k < 0 || k > 4096 {
			return "", fmt.Errorf("%q: want local:K with K a whole number of cells", s)
		}
		if k == 0 {
			return "none", nil
		}
		return s, nil
	}
	return "", fmt.Errorf("%q: want none, full, partial:F or local:K", s)
}

func intValues(a Axis, def string, lo, hi int) ([]int, error) {
	vals, err := a.Values(def)
	if err != nil {
		return nil, err
	}
	out := make([]int, len(vals))
	for i, v := range vals {
		n, err := strconv.Atoi(v)
		if err != nil || n < lo || n > hi {
			return nil, fmt.Errorf("%q: want a whole number %d..%d", v, lo, hi)
		}
		out[i] = n
	}
	return out, nil
}

func floatValues(a Axis, def string, lo, hi float64) ([]float64, error) {
	vals, err := a.Values(def)
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(vals))
	for i, v := range vals {
		f, err := strconv.ParseFloat(v, 64)
		if err != nil || f < lo || f > hi {
			return nil, fmt.Errorf("%q: want a number in [%v,%v]", v, lo, hi)
		}
		out[i] = f
	}
	return out, nil
}

// Plan is a normalized study with its cells resolved: everything the
// runner needs, and the fingerprint that identifies the study.
type Plan struct {
	Def   Definition
	Cells []Cell
	// Fingerprint identifies the study: the first 16 hex digits of the
	// SHA-256 of the normalized definition as JSON (without Workers).
	Fingerprint string
	seedStart   uint64
	seedCount   uint64
	gameOffset  uint64
}

// NewPlan normalizes d (a copy) and resolves its cells.
func NewPlan(d Definition) (*Plan, error) {
	if err := d.Normalize(); err != nil {
		return nil, err
	}
	cells, err := d.Cells()
	if err != nil {
		return nil, err
	}
	if len(cells) == 0 {
		return nil, errors.New("study has no cells")
	}
	p := &Plan{Def: d, Cells: cells}
	p.seedStart, p.seedCount, _ = seedRange(d.Seeds, d.Episodes)
	p.gameOffset = patch.DeriveSeed(d.Seed, patch.StreamKey("game")) % p.seedCount
	js, err := json.Marshal(d)
	if err != nil {
		return nil, fmt.Errorf("study fingerprint: %w", err)
	}
	sum := sha256.Sum256(js)
	p.Fingerprint = hex.EncodeToString(sum[:8])
	return p, nil
}

// Units is the number of episodes in the whole study.
func (p *Plan) Units() int { return len(p.Cells) * p.Def.Episodes }

// GameSeed is the game seed of episode e, the same in every cell so that
// cells are compared on the same circuits (common random numbers):
//
//	start + (DeriveSeed(study seed, StreamKey("game")) mod count + e) mod count
//
// with start and count the seed range (games.HeldOut by default).
func (p *Plan) GameSeed(e int) uint64 {
	return p.seedStart + (p.gameOffset+uint64(e))%p.seedCount
}

// PipeSeed is the seed of the transform pipeline and the policy in
// episode e of cell c:
//
//	DeriveSeed(study seed, StreamKey("episode"), StreamKey(cell key), e)
//
// The cell key (Cell.Key) describes the cell's condition, so the same
// condition gets the same seeds in any study with the same study seed,
// and every policy of a comparison gets the same seeds.
func (p *Plan) PipeSeed(c, e int) uint64 {
	return patch.DeriveSeed(p.Def.Seed, patch.StreamKey("episode"), patch.StreamKey(p.Cells[c].Key()), uint64(e))
}

// PolicySeed is the seed that initialises a fresh (untrained) network for
// patch size ps: DeriveSeed(study seed, StreamKey("policy"), ps).
func (p *Plan) PolicySeed(ps int) uint64 {
	return patch.DeriveSeed(p.Def.Seed, patch.StreamKey("policy"), uint64(ps))
}

// Reference returns the index of the clean cell that cell c's retention
// is measured against: the clean cell of the same patch size and policy
// on the study's variation.
func (p *Plan) Reference(c int) int {
	for i, x := range p.Cells {
		if x.Clean() && x.Patch == p.Cells[c].Patch && x.Variation == p.Def.Variation && x.Policy == p.Cells[c].Policy {
			return i
		}
	}
	return -1
}
