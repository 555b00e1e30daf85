package study

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// maxRangeValues caps how many values one range may expand to, so that a
// typing slip such as 0:1:0.000001 is an error rather than a study of a
// million cells.
const maxRangeValues = 10000

// ExpandList expands a comma-separated list in tilebench's range syntax into
// the individual values, each in canonical spelling. An item is one of
//
//	VALUE                 a number or a word: 8, 0.25, none, full
//	START:STOP:STEP       numbers from START to STOP inclusive by STEP
//	KIND                  a word with no parameter: none, full
//	KIND:VALUE            a word with one parameter: random:0.3, local:1
//	KIND:START:STOP:STEP  a word with a range of parameters: random:0:0.9:0.1
//	mask:FILE             a mask file, taken whole (no range, no commas)
//
// A range gives START, START+STEP, ... up to and including STOP. The float
// rule: with d the largest number of digits after the decimal point among
// START, STOP and STEP as written (12 for numbers in exponent form), the
// count is n = floor((STOP−START)/STEP + 1e-9) + 1 and the i-th value is
// START + i·STEP rounded to d decimals, so random:0:0.9:0.1 gives exactly
// 0, 0.1, ..., 0.9 (ten values) and 0:1:0.3 gives 0, 0.3, 0.6, 0.9.
// STEP must be positive; a range whose STOP is below its START yields no
// values, which is an error, as is an empty item or an empty list.
func ExpandList(s string) ([]string, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, errors.New("empty list: give at least one value")
	}
	var out []string
	for _, item := range strings.Split(s, ",") {
		vals, err := expandItem(item)
		if err != nil {
			return nil, err
		}
		out = append(out, vals...)
		if len(out) > maxRangeValues {
			return nil, fmt.Errorf("list %q: more than %d values", s, maxRangeValues)
		}
	}
	return out, nil
}

// expandItem expands one item of a list (see ExpandList).
func expandItem(item string) ([]string, error) {
	item = strings.TrimSpace(item)
	if item == "" {
		return nil, errors.New("empty item in list (two commas in a row, or a trailing comma?)")
	}
	if strings.HasPrefix(item, "mask:") {
		if len(item) == len("mask:") {
			return nil, fmt.Errorf("item %q: mask needs a file name, mask:FILE.png", item)
		}
		return []string{item}, nil
	}
	parts := strings.Split(item, ":")
	kind := ""
	if _, err := parseNumber(parts[0]); err != nil {
		kind = strings.ToLower(strings.TrimSpace(parts[0]))
		if !isWord(kind) {
			return nil, fmt.Errorf("item %q: %q is neither a number nor a word", item, parts[0])
		}
		parts = parts[1:]
	}
	prefix := ""
	if kind != "" {
		prefix = kind + ":"
	}
	switch len(parts) {
	case 0:
		return []string{kind}, nil
	case 1:
		v, err := parseNumber(parts[0])
		if err != nil {
			return nil, fmt.Errorf("item %q: %w", item, err)
		}
		return []string{prefix + formatNumber(v, decimals(parts[0]))}, nil
	case 3:
		vals, err := expandRange(parts[0], parts[1], parts[2])
		if err != nil {
			return nil, fmt.Errorf("range %q: %w", item, err)
		}
		out := make([]string, len(vals))
		for i, v := range vals {
			out[i] = prefix + v
		}
		return out, nil
	}
	return nil, fmt.Errorf("item %q: want VALUE, START:STOP:STEP, KIND, KIND:VALUE or KIND:START:STOP:STEP", item)
}

func expandRange(a, b, c string) ([]string, error) {
	start, err := parseNumber(a)
	if err != nil {
		return nil, fmt.Errorf("start: %w", err)
	}
	stop, err := parseNumber(b)
	if err != nil {
		return nil, fmt.Errorf("stop: %w", err)
	}
	step, err := parseNumber(c)
	if err != nil {
		return nil, fmt.Errorf("step: %w", err)
	}
	if step <= 0 {
		return nil, fmt.Errorf("step %s: must be positive", strings.TrimSpace(c))
	}
	if stop < start {
		return nil, fmt.Errorf("yields no values (stop %s is below start %s)", strings.TrimSpace(b), strings.TrimSpace(a))
	}
	nf := math.Floor((stop-start)/step + 1e-9)
	if nf+1 > maxRangeValues || math.IsInf(nf, 0) || math.IsNaN(nf) {
		return nil, fmt.Errorf("yields more than %d values", maxRangeValues)
	}
	d := max(decimals(a), decimals(b), decimals(c))
	n := int(nf) + 1
	out := make([]string, n)
	for i := range n {
		out[i] = formatNumber(start+float64(i)*step, d)
	}
	return out, nil
}

// parseNumber reads a finite decimal number.
func parseNumber(s string) (float64, error) {
	s = strings.TrimSpace(s)
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%q is not a finite number", s)
	}
	if strings.ContainsAny(s, "xXpP_") || strings.HasPrefix(strings.ToLower(strings.TrimLeft(s, "+-")), "in") {
		return 0, fmt.Errorf("%q is not a plain decimal number", s)
	}
	return v, nil
}

// decimals counts the digits after the decimal point of a number as
// written; 12 for numbers in exponent form.
func decimals(s string) int {
	s = strings.TrimSpace(s)
	if strings.ContainsAny(s, "eE") {
		return 12
	}
	if i := strings.IndexByte(s, '.'); i >= 0 {
		return len(s) - i - 1
	}
	return 0
}

// formatNumber rounds v to d decimals and prints it in its shortest form
// ("0.1", "10", "-0.25"); negative zero prints as "0".
func formatNumber(v float64, d int) string {
	if d > 12 {
		d = 12
	}
	p := math.Pow(10, float64(d))
	r := math.RoundToEven(v*p) / p
	if math.IsInf(r, 0) || math.IsNaN(r) {
		r = v
	}
	if r == 0 {
		r = 0
	}
	return strconv.FormatFloat(r, 'f', -1, 64)
}

func isWord(s string) bool {
	if s == "" {
		return false
	}
	for _, r := range s {
		if !(r >= 'a' && r <= 'z' || r >= '0' && r <= '9' || r == '-' || r == '_' || r == '+') {
			return false
		}
	}
	return s[0] >= 'a' && s[0] <= 'z'
}
