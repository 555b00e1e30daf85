package remote

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
	"unsafe"
)

// Header lines are flat JSON objects: string keys, and values that are
// strings, numbers, true, false, null or arrays of numbers (docs/
// policy-protocol.md, "Header lines"). The parser below reads exactly that
// subset with no allocation per line in steady state, which
// encoding/json cannot do; it also recognises the non-standard literals
// NaN, Infinity and -Infinity (as Python's json module writes them) so
// that a non-finite action is reported as such rather than as garbage.

// Value kinds of a header field.
const (
	kindString = 's'
	kindNumber = 'n'
	kindBool   = 'b'
	kindNull   = 'z'
	kindArray  = 'a'
)

// maxFields and maxNumbers bound one header line.
const (
	maxFields  = 64
	maxNumbers = 4096
)

type field struct {
	key  []byte // raw key bytes (escapes undecoded)
	kind byte
	raw  []byte // string contents (undecoded), number or literal text
	esc  bool   // string contains escapes
	lo   int    // array: range in header.nums
	hi   int
	num  float64 // number value
}

// header is one parsed header line. Its slices alias the line.
type header struct {
	fields []field
	nums   []float64
}

type parser struct {
	b []byte
	i int
}

var errHeader = errors.New("bad header")

func (p *parser) fail(format string, a ...any) error {
	return fmt.Errorf("%w: %s at byte %d", errHeader, fmt.Sprintf(format, a...), p.i)
}

func (p *parser) ws() {
	for p.i < len(p.b) {
		switch p.b[p.i] {
		case ' ', '\t', '\r', '\n':
			p.i++
		default:
			return
		}
	}
}

// parse reads line (without its final newline) into h, reusing h's slices.
func (h *header) parse(line []byte) error {
	h.fields = h.fields[:0]
	h.nums = h.nums[:0]
	p := parser{b: line}
	if !utf8.Valid(line) {
		return p.fail("header is not valid UTF-8")
	}
	p.ws()
	if p.i >= len(p.b) || p.b[p.i] != '{' {
		return p.fail("header is not a JSON object")
	}
	p.i++
	p.ws()
	if p.i < len(p.b) && p.b[p.i] == '}' {
		p.i++
	} else {
		for {
			p.ws()
			key, esc, err := p.str()
			if err != nil {
				return err
			}
			if esc {
				return p.fail("escaped characters in a key")
			}
			for k := range h.fields {
				if string(h.fields[k].key) == string(key) {
					return p.fail("key %q given twice", key)
				}
			}
			if len(h.fields) >= maxFields {
				return p.fail("more than %d keys", maxFields)
			}
			p.ws()
			if p.i >= len(p.b) || p.b[p.i] != ':' {
				return p.fail("missing ':' after key %q", key)
			}
			p.i++
			p.ws()
			f := field{key: key}
			if err := p.value(h, &f); err != nil {
				return err
			}
			h.fields = append(h.fields, f)
			p.ws()
			if p.i >= len(p.b) {
				return p.fail("unterminated object")
			}
			if p.b[p.i] == ',' {
				p.i++
				continue
			}
			if p.b[p.i] == '}' {
				p.i++
				break
			}
			return p.fail("want ',' or '}'")
		}
	}
	p.ws()
	if p.i != len(p.b) {
		return p.fail("bytes after the object")
	}
	return nil
}

// str reads a JSON string and returns its raw contents.
func (p *parser) str() ([]byte, bool, error) {
	if p.i >= len(p.b) || p.b[p.i] != '"' {
		return nil, false, p.fail("want a string")
	}
	p.i++
	start := p.i
	esc := false
	for p.i < len(p.b) {
		c := p.b[p.i]
		switch {
		case c == '"':
			s := p.b[start:p.i]
			p.i++
			return s, esc, nil
		case c == '\\':
			esc = true
			if p.i+1 >= len(p.b) {
				return nil, false, p.fail("unterminated string")
			}
			switch p.b[p.i+1] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
				p.i += 2
			case 'u':
				if p.i+6 > len(p.b) {
					return nil, false, p.fail("short \\u escape")
				}
				for _, h := range p.b[p.i+2 : p.i+6] {
					if !isHex(h) {
						return nil, false, p.fail("bad \\u escape")
					}
				}
				p.i += 6
			default:
				return nil, false, p.fail("bad escape")
			}
		case c < 0x20:
			return nil, false, p.fail("control character in a string")
		default:
			p.i++
		}
	}
	return nil, false, p.fail("unterminated string")
}

func isHex(c byte) bool {
	return '0' <= c && c <= '9' || 'a' <= c && c <= 'f' || 'A' <= c && c <= 'F'
}

func (p *parser) lit(s string) bool {
	if len(p.b)-p.i >= len(s) && string(p.b[p.i:p.i+len(s)]) == s {
		p.i += len(s)
		return true
	}
	return false
}

// number reads a JSON number, or NaN, Infinity, -Infinity.
func (p *parser) number() ([]byte, float64, error) {
	start := p.i
	switch {
	case p.lit("NaN"):
		return p.b[start:p.i], math.NaN(), nil
	case p.lit("Infinity"):
		return p.b[start:p.i], math.Inf(1), nil
	case p.lit("-Infinity"):
		return p.b[start:p.i], math.Inf(-1), nil
	}
	if p.i < len(p.b) && p.b[p.i] == '-' {
		p.i++
	}
	digits := func() int {
		n := 0
		for p.i < len(p.b) && p.b[p.i] >= '0' && p.b[p.i] <= '9' {
			p.i++
			n++
		}
		return n
	}
	if p.i < len(p.b) && p.b[p.i] == '0' {
		p.i++
	} else if digits() == 0 {
		return nil, 0, p.fail("want a value")
	}
	if p.i < len(p.b) && p.b[p.i] == '.' {
		p.i++
		if digits() == 0 {
			return nil, 0, p.fail("want digits after '.'")
		}
	}
	if p.i < len(p.b) && (p.b[p.i] == 'e' || p.b[p.i] == 'E') {
		p.i++
		if p.i < len(p.b) && (p.b[p.i] == '+' || p.b[p.i] == '-') {
			p.i++
		}
		if digits() == 0 {
			return nil, 0, p.fail("want digits in the exponent")
		}
	}
	raw := p.b[start:p.i]
	// The text is a valid JSON number: ParseFloat fails only by range,
	// giving ±Inf (too large) or 0 (too small), which the checks on
	// values then see.
	v, _ := strconv.ParseFloat(unsafe.String(unsafe.SliceData(raw), len(raw)), 64)
	return raw, v, nil
}

func (p *parser) value(h *header, f *field) error {
	if p.i >= len(p.b) {
		return p.fail("want a value")
	}
	switch c := p.b[p.i]; {
	case c == '"':
		s, esc, err := p.str()
		if err != nil {
			return err
		}
		f.kind, f.raw, f.esc = kindString, s, esc
	case c == 't' || c == 'f':
		start := p.i
		if !p.lit("true") && !p.lit("false") {
			return p.fail("want a value")
		}
		f.kind, f.raw = kindBool, p.b[start:p.i]
	case c == 'n':
		if !p.lit("null") {
			return p.fail("want a value")
		}
		f.kind = kindNull
	case c == '[':
		p.i++
		f.kind, f.lo = kindArray, len(h.nums)
		p.ws()
		if p.i < len(p.b) && p.b[p.i] == ']' {
			p.i++
		} else {
			for {
				p.ws()
				_, v, err := p.number()
				if err != nil {
					return err
				}
				if len(h.nums) >= maxNumbers {
					return p.fail("more than %d numbers", maxNumbers)
				}
				h.nums = append(h.nums, v)
				p.ws()
				if p.i < len(p.b) && p.b[p.i] == ',' {
					p.i++
					continue
				}
				if p.i < len(p.b) && p.b[p.i] == ']' {
					p.i++
					break
				}
				return p.fail("want ',' or ']' in an array of numbers")
			}
		}
		f.hi = len(h.nums)
	case c == '{':
		return p.fail("nested objects are not allowed in a header")
	default:
		raw, v, err := p.number()
		if err != nil {
			return err
		}
		f.kind, f.raw, f.num = kindNumber, raw, v
	}
	return nil
}

// get returns the named field, or nil.
func (h *header) get(key string) *field {
	for i := range h.fields {
		if string(h.fields[i].key) == key {
			return &h.fields[i]
		}
	}
	return nil
}

// isMsg reports whether the "msg" field is the string m.
func (h *header) isMsg(m string) bool {
	f := h.get("msg")
	return f != nil && f.kind == kindString && string(f.raw) == m
}

// msg returns the "msg" field (allocates; for error paths).
func (h *header) msg() string {
	s, _ := h.str("msg")
	return s
}

// str returns a string field decoded (allocates).
func (h *header) str(key string) (string, bool) {
	f := h.get(key)
	if f == nil || f.kind != kindString {
		return "", false
	}
	if !f.esc {
		return string(f.raw), true
	}
	var s string
	q := make([]byte, 0, len(f.raw)+2)
	q = append(append(append(q, '"'), f.raw...), '"')
	if err := json.Unmarshal(q, &s); err != nil {
		return string(f.raw), true
	}
	return s, true
}

// integer returns an integer field. ok is false if the key is absent;
// err is set if it is present but not an integer in [lo, hi].
func (h *header) integer(key string, lo, hi int64) (v int64, ok bool, err error) {
	f := h.get(key)
	if f == nil || f.kind == kindNull {
		return 0, false, nil
	}
	if f.kind != kindNumber {
		return 0, true, fmt.Errorf("%q is not a number", key)
	}
	n, perr := strconv.ParseInt(unsafe.String(unsafe.SliceData(f.raw), len(f.raw)), 10, 64)
	if perr != nil || n < lo || n > hi {
		return 0, true, fmt.Errorf("%q = %s: want an integer in %d..%d", key, f.raw, lo, hi)
	}
	return n, true, nil
}

// unsigned returns a uint64 field (seeds use the whole range).
func (h *header) unsigned(key string) (v uint64, ok bool, err error) {
	f := h.get(key)
	if f == nil || f.kind == kindNull {
		return 0, false, nil
	}
	n, perr := strconv.ParseUint(unsafe.String(unsafe.SliceData(f.raw), len(f.raw)), 10, 64)
	if f.kind != kindNumber || perr != nil {
		return 0, true, fmt.Errorf("%q = %s: want an unsigned integer", key, f.raw)
	}
	return n, true, nil
}

// floats returns an array-of-numbers field (aliasing the header).
func (h *header) floats(key string) (v []float64, ok bool, err error) {
	f := h.get(key)
	if f == nil || f.kind == kindNull {
		return nil, false, nil
	}
	if f.kind != kindArray {
		return nil, true, fmt.Errorf("%q is not an array of numbers", key)
	}
	return h.nums[f.lo:f.hi], true, nil
}
