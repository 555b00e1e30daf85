package patch

import (
	"fmt"
	"math"
	"math/big"
	"strconv"
	"strings"

	"github.com/google/shlex"
)

type scrambleKind int

const (
	scrNone scrambleKind = iota
	scrFull
	scrPartial
	scrLocal
)

type occKind int

const (
	occNone occKind = iota
	occRandom
	occBlock
	occBands
	occSweep
	occMask
)

type fillKind int

const (
	fillBlack fillKind = iota
	fillMean
	fillNoise
	fillDrop
)

// maxExtra bounds NoiseTokens and Duplicates, so that a typo cannot ask
// for gigabytes of token buffers.
const maxExtra = 1 << 16

// parsedSpec is a Spec with its strings read.
type parsedSpec struct {
	scr   scrambleKind
	frac  *big.Rat // partial:F
	local int      // local:K

	occ      occKind
	ratio    *big.Rat // R of random/block/bands/sweep
	bandsDir byte     // 0 (drawn per sequence), 'h' or 'v'
	period   int      // sweep: steps per one-cell move (default 1)
	maskPath string

	fill fillKind

	corr []Corruption // frame corruptions, in order
}

// parseRatio reads a plain decimal number ("0.25", ".5", "1") exactly and
// checks that it lies in [0,1]. No exponents, so that the exact reading
// stays cheap.
func parseRatio(s, what string) (*big.Rat, error) {
	body := strings.TrimPrefix(strings.TrimPrefix(s, "-"), "+")
	if len(s) > 40 || body == "" || body == "." || strings.Count(body, ".") > 1 || strings.Trim(body, "0123456789.") != "" {
		return nil, fmt.Errorf("%s %q: not a decimal number", what, s)
	}
	r, ok := new(big.Rat).SetString(s)
	if !ok {
		return nil, fmt.Errorf("%s %q: not a decimal number", what, s)
	}
	if r.Sign() < 0 || r.Cmp(big.NewRat(1, 1)) > 0 {
		return nil, fmt.Errorf("%s %s is outside [0,1]", what, s)
	}
	return r, nil
}

// countOf returns round-half-even(r·n), computed exactly.
func countOf(r *big.Rat, n int) int {
	x := new(big.Rat).Mul(r, big.NewRat(int64(n), 1))
	num, den := x.Num(), x.Denom()
	q, m := new(big.Int).QuoRem(num, den, new(big.Int)) // x ≥ 0, so q = floor
	twice := new(big.Int).Lsh(m, 1)
	switch twice.Cmp(den) {
	case 1:
		q.Add(q, big.NewInt(1))
	case 0:
		if q.Bit(0) == 1 {
			q.Add(q, big.NewInt(1))
		}
	}
	return int(q.Int64())
}

func (s Spec) parse() (parsedSpec, error) {
	var p parsedSpec
	kind, arg, hasArg := strings.Cut(s.Scramble, ":")
	switch kind {
	case "", "none":
		p.scr = scrNone
	case "full":
		p.scr = scrFull
	case "partial":
		p.scr = scrPartial
		if !hasArg {
			return p, fmt.Errorf("scramble %q: want partial:F with F in [0,1]", s.Scramble)
		}
		f, err := parseRatio(arg, "scramble partial fraction")
		if err != nil {
			return p, err
		}
		p.frac = f
	case "local":
		p.scr = scrLocal
		k, err := strconv.Atoi(arg)
		if !hasArg || err != nil || k < 0 || k > math.MaxInt16 {
			return p, fmt.Errorf("scramble %q: want local:K with K a whole number of cells ≥ 0", s.Scramble)
		}
		p.local = k
	default:
		return p, fmt.Errorf("scramble %q: want none, full, partial:F or local:K", s.Scramble)
	}
	if (p.scr == scrNone || p.scr == scrFull) && hasArg {
		return p, fmt.Errorf("scramble %q: %s takes no argument", s.Scramble, kind)
	}
	if s.Every < 0 {
		return p, fmt.Errorf("scramble schedule every %d: want 0 (once per sequence) or T > 0 steps", s.Every)
	}

	kind, arg, hasArg = strings.Cut(s.Occlude, ":")
	switch kind {
	case "", "none":
		if hasArg {
			return p, fmt.Errorf("occlude %q: none takes no argument", s.Occlude)
		}
	case "random", "block", "bands", "sweep":
		p.occ = map[string]occKind{"random": occRandom, "block": occBlock, "bands": occBands, "sweep": occSweep}[kind]
		r, extra, hasExtra := strings.Cut(arg, ":")
		if !hasArg {
			return p, fmt.Errorf("occlude %q: want %s:R with R in [0,1]", s.Occlude, kind)
		}
		ratio, err := parseRatio(r, "occlude "+kind+" ratio")
		if err != nil {
			return p, err
		}
		p.ratio = ratio
		switch {
		case !hasExtra:
		case p.occ == occBands && (extra == "h" || extra == "v"):
			p.bandsDir = extra[0]
		case p.occ == occSweep:
			n, err := strconv.Atoi(extra)
			if err != nil || n < 1 {
				return p, fmt.Errorf("occlude %q: want sweep:R:P with P ≥ 1 steps per cell", s.Occlude)
			}
			p.period = n
		case p.occ == occBands:
			return p, fmt.Errorf("occlude %q: want bands:R, bands:R:h or bands:R:v", s.Occlude)
		default:
			return p, fmt.Errorf("occlude %q: want %s:R with R in [0,1]", s.Occlude, kind)
		}
		if p.occ == occSweep && p.period == 0 {
			p.period = 1
		}
	case "mask":
		if arg == "" {
			return p, fmt.Errorf("occlude %q: want mask:FILE.png", s.Occlude)
		}
		p.occ, p.maskPath = occMask, arg
	default:
		return p, fmt.Errorf("occlude %q: want none, random:R, block:R, bands:R, sweep:R or mask:FILE.png", s.Occlude)
	}

	switch s.Fill {
	case "", "black":
		p.fill = fillBlack
	case "mean":
		p.fill = fillMean
	case "noise":
		p.fill = fillNoise
	case "drop":
		p.fill = fillDrop
	default:
		return p, fmt.Errorf("fill %q: want black, mean, noise or drop", s.Fill)
	}
	if s.NoiseTokens < 0 || s.NoiseTokens > maxExtra {
		return p, fmt.Errorf("noise tokens %d: want 0..%d", s.NoiseTokens, maxExtra)
	}
	if s.Duplicates < 0 || s.Duplicates > maxExtra {
		return p, fmt.Errorf("duplicates %d: want 0..%d", s.Duplicates, maxExtra)
	}
	inRange := func(v, lo, hi float64, what string) error {
		if math.IsNaN(v) || v < lo || v > hi {
			return fmt.Errorf("%s %v: want a number in [%v,%v]", what, v, lo, hi)
		}
		return nil
	}
	if err := inRange(s.Brightness, -1, 1, "brightness"); err != nil {
		return p, err
	}
	if err := inRange(s.Contrast, 0, 10, "contrast"); err != nil {
		return p, err
	}
	for c, v := range s.Shift {
		if err := inRange(v, -1, 1, "shift of channel "+strconv.Itoa(c)); err != nil {
			return p, err
		}
	}
	if err := inRange(s.PixelNoise, 0, 1, "pixel noise"); err != nil {
		return p, err
	}
	corr, err := ParseCorrupt(s.Corrupt)
	if err != nil {
		return p, err
	}
	p.corr = corr
	return p, nil
}

// Check reports the first problem with s that needs no grid (bad kinds,
// ratios outside [0,1], bad numbers), as a one-line error.
func (s Spec) Check() error {
	_, err := s.parse()
	return err
}

// IsIdentity reports whether s changes nothing.
func (s Spec) IsIdentity() bool { return s.String() == "none" }

// String writes s as one line of key=value words, in a fixed order,
// leaving out fields at their zero value, e.g.
//
//	scramble=full every=10 occlude=random:0.25 fill=drop noise-tokens=4
//
// The identity spec is "none". ParseSpec reads it back. Values holding
// spaces or quotes are double-quoted.
func (s Spec) String() string {
	var b strings.Builder
	word := func(k, v string) {
		if b.Len() > 0 {
			b.WriteByte(' ')
		}
		b.WriteString(k)
		b.WriteByte('=')
		b.WriteString(quoteWord(v))
	}
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	if s.Scramble != "" && s.Scramble != "none" {
		word("scramble", s.Scramble)
	}
	if s.Every != 0 {
		word("every", strconv.Itoa(s.Every))
	}
	if s.Rotate {
		word("rotate", "true")
	}
	if s.Flip {
		word("flip", "true")
	}
	if s.Occlude != "" && s.Occlude != "none" {
		word("occlude", s.Occlude)
	}
	if s.Fill != "" && s.Fill != "black" {
		word("fill", s.Fill)
	}
	if s.NoiseTokens != 0 {
		word("noise-tokens", strconv.Itoa(s.NoiseTokens))
	}
	if s.Duplicates != 0 {
		word("duplicates", strconv.Itoa(s.Duplicates))
	}
	if s.Brightness != 0 {
		word("brightness", num(s.Brightness))
	}
	if s.Contrast != 0 {
		word("contrast", num(s.Contrast))
	}
	if s.Shift != [3]float64{} {
		word("shift", num(s.Shift[0])+","+num(s.Shift[1])+","+num(s.Shift[2]))
	}
	if s.PixelNoise != 0 {
		word("pixel-noise", num(s.PixelNoise))
	}
	if s.Corrupt != "" && s.Corrupt != "none" {
		word("corrupt", s.Corrupt)
	}
	if b.Len() == 0 {
		return "none"
	}
	return b.String()
}

// quoteWord double-quotes v (escaping \ and ") when shlex would not read
// it back as one word.
func quoteWord(v string) string {
	if v != "" && !strings.ContainsAny(v, " \t\r\n\"'\\#") {
		return v
	}
	var b strings.Builder
	b.WriteByte('"')
	for _, r := range v {
		if r == '"' || r == '\\' {
			b.WriteByte('\\')
		}
		b.WriteRune(r)
	}
	b.WriteByte('"')
	return b.String()
}

// ParseSpec reads a spec written by Spec.String ("none", or key=value
// words: scramble, every, rotate, flip, occlude, fill, noise-tokens,
// duplicates, brightness, contrast, shift=R,G,B, pixel-noise, corrupt) and checks
// it. A bare "rotate" or "flip" means true.
func ParseSpec(line string) (Spec, error) {
	var s Spec
	words, err := shlex.Split(line)
	if err != nil {
		return s, fmt.Errorf("transform spec %q: %v", line, err)
	}
	if len(words) == 1 && words[0] == "none" {
		return s, nil
	}
	seen := map[string]bool{}
	for _, w := range words {
		k, v, hasV := strings.Cut(w, "=")
		if seen[k] {
			return s, fmt.Errorf("transform spec: %s given twice", k)
		}
		seen[k] = true
		if !hasV && k != "rotate" && k != "flip" {
			return s, fmt.Errorf("transform spec: %q is not key=value", w)
		}
		integer := func() (int, error) {
			n, err := strconv.Atoi(v)
			if err != nil {
				return 0, fmt.Errorf("transform spec: %s=%q is not a whole number", k, v)
			}
			return n, nil
		}
		float := func(v string) (float64, error) {
			f, err := strconv.ParseFloat(v, 64)
			if err != nil || math.IsInf(f, 0) || math.IsNaN(f) {
				return 0, fmt.Errorf("transform spec: %s=%q is not a number", k, v)
			}
			return f, nil
		}
		boolean := func() (bool, error) {
			if !hasV {
				return true, nil
			}
			b, err := strconv.ParseBool(v)
			if err != nil {
				return false, fmt.Errorf("transform spec: %s=%q is not true or false", k, v)
			}
			return b, nil
		}
		switch k {
		case "scramble":
			s.Scramble = v
		case "every":
			s.Every, err = integer()
		case "rotate":
			s.Rotate, err = boolean()
		case "flip":
			s.Flip, err = boolean()
		case "occlude":
			s.Occlude = v
		case "fill":
			s.Fill = v
		case "noise-tokens":
			s.NoiseTokens, err = integer()
		case "duplicates":
			s.Duplicates, err = integer()
		case "brightness":
			s.Brightness, err = float(v)
		case "contrast":
			s.Contrast, err = float(v)
		case "pixel-noise":
			s.PixelNoise, err = float(v)
		case "shift":
			s.Shift, err = ParseShift(v)
		case "corrupt":
			s.Corrupt = v
		default:
			return s, fmt.Errorf("transform spec: unknown key %q", k)
		}
		if err != nil {
			return s, err
		}
	}
	return s, s.Check()
}

// ParseShift reads a per-channel colour shift "R,G,B" (or one number for
// all three channels), each in [-1,1].
func ParseShift(v string) ([3]float64, error) {
	var sh [3]float64
	parts := strings.Split(v, ",")
	if len(parts) != 1 && len(parts) != 3 {
		return sh, fmt.Errorf("shift %q: want R,G,B or one number", v)
	}
	for i, p := range parts {
		f, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || math.IsNaN(f) || f < -1 || f > 1 {
			return sh, fmt.Errorf("shift %q: each part must be a number in [-1,1]", v)
		}
		sh[i] = f
	}
	if len(parts) == 1 {
		sh[1], sh[2] = sh[0], sh[0]
	}
	return sh, nil
}
