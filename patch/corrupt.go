package patch

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Frame corruptions: camera and image-pipeline faults applied to the
// frame, in pixels, before it is tokenized (Spec.Corrupt,
// Pipeline.TokenizeFrame). A corruption list is a chain of steps joined
// by '+' (a comma joins them too, for compatibility), applied in the
// order written; each step is KIND:PARAMS or KIND:sN, a severity N in
// 1..5 looked up in the table below. '+' is the joiner that means the
// same in a study, whose axes take comma lists of separate values.
//
//	kind        parameters            meaning
//	blur        S                     Gaussian blur, σ = S px (imaging's kernel)
//	motionblur  L[:A]                 line blur L px long at A degrees (default 0, along x)
//	resolution  F                     down-scale by F in (0,1] and back up
//	jpeg        Q                     JPEG round trip at quality Q in 1..100
//	gamma       G                     v' = v^(1/G) (imaging's convention: G > 1 lightens)
//	sharpen     S                     unsharp mask 2·v − blur_S(v) (imaging's Sharpen)
//	saltpepper  R                     each pixel black or white with probability R, every step
//	dead        R                     a fixed set of pixels (fraction R, drawn per sequence) stuck black
//	shift       DX[:DY][:MODE]        translate by whole pixels (DY default DX)
//	shake       A[:MODE]              translate by a fresh uniform offset in [−A,A]² every step
//	rotate      D                     rotate D degrees counter-clockwise about the centre (bilinear)
//	scale       S                     zoom by S about the centre (bilinear; S < 1 shrinks)
//
// MODE says what fills the pixels a translation uncovers: "fill" (default:
// the grid's pad value, Grid.Fill, the same value edge pad uses), "wrap"
// (the frame wraps around, a pure cyclic shift) or "edge" (the nearest
// edge pixel repeats). Rotation and scale fill uncovered pixels with the
// pad value too (bilinear weights blend it in at the border).
//
// Severities (kind:sN). The graded-severity method is that of Hendrycks &
// Dietterich 2019 (five levels per corruption, chosen so that each level
// is visibly worse than the one before); the values are ours, for frames
// of about 100 px, and where a value is borrowed the table says so:
//
//	blur        σ 0.5 1 1.5 2 3           ours (their ImageNet σ 1 2 3 4 6, from memory, scaled by ~96/224)
//	motionblur  L 3 5 7 9 13              ours
//	resolution  F 0.6 0.5 0.4 0.3 0.25    their pixelate factors (from memory)
//	jpeg        Q 60 40 25 12 5           ours
//	gamma       G 1.25 1.5 2 2.5 3        ours
//	sharpen     S 0.5 1 1.5 2 3           ours
//	saltpepper  R 0.03 0.06 0.09 0.17 0.27  their impulse-noise amounts (from memory)
//	dead        R 0.005 0.01 0.02 0.05 0.1  ours
//	shift       D 1 2 3 5 8               ours (both axes)
//	shake       A 1 2 3 5 8               ours
//	rotate      D 1 2 4 7 12              ours
//	scale       S 0.97 0.94 0.9 0.85 0.8  ours
var severityTable = map[string][5]float64{
	"blur":       {0.5, 1, 1.5, 2, 3},
	"motionblur": {3, 5, 7, 9, 13},
	"resolution": {0.6, 0.5, 0.4, 0.3, 0.25},
	"jpeg":       {60, 40, 25, 12, 5},
	"gamma":      {1.25, 1.5, 2, 2.5, 3},
	"sharpen":    {0.5, 1, 1.5, 2, 3},
	"saltpepper": {0.03, 0.06, 0.09, 0.17, 0.27},
	"dead":       {0.005, 0.01, 0.02, 0.05, 0.1},
	"shift":      {1, 2, 3, 5, 8},
	"shake":      {1, 2, 3, 5, 8},
	"rotate":     {1, 2, 4, 7, 12},
	"scale":      {0.97, 0.94, 0.9, 0.85, 0.8},
}

// corruptKinds lists the corruption kinds in the order of the table above.
var corruptKinds = []string{"blur", "motionblur", "resolution", "jpeg", "gamma", "sharpen",
	"saltpepper", "dead", "shift", "shake", "rotate", "scale"}

// Severity returns the parameter of kind at severity level n (1..5).
func Severity(kind string, n int) (float64, error) {
	t, ok := severityTable[kind]
	if !ok {
		return 0, fmt.Errorf("corrupt kind %q: want one of %s", kind, strings.Join(corruptKinds, ", "))
	}
	if n < 1 || n > 5 {
		return 0, fmt.Errorf("corrupt %s severity %d: want 1..5", kind, n)
	}
	return t[n-1], nil
}

// ShiftMode is what fills the pixels a translation uncovers.
type ShiftMode uint8

// The shift modes.
const (
	ShiftFill ShiftMode = iota // the grid's pad value
	ShiftWrap                  // cyclic
	ShiftEdge                  // nearest edge pixel
)

func (m ShiftMode) String() string { return [...]string{"fill", "wrap", "edge"}[m] }

// Corruption is one parsed step of a corruption list.
type Corruption struct {
	// Kind is one of corruptKinds.
	Kind string
	// Level is the severity 1..5 when the step was written kind:sN (its
	// parameter then comes from the table), else 0.
	Level int
	// A and B are the parameters: σ, L and angle, F, Q, G, S, R, DX and DY,
	// A, degrees, or the zoom factor (B is used by motionblur and shift).
	A, B float64
	// Mode is the fill of shift and shake.
	Mode ShiftMode
}

// String writes c in the spelling ParseCorrupt reads.
func (c Corruption) String() string {
	num := func(v float64) string {
		if v == 0 {
			v = 0 // no negative zero
		}
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	var b strings.Builder
	b.WriteString(c.Kind)
	b.WriteByte(':')
	if c.Level > 0 {
		b.WriteString("s" + strconv.Itoa(c.Level))
	} else {
		b.WriteString(num(c.A))
	}
	switch c.Kind {
	case "motionblur":
		if c.B != 0 {
			b.WriteString(":" + num(c.B))
		}
	case "shift":
		if c.Level == 0 && c.B != c.A {
			b.WriteString(":" + num(c.B))
		}
	}
	if (c.Kind == "shift" || c.Kind == "shake") && c.Mode != ShiftFill {
		b.WriteString(":" + c.Mode.String())
	}
	return b.String()
}

// identity reports whether c changes nothing.
func (c Corruption) identity() bool {
	switch c.Kind {
	case "blur", "sharpen", "saltpepper", "dead", "shake", "rotate":
		return c.A == 0
	case "motionblur":
		return c.A <= 1
	case "resolution", "gamma", "scale":
		return c.A == 1
	case "jpeg":
		return false
	case "shift":
		return c.A == 0 && c.B == 0
	}
	return false
}

// ParseCorrupt reads a corruption list ("", "none", or steps joined by
// '+' or ',', see the table at the top of corrupt.go) and checks every
// parameter. Steps that change nothing (blur:0, resolution:1, shift:0)
// are dropped. Errors are one line naming the step.
func ParseCorrupt(s string) ([]Corruption, error) {
	s = strings.TrimSpace(s)
	if s == "" || s == "none" {
		return nil, nil
	}
	if len(s) > 4096 {
		return nil, fmt.Errorf("corrupt list of %d bytes: too long", len(s))
	}
	var out []Corruption
	for _, item := range splitCorrupt(s) {
		c, err := parseCorruption(strings.TrimSpace(item))
		if err != nil {
			return nil, err
		}
		if !c.identity() {
			out = append(out, c)
		}
	}
	if len(out) > 32 {
		return nil, fmt.Errorf("corrupt %q: at most 32 steps", s)
	}
	return out, nil
}

// splitCorrupt cuts a corruption list at each '+' and ',', keeping empty
// steps so that they can be reported.
func splitCorrupt(s string) []string {
	return strings.Split(strings.ReplaceAll(s, "+", ","), ",")
}

// CanonCorrupt returns the canonical spelling of a corruption list, "none"
// when it changes nothing.
func CanonCorrupt(s string) (string, error) {
	cs, err := ParseCorrupt(s)
	if err != nil {
		return "", err
	}
	if len(cs) == 0 {
		return "none", nil
	}
	parts := make([]string, len(cs))
	for i, c := range cs {
		parts[i] = c.String()
	}
	return strings.Join(parts, ","), nil
}

// limits of each kind's first parameter (inclusive), and whether it must
// be a whole number.
var corruptRange = map[string]struct {
	lo, hi float64
	whole  bool
	what   string
}{
	"blur":       {0, 20, false, "σ in px"},
	"motionblur": {0, 64, true, "length in px"},
	"resolution": {0.01, 1, false, "factor"},
	"jpeg":       {1, 100, true, "quality"},
	"gamma":      {0.05, 20, false, "gamma"},
	"sharpen":    {0, 20, false, "σ in px"},
	"saltpepper": {0, 1, false, "rate"},
	"dead":       {0, 1, false, "rate"},
	"shift":      {-4096, 4096, true, "offset in px"},
	"shake":      {0, 4096, true, "amplitude in px"},
	"rotate":     {-180, 180, false, "angle in degrees"},
	"scale":      {0.1, 10, false, "factor"},
}

func parseCorruption(item string) (Corruption, error) {
	var c Corruption
	if item == "" {
		return c, fmt.Errorf("corrupt: empty step (two of '+' or ',' in a row, or one at an end?)")
	}
	parts := strings.Split(item, ":")
	c.Kind = parts[0]
	lim, ok := corruptRange[c.Kind]
	if !ok {
		return c, fmt.Errorf("corrupt %q: unknown kind %q, want one of %s", item, c.Kind, strings.Join(corruptKinds, ", "))
	}
	args := parts[1:]
	if len(args) == 0 || args[0] == "" {
		return c, fmt.Errorf("corrupt %q: want %s:VALUE (%s) or %s:s1..s5", item, c.Kind, lim.what, c.Kind)
	}
	// The trailing mode of shift and shake.
	if c.Kind == "shift" || c.Kind == "shake" {
		switch args[len(args)-1] {
		case "fill", "wrap", "edge":
			c.Mode = map[string]ShiftMode{"fill": ShiftFill, "wrap": ShiftWrap, "edge": ShiftEdge}[args[len(args)-1]]
			args = args[:len(args)-1]
		}
		if len(args) == 0 {
			return c, fmt.Errorf("corrupt %q: want %s:VALUE before the mode", item, c.Kind)
		}
	}
	number := func(s, what string, lo, hi float64, whole bool) (float64, error) {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || strings.ContainsAny(s, "xXpP_") {
			return 0, fmt.Errorf("corrupt %q: %s %q is not a number", item, what, s)
		}
		if v < lo || v > hi {
			return 0, fmt.Errorf("corrupt %q: %s %s is outside [%v,%v]", item, what, s, lo, hi)
		}
		if whole && v != math.Trunc(v) {
			return 0, fmt.Errorf("corrupt %q: %s %s is not a whole number", item, what, s)
		}
		return v, nil
	}
	if a := args[0]; len(a) >= 2 && a[0] == 's' {
		n, err := strconv.Atoi(a[1:])
		if err != nil || n < 1 || n > 5 {
			return c, fmt.Errorf("corrupt %q: severity %q: want s1..s5", item, a)
		}
		c.Level = n
		c.A = severityTable[c.Kind][n-1]
		if c.Kind == "shift" {
			c.B = c.A
		}
	} else {
		v, err := number(a, lim.what, lim.lo, lim.hi, lim.whole)
		if err != nil {
			return c, err
		}
		c.A = v
		if c.Kind == "shift" {
			c.B = v
		}
	}
	rest := args[1:]
	switch {
	case len(rest) == 0:
	case len(rest) == 1 && c.Kind == "motionblur":
		v, err := number(rest[0], "angle in degrees", -360, 360, false)
		if err != nil {
			return c, err
		}
		c.B = v
	case len(rest) == 1 && c.Kind == "shift" && c.Level == 0:
		v, err := number(rest[0], "offset in px", lim.lo, lim.hi, true)
		if err != nil {
			return c, err
		}
		c.B = v
	default:
		return c, fmt.Errorf("corrupt %q: too many parameters for %s (%s)", item, c.Kind, corruptUsage[c.Kind])
	}
	if c.A == 0 {
		c.A = 0 // no negative zero in the canonical spelling
	}
	if c.B == 0 {
		c.B = 0
	}
	return c, nil
}

var corruptUsage = map[string]string{
	"blur": "blur:S", "motionblur": "motionblur:L or motionblur:L:ANGLE", "resolution": "resolution:F",
	"jpeg": "jpeg:Q", "gamma": "gamma:G", "sharpen": "sharpen:S", "saltpepper": "saltpepper:R", "dead": "dead:R",
	"shift": "shift:DX, shift:DX:DY, with :fill, :wrap or :edge", "shake": "shake:A, with :fill, :wrap or :edge",
	"rotate": "rotate:DEGREES", "scale": "scale:S",
}

// ExpandCorrupt expands one item of a swept corruption axis into the
// canonical corruption lists it stands for, in the range syntax of the
// other axes:
//
//	none                     no corruption
//	KIND:sA:sB               severities A..B, e.g. blur:s1:s5
//	KIND:START:STOP:STEP     the first parameter from START to STOP by STEP,
//	                         e.g. blur:0:3:1 (values rounded to the decimals written)
//	any single corruption list, with steps joined by '+': blur:2+jpeg:40
//
// Identity values come back as "none".
func ExpandCorrupt(item string) ([]string, error) {
	item = strings.TrimSpace(item)
	one := strings.ReplaceAll(item, "+", ",")
	if c, err := CanonCorrupt(one); err == nil {
		return []string{c}, nil
	}
	parts := strings.Split(item, ":")
	if strings.Contains(item, "+") || len(parts) < 3 || len(parts) > 4 {
		_, err := CanonCorrupt(one)
		return nil, err
	}
	kind := parts[0]
	if _, ok := corruptRange[kind]; !ok {
		return nil, fmt.Errorf("corrupt %q: unknown kind %q, want one of %s", item, kind, strings.Join(corruptKinds, ", "))
	}
	if len(parts) == 3 && strings.HasPrefix(parts[1], "s") && strings.HasPrefix(parts[2], "s") {
		a, e1 := strconv.Atoi(parts[1][1:])
		b, e2 := strconv.Atoi(parts[2][1:])
		if e1 != nil || e2 != nil || a < 1 || b > 5 || b < a {
			return nil, fmt.Errorf("corrupt range %q: want %s:sA:sB with 1 ≤ A ≤ B ≤ 5", item, kind)
		}
		var out []string
		for n := a; n <= b; n++ {
			c, err := CanonCorrupt(kind + ":s" + strconv.Itoa(n))
			if err != nil {
				return nil, err
			}
			out = append(out, c)
		}
		return out, nil
	}
	if len(parts) != 4 {
		_, err := CanonCorrupt(one)
		return nil, fmt.Errorf("%v (or, for a range, %s:START:STOP:STEP or %s:sA:sB)", err, kind, kind)
	}
	start, e1 := strconv.ParseFloat(parts[1], 64)
	stop, e2 := strconv.ParseFloat(parts[2], 64)
	step, e3 := strconv.ParseFloat(parts[3], 64)
	if e1 != nil || e2 != nil || e3 != nil || math.IsNaN(start+stop+step) || math.IsInf(start+stop+step, 0) {
		return nil, fmt.Errorf("corrupt range %q: want %s:START:STOP:STEP with numbers", item, kind)
	}
	if step <= 0 {
		return nil, fmt.Errorf("corrupt range %q: step must be positive", item)
	}
	if stop < start {
		return nil, fmt.Errorf("corrupt range %q: yields no values (stop is below start)", item)
	}
	nf := math.Floor((stop-start)/step + 1e-9)
	if nf+1 > 1000 {
		return nil, fmt.Errorf("corrupt range %q: more than 1000 values", item)
	}
	d := 0
	for _, p := range parts[1:] {
		if i := strings.IndexByte(p, '.'); i >= 0 {
			d = max(d, len(p)-i-1)
		}
		if strings.ContainsAny(p, "eE") {
			d = 12
		}
	}
	d = min(d, 12)
	var out []string
	for i := 0; i <= int(nf); i++ {
		v := start + float64(i)*step
		p := math.Pow(10, float64(d))
		v = math.RoundToEven(v*p) / p
		c, err := CanonCorrupt(kind + ":" + strconv.FormatFloat(v, 'f', -1, 64))
		if err != nil {
			return nil, fmt.Errorf("corrupt range %q: %w", item, err)
		}
		out = append(out, c)
	}
	return out, nil
}

// corruptInverse says, for one corruption, how to undo it: the
// corruption list that inverts it, or "none (...)" with the reason, and
// whether the inverse is exact. Exact: shift with mode wrap (shift back).
// Approximate: shift and shake with fill or edge (the uncovered border is
// lost), rotate and scale (interpolation; the corners are lost), gamma
// (8-bit rounding). None: blur, motionblur, resolution, jpeg, sharpen
// (detail is removed), saltpepper and dead (the hit pixels are lost).
// Shake's offset differs per frame: each frame record holds it (Offset).
func corruptInverse(c Corruption) (inverse string, exact bool) {
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	switch c.Kind {
	case "shift":
		inv := Corruption{Kind: "shift", A: -c.A, B: -c.B, Mode: c.Mode}
		return inv.String(), c.Mode == ShiftWrap
	case "shake":
		return "shift:-DX:-DY:" + c.Mode.String() + " with (DX, DY) each frame's offset", c.Mode == ShiftWrap
	case "rotate":
		return "rotate:" + num(-c.A) + " (approximate: interpolated, corners lost)", false
	case "scale":
		return "scale:" + num(1/c.A) + " (approximate: interpolated, border lost)", false
	case "gamma":
		return "gamma:" + num(1/c.A) + " (approximate: 8-bit rounding)", false
	case "saltpepper", "dead":
		return "none (the hit pixels are lost)", false
	}
	return "none (detail is removed)", false
}

// CorruptNote is how a manifest describes one frame corruption of its
// spec and its inverse (see corruptInverse).
type CorruptNote struct {
	Step    string `json:"step"`
	Inverse string `json:"inverse"`
	Exact   bool   `json:"exact"`
}

// corruptNotes describes the corruptions of a spec.
func corruptNotes(s Spec) []CorruptNote {
	cs, err := ParseCorrupt(s.Corrupt)
	if err != nil {
		return nil
	}
	var out []CorruptNote
	for _, c := range cs {
		inv, exact := corruptInverse(c)
		out = append(out, CorruptNote{Step: c.String(), Inverse: inv, Exact: exact})
	}
	return out
}
