// Package weights reads and writes policy weights as safetensors files,
// following the format's public description: an 8-byte little-endian
// header length, a JSON header that maps each tensor name to its dtype,
// shape and byte offsets (plus an optional "__metadata__" map of strings),
// then the raw little-endian tensor bytes.
//
// tilebench writes F32 tensors only. It reads F32, and converts F64, F16
// and BF16 tensors to float32; other dtypes are refused. Every malformed
// file is refused with a one-line error naming the problem. The layout and
// the metadata keys tilebench uses are described in docs/weights-format.md.
package weights

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"
	"unicode/utf8"

	"tilebench/internal/atomicfile"
)

// Limits enforced by Decode and ReadFile before anything is allocated.
const (
	// MaxHeader is the largest JSON header accepted, in bytes (16 MiB).
	MaxHeader = 16 << 20
	// MaxFile is the largest file ReadFile accepts, in bytes (4 GiB).
	MaxFile = 4 << 30
	// MaxTensors is the largest number of tensors in one file.
	MaxTensors = 1 << 16
	// MaxRank is the largest number of dimensions of one tensor.
	MaxRank = 16
)

// MetadataKey is the reserved header entry that holds the string map.
const MetadataKey = "__metadata__"

// ErrMalformed is wrapped by every error Decode returns for a file that
// does not follow the format.
var ErrMalformed = errors.New("malformed safetensors file")

// Tensor is one named array of float32 values in row-major order.
type Tensor struct {
	// Name is unique within a file and must not be "__metadata__".
	Name string
	// Shape gives the size of each dimension; the empty shape is a scalar.
	Shape []int
	// Data holds the product of Shape values.
	Data []float32
}

// File is the content of one weights file.
type File struct {
	// Tensors in the order they are stored (Encode keeps this order).
	Tensors []Tensor
	// Metadata is the header's "__metadata__" map (nil if absent).
	Metadata map[string]string
}

// Elements returns the number of values a shape holds (1 for a scalar),
// or -1 if a dimension is negative or the product overflows.
func Elements(shape []int) int {
	n := 1
	for _, d := range shape {
		if d < 0 {
			return -1
		}
		if d != 0 && n > math.MaxInt32/d {
			return -1
		}
		n *= d
	}
	return n
}

// Add appends a tensor holding a copy of data.
func (f *File) Add(name string, shape []int, data []float32) {
	f.Tensors = append(f.Tensors, Tensor{
		Name:  name,
		Shape: append([]int(nil), shape...),
		Data:  append([]float32(nil), data...),
	})
}

// SetMeta sets one metadata entry, creating the map if needed.
func (f *File) SetMeta(key, value string) {
	if f.Metadata == nil {
		f.Metadata = map[string]string{}
	}
	f.Metadata[key] = value
}

// Lookup returns the named tensor, or an error naming the missing tensor.
func (f *File) Lookup(name string) (*Tensor, error) {
	for i := range f.Tensors {
		if f.Tensors[i].Name == name {
			return &f.Tensors[i], nil
		}
	}
	return nil, fmt.Errorf("no tensor %q in weights file", name)
}

// Want returns the data of the named tensor after checking that its shape
// is exactly shape; the error names the tensor and both shapes.
func (f *File) Want(name string, shape ...int) ([]float32, error) {
	t, err := f.Lookup(name)
	if err != nil {
		return nil, err
	}
	if !equalShape(t.Shape, shape) {
		return nil, fmt.Errorf("tensor %q has shape %v, want %v", name, t.Shape, shape)
	}
	return t.Data, nil
}

// Meta returns a metadata value, or an error naming the missing key.
func (f *File) Meta(key string) (string, error) {
	v, ok := f.Metadata[key]
	if !ok {
		return "", fmt.Errorf("weights metadata has no %q", key)
	}
	return v, nil
}

// MetaInt returns a metadata value parsed as a decimal integer.
func (f *File) MetaInt(key string) (int, error) {
	s, err := f.Meta(key)
	if err != nil {
		return 0, err
	}
	v, err := strconv.Atoi(s)
	if err != nil {
		return 0, fmt.Errorf("weights metadata %q = %q: not an integer", key, s)
	}
	return v, nil
}

// MetaFloat returns a metadata value parsed as a finite float.
func (f *File) MetaFloat(key string) (float64, error) {
	s, err := f.Meta(key)
	if err != nil {
		return 0, err
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("weights metadata %q = %q: not a finite number", key, s)
	}
	return v, nil
}

func equalShape(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// check validates f before writing.
func (f *File) check() error {
	if len(f.Tensors) > MaxTensors {
		return fmt.Errorf("%d tensors, at most %d", len(f.Tensors), MaxTensors)
	}
	seen := make(map[string]bool, len(f.Tensors))
	for i := range f.Tensors {
		t := &f.Tensors[i]
		if t.Name == "" || t.Name == MetadataKey || !utf8.ValidString(t.Name) {
			return fmt.Errorf("tensor %d: bad name %q", i, t.Name)
		}
		if seen[t.Name] {
			return fmt.Errorf("duplicate tensor name %q", t.Name)
		}
		seen[t.Name] = true
		if len(t.Shape) > MaxRank {
			return fmt.Errorf("tensor %q: rank %d, at most %d", t.Name, len(t.Shape), MaxRank)
		}
		n := Elements(t.Shape)
		if n < 0 {
			return fmt.Errorf("tensor %q: bad shape %v", t.Name, t.Shape)
		}
		if n != len(t.Data) {
			return fmt.Errorf("tensor %q: shape %v holds %d values, have %d", t.Name, t.Shape, n, len(t.Data))
		}
		for j, v := range t.Data {
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return fmt.Errorf("tensor %q: value %d is %v", t.Name, j, v)
			}
		}
	}
	for k, v := range f.Metadata {
		if !utf8.ValidString(k) || !utf8.ValidString(v) {
			return fmt.Errorf("metadata %q: not valid UTF-8", k)
		}
	}
	return nil
}

// Encode writes f in safetensors form: tensors as F32 in the order of
// f.Tensors, the metadata first in the header with its keys sorted, and
// the header padded with spaces so that the data starts 8-byte aligned.
// It refuses names that are empty, duplicated or reserved, shapes that do
// not match the data, and non-finite values.
func Encode(w io.Writer, f *File) error {
	if err := f.check(); err != nil {
		return fmt.Errorf("encode weights: %w", err)
	}
	var h bytes.Buffer
	h.WriteByte('{')
	first := true
	if len(f.Metadata) > 0 {
		keys := make([]string, 0, len(f.Metadata))
		for k := range f.Metadata {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		h.WriteString(quote(MetadataKey))
		h.WriteString(":{")
		for i, k := range keys {
			if i > 0 {
				h.WriteByte(',')
			}
			h.WriteString(quote(k))
			h.WriteByte(':')
			h.WriteString(quote(f.Metadata[k]))
		}
		h.WriteByte('}')
		first = false
	}
	off := 0
	for i := range f.Tensors {
		t := &f.Tensors[i]
		if !first {
			h.WriteByte(',')
		}
		first = false
		end := off + 4*len(t.Data)
		h.WriteString(quote(t.Name))
		h.WriteString(`:{"dtype":"F32","shape":[`)
		for j, d := range t.Shape {
			if j > 0 {
				h.WriteByte(',')
			}
			h.WriteString(strconv.Itoa(d))
		}
		fmt.Fprintf(&h, `],"data_offsets":[%d,%d]}`, off, end)
		off = end
	}
	h.WriteByte('}')
	for (8+h.Len())%8 != 0 {
		h.WriteByte(' ')
	}
	if h.Len() > MaxHeader {
		return fmt.Errorf("encode weights: header of %d bytes exceeds %d", h.Len(), MaxHeader)
	}
	var lenb [8]byte
	binary.LittleEndian.PutUint64(lenb[:], uint64(h.Len()))
	if _, err := w.Write(lenb[:]); err != nil {
		return fmt.Errorf("encode weights: %w", err)
	}
	if _, err := w.Write(h.Bytes()); err != nil {
		return fmt.Errorf("encode weights: %w", err)
	}
	buf := make([]byte, 0, 64<<10)
	for i := range f.Tensors {
		for _, v := range f.Tensors[i].Data {
			buf = binary.LittleEndian.AppendUint32(buf, math.Float32bits(v))
			if len(buf) == cap(buf) {
				if _, err := w.Write(buf); err != nil {
					return fmt.Errorf("encode weights: %w", err)
				}
				buf = buf[:0]
			}
		}
	}
	if len(buf) > 0 {
		if _, err := w.Write(buf); err != nil {
			return fmt.Errorf("encode weights: %w", err)
		}
	}
	return nil
}

// quote returns s as a JSON string.
func quote(s string) string {
	b, _ := json.Marshal(s) // a string always marshals
	return string(b)
}

// WriteFile writes f to path atomically: a failure leaves no file behind
// and an existing file untouched.
func WriteFile(path string, f *File) error {
	if err := f.check(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	return atomicfile.Write(path, func(w io.Writer) error { return Encode(w, f) })
}

// ReadFile reads and decodes the weights file at path. It checks the
// file's size and header length before reading the whole file.
func ReadFile(path string) (*File, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read weights: %w", err)
	}
	defer fh.Close()
	st, err := fh.Stat()
	if err != nil {
		return nil, fmt.Errorf("read weights %s: %w", path, err)
	}
	if !st.Mode().IsRegular() {
		return nil, fmt.Errorf("read weights %s: not a regular file", path)
	}
	if st.Size() > MaxFile {
		return nil, fmt.Errorf("read weights %s: %w: file of %d bytes exceeds %d", path, ErrMalformed, st.Size(), int64(MaxFile))
	}
	if st.Size() >= 8 {
		// Check the header length before reading the rest.
		var lenb [8]byte
		if _, err := io.ReadFull(fh, lenb[:]); err != nil {
			return nil, fmt.Errorf("read weights %s: %w", path, err)
		}
		if err := checkHeaderLen(binary.LittleEndian.Uint64(lenb[:]), st.Size()-8); err != nil {
			return nil, fmt.Errorf("read weights %s: %w", path, err)
		}
		if _, err := fh.Seek(0, io.SeekStart); err != nil {
			return nil, fmt.Errorf("read weights %s: %w", path, err)
		}
	}
	data := make([]byte, st.Size())
	if _, err := io.ReadFull(fh, data); err != nil {
		return nil, fmt.Errorf("read weights %s: %w", path, err)
	}
	f, err := Decode(data)
	if err != nil {
		return nil, fmt.Errorf("read weights %s: %w", path, err)
	}
	return f, nil
}

// dtypeSize gives the byte size of the dtypes Decode converts.
var dtypeSize = map[string]int{"F32": 4, "F64": 8, "F16": 2, "BF16": 2}

// knownDtypes are the other dtypes of the format, refused by name.
var knownDtypes = map[string]bool{
	"BOOL": true, "U8": true, "I8": true, "I16": true, "U16": true, "I32": true,
	"U32": true, "I64": true, "U64": true, "F8_E4M3": true, "F8_E5M2": true,
}

type entry struct {
	name  string
	dtype string
	shape []int
	begin int
	end   int
}

func malformed(format string, a ...any) error {
	return fmt.Errorf("%w: %s", ErrMalformed, fmt.Sprintf(format, a...))
}

// Decode parses a whole safetensors file held in data. It refuses, with an
// error wrapping ErrMalformed: a short file; a header length beyond
// MaxHeader or the file; a header that is not one JSON object (after
// trailing spaces are removed), is not UTF-8, or repeats a name; unknown
// fields; dtypes other than F32, F64, F16 and BF16; shapes whose size
// times the dtype size differs from the offsets' span; offsets out of
// range, overlapping or leaving gaps (the data must be covered exactly);
// and non-finite values.
func Decode(data []byte) (*File, error) {
	if len(data) < 8 {
		return nil, malformed("%d bytes, shorter than the 8-byte header length", len(data))
	}
	hlen := binary.LittleEndian.Uint64(data[:8])
	if err := checkHeaderLen(hlen, int64(len(data)-8)); err != nil {
		return nil, err
	}
	header := data[8 : 8+hlen]
	body := data[8+hlen:]
	if !utf8.Valid(header) {
		return nil, malformed("header is not valid UTF-8")
	}
	entries, meta, err := parseHeader(header)
	if err != nil {
		return nil, err
	}
	// Offsets must tile the body exactly.
	order := make([]int, len(entries))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool {
		ea, eb := &entries[order[a]], &entries[order[b]]
		if ea.begin != eb.begin {
			return ea.begin < eb.begin
		}
		return ea.end < eb.end
	})
	pos := 0
	for _, i := range order {
		e := &entries[i]
		if e.begin < pos {
			return nil, malformed("tensor %q: data offsets [%d,%d] overlap the previous tensor (ending at %d)", e.name, e.begin, e.end, pos)
		}
		if e.begin > pos {
			return nil, malformed("tensor %q: data offsets [%d,%d] leave a gap after byte %d", e.name, e.begin, e.end, pos)
		}
		if e.end > len(body) {
			return nil, malformed("tensor %q: data offsets [%d,%d] run past the %d data bytes", e.name, e.begin, e.end, len(body))
		}
		pos = e.end
	}
	if pos != len(body) {
		return nil, malformed("%d data bytes after the last tensor (ending at %d)", len(body)-pos, pos)
	}
	f := &File{Metadata: meta, Tensors: make([]Tensor, 0, len(entries))}
	for _, i := range order {
		e := &entries[i]
		t, err := convert(e, body[e.begin:e.end])
		if err != nil {
			return nil, err
		}
		f.Tensors = append(f.Tensors, t)
	}
	return f, nil
}

// checkHeaderLen refuses a header length above MaxHeader or beyond the
// rest bytes that follow it.
func checkHeaderLen(hlen uint64, rest int64) error {
	if hlen > MaxHeader {
		return malformed("header length %d exceeds the limit of %d", hlen, MaxHeader)
	}
	if hlen > uint64(rest) {
		return malformed("header length %d exceeds the %d bytes after it", hlen, rest)
	}
	return nil
}

func convert(e *entry, raw []byte) (Tensor, error) {
	size := dtypeSize[e.dtype]
	n := len(raw) / size
	out := make([]float32, n)
	for i := range out {
		b := raw[i*size : (i+1)*size]
		var v float32
		switch e.dtype {
		case "F32":
			v = math.Float32frombits(binary.LittleEndian.Uint32(b))
		case "F64":
			v = float32(math.Float64frombits(binary.LittleEndian.Uint64(b)))
		case "F16":
			v = halfToFloat(binary.LittleEndian.Uint16(b))
		case "BF16":
			v = math.Float32frombits(uint32(binary.LittleEndian.Uint16(b)) << 16)
		}
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return Tensor{}, malformed("tensor %q: value %d is not finite (%v as float32)", e.name, i, v)
		}
		out[i] = v
	}
	return Tensor{Name: e.name, Shape: e.shape, Data: out}, nil
}

// halfToFloat converts an IEEE 754 binary16 value to float32 exactly
// (binary16 layout: 1 sign, 5 exponent bits with bias 15, 10 fraction
// bits; IEEE 754-2008 §3.6).
func halfToFloat(h uint16) float32 {
	sign := uint32(h>>15) << 31
	exp := uint32(h>>10) & 0x1f
	frac := uint32(h) & 0x3ff
	switch {
	case exp == 0x1f: // infinity or NaN
		return math.Float32frombits(sign | 0x7f800000 | frac<<13)
	case exp == 0 && frac == 0:
		return math.Float32frombits(sign)
	case exp == 0: // subnormal: frac · 2^-24
		v := float32(frac) * (1.0 / (1 << 24))
		if sign != 0 {
			v = -v
		}
		return v
	}
	return math.Float32frombits(sign | (exp+127-15)<<23 | frac<<13)
}

// parseHeader reads the JSON header object token by token, so that a
// repeated name is caught (a plain map decode would keep the last one).
func parseHeader(header []byte) ([]entry, map[string]string, error) {
	trimmed := bytes.TrimRight(header, " ")
	if len(trimmed) == 0 || trimmed[0] != '{' {
		return nil, nil, malformed("header does not start with '{'")
	}
	dec := json.NewDecoder(bytes.NewReader(trimmed))
	dec.DisallowUnknownFields()
	if _, err := dec.Token(); err != nil {
		return nil, nil, malformed("header: %v", jsonMsg(err))
	}
	var entries []entry
	var meta map[string]string
	seen := map[string]bool{}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, nil, malformed("header: %v", jsonMsg(err))
		}
		name, ok := tok.(string)
		if !ok {
			return nil, nil, malformed("header: key is not a string")
		}
		if seen[name] {
			return nil, nil, malformed("header names %q twice", name)
		}
		seen[name] = true
		if name == MetadataKey {
			meta, err = parseMeta(dec)
			if err != nil {
				return nil, nil, err
			}
			continue
		}
		if name == "" {
			return nil, nil, malformed("header has a tensor with an empty name")
		}
		if len(entries) >= MaxTensors {
			return nil, nil, malformed("more than %d tensors", MaxTensors)
		}
		var raw struct {
			Dtype       *string  `json:"dtype"`
			Shape       *[]int64 `json:"shape"`
			DataOffsets *[]int64 `json:"data_offsets"`
		}
		if err := dec.Decode(&raw); err != nil {
			return nil, nil, malformed("tensor %q: %v", name, jsonMsg(err))
		}
		if raw.Dtype == nil || raw.Shape == nil || raw.DataOffsets == nil {
			return nil, nil, malformed("tensor %q: needs dtype, shape and data_offsets", name)
		}
		e := entry{name: name, dtype: *raw.Dtype}
		size, ok := dtypeSize[e.dtype]
		if !ok {
			if knownDtypes[e.dtype] {
				return nil, nil, malformed("tensor %q: dtype %s is not supported (F32, F64, F16, BF16 are)", name, e.dtype)
			}
			return nil, nil, malformed("tensor %q: unknown dtype %q", name, e.dtype)
		}
		if len(*raw.Shape) > MaxRank {
			return nil, nil, malformed("tensor %q: rank %d exceeds %d", name, len(*raw.Shape), MaxRank)
		}
		e.shape = make([]int, len(*raw.Shape))
		for i, d := range *raw.Shape {
			if d < 0 || d > math.MaxInt32 {
				return nil, nil, malformed("tensor %q: bad dimension %d", name, d)
			}
			e.shape[i] = int(d)
		}
		n := Elements(e.shape)
		if n < 0 {
			return nil, nil, malformed("tensor %q: shape %v is too large", name, e.shape)
		}
		off := *raw.DataOffsets
		if len(off) != 2 {
			return nil, nil, malformed("tensor %q: data_offsets has %d numbers, want 2", name, len(off))
		}
		if off[0] < 0 || off[1] < off[0] || off[1] > math.MaxInt32*8 {
			return nil, nil, malformed("tensor %q: bad data offsets [%d,%d]", name, off[0], off[1])
		}
		e.begin, e.end = int(off[0]), int(off[1])
		if int64(n)*int64(size) != off[1]-off[0] {
			return nil, nil, malformed("tensor %q: shape %v of %s needs %d bytes, offsets give %d", name, e.shape, e.dtype, int64(n)*int64(size), off[1]-off[0])
		}
		entries = append(entries, e)
	}
	if _, err := dec.Token(); err != nil {
		return nil, nil, malformed("header: %v", jsonMsg(err))
	}
	if dec.InputOffset() != int64(len(trimmed)) {
		return nil, nil, malformed("header has bytes after its JSON object")
	}
	return entries, meta, nil
}

func parseMeta(dec *json.Decoder) (map[string]string, error) {
	tok, err := dec.Token()
	if err != nil {
		return nil, malformed("__metadata__: %v", jsonMsg(err))
	}
	if d, ok := tok.(json.Delim); !ok || d != '{' {
		return nil, malformed("__metadata__ is not an object of strings")
	}
	meta := map[string]string{}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, malformed("__metadata__: %v", jsonMsg(err))
		}
		k, ok := tok.(string)
		if !ok {
			return nil, malformed("__metadata__: key is not a string")
		}
		if _, dup := meta[k]; dup {
			return nil, malformed("__metadata__ names %q twice", k)
		}
		tok, err = dec.Token()
		if err != nil {
			return nil, malformed("__metadata__ %q: %v", k, jsonMsg(err))
		}
		v, ok := tok.(string)
		if !ok {
			return nil, malformed("__metadata__ %q: value is not a string", k)
		}
		meta[k] = v
	}
	if _, err := dec.Token(); err != nil {
		return nil, malformed("__metadata__: %v", jsonMsg(err))
	}
	return meta, nil
}

// jsonMsg keeps JSON errors on one line.
func jsonMsg(err error) string {
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return "unexpected end of JSON"
	}
	return strings.ReplaceAll(err.Error(), "\n", " ")
}
