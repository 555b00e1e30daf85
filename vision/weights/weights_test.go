package weights

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"flag"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/internal/reftest"
)

var update = flag.Bool("update", false, "regenerate golden files from testdata/ref/safetensors_ref.py")

// sampleFile is the file the golden go_sample.safetensors holds.
func sampleFile() *File {
	f := &File{}
	f.Add("key.weight", []int{2, 3}, []float32{1, -2, 0.1, 1e30, -1e-30, float32(math.SmallestNonzeroFloat32)})
	f.Add("key.bias", []int{3}, []float32{0.5, -0.25, 3.4028235e38})
	f.Add("scale", nil, []float32{-7.5})
	f.Add("none", []int{0}, nil)
	f.Add("über/naïve", []int{1, 1, 2}, []float32{1e-7, -123456.79})
	f.SetMeta("family", "attention")
	f.SetMeta("hyper", `{"key":16,"queries":16}`)
	f.SetMeta("quote\"key", "line\nbreak")
	return f
}

func encodeBytes(t testing.TB, f *File) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := Encode(&b, f); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func sameFile(t *testing.T, got, want *File) {
	t.Helper()
	if len(got.Tensors) != len(want.Tensors) {
		t.Fatalf("%d tensors, want %d", len(got.Tensors), len(want.Tensors))
	}
	for i := range want.Tensors {
		g, w := got.Tensors[i], want.Tensors[i]
		if g.Name != w.Name || !equalShape(g.Shape, w.Shape) || len(g.Data) != len(w.Data) {
			t.Fatalf("tensor %d: got %q %v (%d values), want %q %v (%d values)", i, g.Name, g.Shape, len(g.Data), w.Name, w.Shape, len(w.Data))
		}
		for j := range w.Data {
			if math.Float32bits(g.Data[j]) != math.Float32bits(w.Data[j]) {
				t.Fatalf("tensor %q value %d: got %v, want %v", w.Name, j, g.Data[j], w.Data[j])
			}
		}
	}
	if len(got.Metadata) != len(want.Metadata) {
		t.Fatalf("metadata %v, want %v", got.Metadata, want.Metadata)
	}
	for k, v := range want.Metadata {
		if got.Metadata[k] != v {
			t.Fatalf("metadata %q = %q, want %q", k, got.Metadata[k], v)
		}
	}
}

func TestRoundTrip(t *testing.T) {
	f := sampleFile()
	data := encodeBytes(t, f)
	hlen := binary.LittleEndian.Uint64(data)
	if (8+hlen)%8 != 0 {
		t.Errorf("data starts at %d, not 8-byte aligned", 8+hlen)
	}
	g, err := Decode(data)
	if err != nil {
		t.Fatal(err)
	}
	sameFile(t, g, f)
}

// pyDump is the JSON that safetensors_ref.py prints.
type pyDump struct {
	Format   int               `json:"format"`
	Metadata map[string]string `json:"metadata"`
	Tensors  []struct {
		Name   string    `json:"name"`
		Dtype  string    `json:"dtype"`
		Shape  []int     `json:"shape"`
		Values []float64 `json:"values"`
	} `json:"tensors"`
	Bad []string `json:"bad"`
}

func parseDump(t *testing.T, b []byte) *pyDump {
	t.Helper()
	var d pyDump
	if err := json.Unmarshal(b, &d); err != nil {
		t.Fatalf("reference output: %v", err)
	}
	if d.Format != 1 {
		t.Fatalf("reference output format %d", d.Format)
	}
	return &d
}

// dumpFile turns the reference's reading into a File; values widen
// exactly to float64 in the script, so float32(v) is the stored value.
func dumpFile(d *pyDump) *File {
	f := &File{Metadata: d.Metadata}
	for _, t := range d.Tensors {
		data := make([]float32, len(t.Values))
		for i, v := range t.Values {
			data[i] = float32(v)
		}
		f.Tensors = append(f.Tensors, Tensor{Name: t.Name, Shape: t.Shape, Data: data})
	}
	return f
}

// The independent reader (testdata/ref/safetensors_ref.py, written from
// the public format description) read our encoding of sampleFile; its
// reading is committed as go_sample.py.json.
func TestGoldenPythonReadsOurs(t *testing.T) {
	data := encodeBytes(t, sampleFile())
	golden, err := os.ReadFile("testdata/go_sample.safetensors")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(data, golden) {
		t.Fatalf("encoding of the sample changed (%d bytes, golden %d); regenerate with -update if intended", len(data), len(golden))
	}
	b, err := os.ReadFile("testdata/go_sample.py.json")
	if err != nil {
		t.Fatal(err)
	}
	sameFile(t, dumpFile(parseDump(t, b)), sampleFile())
}

// The independent writer produced py_sample.safetensors (mixed F32, F64,
// F16, BF16, a scalar and an empty tensor, header keys in name order but
// data in another order) and what it holds, py_sample.json.
func TestGoldenWeReadPython(t *testing.T) {
	f, err := ReadFile("testdata/py_sample.safetensors")
	if err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile("testdata/py_sample.json")
	if err != nil {
		t.Fatal(err)
	}
	sameFile(t, f, dumpFile(parseDump(t, b)))
	// F16 and BF16 values, spelled out (binary16: max 65504, smallest
	// subnormal 2^-24; IEEE 754-2008 §3.6, from memory).
	h, err := f.Want("half", 4)
	if err != nil {
		t.Fatal(err)
	}
	if h[2] != 65504 || h[3] != float32(math.Ldexp(1, -24)) {
		t.Errorf("half = %v", h)
	}
}

// Every malformed file the reference script writes is refused.
func TestGoldenPythonBadFiles(t *testing.T) {
	checkBadFolder(t, "testdata/bad")
}

func checkBadFolder(t *testing.T, dir string) {
	t.Helper()
	names, err := filepath.Glob(filepath.Join(dir, "*.safetensors"))
	if err != nil || len(names) < 10 {
		t.Fatalf("bad-file folder %s: %d files, %v", dir, len(names), err)
	}
	for _, p := range names {
		_, err := ReadFile(p)
		if filepath.Base(p) == "good.safetensors" {
			if err != nil {
				t.Errorf("%s: %v", p, err)
			}
			continue
		}
		if err == nil {
			t.Errorf("%s: accepted", p)
			continue
		}
		if !errors.Is(err, ErrMalformed) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error %q: want one line wrapping ErrMalformed", p, err)
		}
	}
}

// TestRefSafetensors runs the independent reader and writer live.
func TestRefSafetensors(t *testing.T) {
	reftest.Need(t)
	dir := t.TempDir()
	ours := filepath.Join(dir, "ours.safetensors")
	if err := WriteFile(ours, sampleFile()); err != nil {
		t.Fatal(err)
	}
	out := reftest.Run(t, "safetensors_ref.py", "read", ours)
	sameFile(t, dumpFile(parseDump(t, out)), sampleFile())

	theirs := filepath.Join(dir, "theirs.safetensors")
	out2 := reftest.Run(t, "safetensors_ref.py", "write", theirs)
	f, err := ReadFile(theirs)
	if err != nil {
		t.Fatal(err)
	}
	sameFile(t, f, dumpFile(parseDump(t, out2)))

	bad := filepath.Join(dir, "bad")
	out3 := reftest.Run(t, "safetensors_ref.py", "bad", bad)
	if d := parseDump(t, out3); len(d.Bad) < 10 {
		t.Fatalf("reference wrote %d bad files", len(d.Bad))
	}
	checkBadFolder(t, bad)

	if *update {
		gold := filepath.Join("testdata", "go_sample.safetensors")
		if err := WriteFile(gold, sampleFile()); err != nil {
			t.Fatal(err)
		}
		write := func(name string, b []byte) {
			if err := os.WriteFile(filepath.Join("testdata", name), b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		write("go_sample.py.json", out)
		b, _ := os.ReadFile(theirs)
		write("py_sample.safetensors", b)
		write("py_sample.json", out2)
		os.RemoveAll("testdata/bad")
		if err := os.CopyFS("testdata/bad", os.DirFS(bad)); err != nil {
			t.Fatal(err)
		}
	}
}

// header builds a file from a header string and a data buffer.
func header(h string, body []byte) []byte {
	out := binary.LittleEndian.AppendUint64(nil, uint64(len(h)))
	out = append(out, h...)
	return append(out, body...)
}

func f32s(v ...float32) []byte {
	var b []byte
	for _, x := range v {
		b = binary.LittleEndian.AppendUint32(b, math.Float32bits(x))
	}
	return b
}

func TestDecodeRejects(t *testing.T) {
	body := f32s(1, 2, 3)
	hugeLen := binary.LittleEndian.AppendUint64(nil, 1<<62)
	cases := []struct {
		name string
		data []byte
		want string
	}{
		{"empty", nil, "shorter than the 8-byte"},
		{"huge header", append(hugeLen, '{', '}'), "exceeds the limit"},
		{"header past end", append(binary.LittleEndian.AppendUint64(nil, 50), "{}"...), "exceeds the 2 bytes"},
		{"not json", header("{nope", nil), "header"},
		{"no brace", header(`  {}`, nil), "does not start"},
		{"array", header(`[]`, nil), "does not start"},
		{"trailing", header(`{}x`, nil), "after its JSON"},
		{"two objects", header(`{}{}`, nil), "after its JSON"},
		{"dup", header(`{"a":{"dtype":"F32","shape":[1],"data_offsets":[0,4]},"a":{"dtype":"F32","shape":[1],"data_offsets":[4,8]}}`, f32s(1, 2)), "twice"},
		{"dup meta", header(`{"__metadata__":{"k":"1","k":"2"}}`, nil), "twice"},
		{"two meta", header(`{"__metadata__":{},"__metadata__":{}}`, nil), "twice"},
		{"meta number", header(`{"__metadata__":{"k":1}}`, nil), "not a string"},
		{"meta array", header(`{"__metadata__":["k"]}`, nil), "not an object"},
		{"unknown field", header(`{"a":{"dtype":"F32","shape":[3],"data_offsets":[0,12],"x":1}}`, body), "unknown field"},
		{"missing", header(`{"a":{"dtype":"F32","shape":[3]}}`, body), "needs dtype"},
		{"entry not object", header(`{"a":5}`, body), `tensor "a"`},
		{"empty name", header(`{"":{"dtype":"F32","shape":[3],"data_offsets":[0,12]}}`, body), "empty name"},
		{"int dtype", header(`{"a":{"dtype":"I64","shape":[1],"data_offsets":[0,8]}}`, make([]byte, 8)), "not supported"},
		{"odd dtype", header(`{"a":{"dtype":"f32","shape":[3],"data_offsets":[0,12]}}`, body), "unknown dtype"},
		{"neg dim", header(`{"a":{"dtype":"F32","shape":[-1],"data_offsets":[0,12]}}`, body), "bad dimension"},
		{"float dim", header(`{"a":{"dtype":"F32","shape":[1.5],"data_offsets":[0,12]}}`, body), `tensor "a"`},
		{"overflow", header(`{"a":{"dtype":"F32","shape":[65536,65536],"data_offsets":[0,12]}}`, body), "too large"},
		{"one offset", header(`{"a":{"dtype":"F32","shape":[3],"data_offsets":[12]}}`, body), "want 2"},
		{"reversed", header(`{"a":{"dtype":"F32","shape":[3],"data_offsets":[12,0]}}`, body), "bad data offsets"},
		{"size", header(`{"a":{"dtype":"F32","shape":[2],"data_offsets":[0,12]}}`, body), "needs 8 bytes"},
		{"past data", header(`{"a":{"dtype":"F32","shape":[4],"data_offsets":[0,16]}}`, body), "run past"},
		{"gap", header(`{"a":{"dtype":"F32","shape":[1],"data_offsets":[4,8]}}`, f32s(1, 2)), "gap"},
		{"overlap", header(`{"a":{"dtype":"F32","shape":[2],"data_offsets":[0,8]},"b":{"dtype":"F32","shape":[2],"data_offsets":[4,12]}}`, body), "overlap"},
		{"extra bytes", header(`{"a":{"dtype":"F32","shape":[2],"data_offsets":[0,8]}}`, body), "after the last"},
		{"nan", header(`{"a":{"dtype":"F32","shape":[3],"data_offsets":[0,12]}}`, f32s(1, float32(math.NaN()), 3)), "not finite"},
		{"inf f64", header(`{"a":{"dtype":"F64","shape":[1],"data_offsets":[0,8]}}`, binary.LittleEndian.AppendUint64(nil, math.Float64bits(1e300))), "not finite"},
		{"inf f16", header(`{"a":{"dtype":"F16","shape":[1],"data_offsets":[0,2]}}`, []byte{0x00, 0x7c}), "not finite"},
		{"bad utf8", header("{\"\xff\":{}}", nil), "UTF-8"},
	}
	for _, c := range cases {
		_, err := Decode(c.data)
		if err == nil {
			t.Errorf("%s: accepted", c.name)
			continue
		}
		if !errors.Is(err, ErrMalformed) || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error %q: want one line wrapping ErrMalformed containing %q", c.name, err, c.want)
		}
	}
}

func TestDecodeAcceptsSpecCorners(t *testing.T) {
	// Header padded with spaces, keys in any order, data in a different
	// order from the header, zero-size tensor at the end.
	h := `{"b":{"dtype":"F32","shape":[1],"data_offsets":[0,4]},"a":{"dtype":"F32","shape":[2],"data_offsets":[4,12]},"z":{"dtype":"F32","shape":[0,3],"data_offsets":[12,12]}}    `
	f, err := Decode(header(h, f32s(3, 1, 2)))
	if err != nil {
		t.Fatal(err)
	}
	a, err := f.Want("a", 2)
	if err != nil || a[0] != 1 || a[1] != 2 {
		t.Fatalf("a = %v, %v", a, err)
	}
	if f.Tensors[0].Name != "b" {
		t.Errorf("tensors not in data order: %v", f.Tensors[0].Name)
	}
	if _, err := f.Want("a", 1, 2); err == nil || !strings.Contains(err.Error(), "want [1 2]") {
		t.Errorf("Want with wrong shape: %v", err)
	}
	if _, err := f.Lookup("nope"); err == nil {
		t.Error("Lookup of a missing tensor succeeded")
	}
	if f.Metadata != nil {
		t.Errorf("metadata %v, want nil", f.Metadata)
	}
}

func TestHalfToFloat(t *testing.T) {
	// binary16 bit patterns and values (IEEE 754-2008 §3.6; the examples
	// of the binary16 article, from memory).
	cases := map[uint16]float32{
		0x0000: 0, 0x3c00: 1, 0xc000: -2, 0x7bff: 65504, 0x0400: float32(math.Ldexp(1, -14)),
		0x0001: float32(math.Ldexp(1, -24)), 0x03ff: float32(math.Ldexp(1023, -24)), 0x3555: 0.333251953125,
	}
	for h, want := range cases {
		if got := halfToFloat(h); got != want {
			t.Errorf("half %#04x = %v, want %v", h, got, want)
		}
	}
	if v := halfToFloat(0x8000); v != 0 || !math.Signbit(float64(v)) {
		t.Errorf("negative zero = %v", v)
	}
	if !math.IsInf(float64(halfToFloat(0xfc00)), -1) || !math.IsNaN(float64(halfToFloat(0x7e00))) {
		t.Error("infinity / NaN patterns")
	}
}

func TestEncodeRefuses(t *testing.T) {
	cases := map[string]*File{
		"dup":      {Tensors: []Tensor{{Name: "a", Shape: []int{1}, Data: []float32{1}}, {Name: "a", Shape: []int{1}, Data: []float32{1}}}},
		"reserved": {Tensors: []Tensor{{Name: MetadataKey, Shape: []int{1}, Data: []float32{1}}}},
		"empty":    {Tensors: []Tensor{{Name: "", Shape: []int{1}, Data: []float32{1}}}},
		"shape":    {Tensors: []Tensor{{Name: "a", Shape: []int{2}, Data: []float32{1}}}},
		"negative": {Tensors: []Tensor{{Name: "a", Shape: []int{-1}, Data: nil}}},
		"nan":      {Tensors: []Tensor{{Name: "a", Shape: []int{1}, Data: []float32{float32(math.NaN())}}}},
		"inf":      {Tensors: []Tensor{{Name: "a", Shape: []int{1}, Data: []float32{float32(math.Inf(1))}}}},
	}
	for name, f := range cases {
		var b bytes.Buffer
		if err := Encode(&b, f); err == nil {
			t.Errorf("%s: encoded", name)
		} else if b.Len() != 0 {
			t.Errorf("%s: wrote %d bytes before failing", name, b.Len())
		}
	}
}

func TestWriteFileAtomic(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "w.safetensors")
	if err := WriteFile(p, sampleFile()); err != nil {
		t.Fatal(err)
	}
	before, _ := os.ReadFile(p)
	bad := &File{}
	bad.Add("x", []int{1}, []float32{float32(math.NaN())})
	if err := WriteFile(p, bad); err == nil || !strings.Contains(err.Error(), p) {
		t.Fatalf("writing NaN: %v", err)
	}
	after, _ := os.ReadFile(p)
	if !bytes.Equal(before, after) {
		t.Fatal("failed write changed the existing file")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Fatalf("folder holds %d entries after a failed write", len(ents))
	}
	if _, err := ReadFile(filepath.Join(dir, "missing")); err == nil {
		t.Fatal("read of a missing file succeeded")
	}
	if _, err := ReadFile(dir); err == nil || !strings.Contains(err.Error(), "regular") {
		t.Fatalf("read of a folder: %v", err)
	}
	os.WriteFile(p, []byte("short"), 0o644)
	if _, err := ReadFile(p); err == nil || !strings.Contains(err.Error(), p) || !errors.Is(err, ErrMalformed) {
		t.Fatalf("read of a short file: %v", err)
	}
}

func TestMetaHelpers(t *testing.T) {
	f := &File{}
	f.SetMeta("n", "12")
	f.SetMeta("x", "0.25")
	f.SetMeta("bad", "1e999")
	if v, err := f.MetaInt("n"); err != nil || v != 12 {
		t.Errorf("MetaInt = %v, %v", v, err)
	}
	if v, err := f.MetaFloat("x"); err != nil || v != 0.25 {
		t.Errorf("MetaFloat = %v, %v", v, err)
	}
	if _, err := f.MetaFloat("bad"); err == nil {
		t.Error("MetaFloat accepted 1e999")
	}
	if _, err := f.MetaInt("x"); err == nil {
		t.Error("MetaInt accepted 0.25")
	}
	if _, err := f.Meta("gone"); err == nil || !strings.Contains(err.Error(), "gone") {
		t.Errorf("Meta of a missing key: %v", err)
	}
}

func FuzzDecode(f *testing.F) {
	var b bytes.Buffer
	Encode(&b, sampleFile())
	f.Add(b.Bytes())
	f.Add(header(`{"a":{"dtype":"F16","shape":[2],"data_offsets":[0,4]},"__metadata__":{"k":"v"}}`, []byte{0, 0x3c, 0, 0xc0}))
	f.Add(header(`{"a":{"dtype":"BF16","shape":[1],"data_offsets":[0,2]},"b":{"dtype":"F64","shape":[],"data_offsets":[2,10]}}`, make([]byte, 10)))
	f.Add(header(`{}`, nil))
	if gold, err := os.ReadFile("testdata/py_sample.safetensors"); err == nil {
		f.Add(gold)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := Decode(data)
		if err != nil {
			if !errors.Is(err, ErrMalformed) || strings.Contains(err.Error(), "\n") {
				t.Fatalf("error %q", err)
			}
			return
		}
		// Whatever decodes re-encodes and decodes to the same content.
		var b bytes.Buffer
		if err := Encode(&b, got); err != nil {
			t.Fatalf("re-encode: %v", err)
		}
		again, err := Decode(b.Bytes())
		if err != nil {
			t.Fatalf("decode of re-encoding: %v", err)
		}
		if len(again.Tensors) != len(got.Tensors) {
			t.Fatalf("%d tensors after round trip, want %d", len(again.Tensors), len(got.Tensors))
		}
		for i := range got.Tensors {
			a, g := again.Tensors[i], got.Tensors[i]
			if a.Name != g.Name || !equalShape(a.Shape, g.Shape) || len(a.Data) != len(g.Data) {
				t.Fatalf("tensor %d changed in round trip", i)
			}
			for j := range g.Data {
				if math.Float32bits(a.Data[j]) != math.Float32bits(g.Data[j]) {
					t.Fatalf("tensor %q value %d changed", g.Name, j)
				}
			}
		}
	})
}

func BenchmarkDecode(b *testing.B) {
	f := &File{}
	f.Add("w", []int{192, 16}, make([]float32, 192*16))
	f.Add("q", []int{16, 16}, make([]float32, 256))
	data := encodeBytes(b, f)
	b.ReportAllocs()
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		if _, err := Decode(data); err != nil {
			b.Fatal(err)
		}
	}
}

// TestRefHalfToFloat compares the binary16 conversion for all 65536 bit
// patterns with Python's struct 'e' format, live.
func TestRefHalfToFloat(t *testing.T) {
	reftest.Need(t)
	var ref struct {
		Bits []*uint32 `json:"half_to_f32_bits"`
	}
	if err := json.Unmarshal(reftest.Run(t, "safetensors_ref.py", "half", "-"), &ref); err != nil || len(ref.Bits) != 1<<16 {
		t.Fatalf("reference table: %v (%d entries)", err, len(ref.Bits))
	}
	for h, want := range ref.Bits {
		got := halfToFloat(uint16(h))
		if want == nil {
			if !math.IsNaN(float64(got)) {
				t.Fatalf("half %#04x: %v, want NaN", h, got)
			}
			continue
		}
		if math.Float32bits(got) != *want {
			t.Fatalf("half %#04x: bits %#08x, want %#08x", h, math.Float32bits(got), *want)
		}
	}
}
