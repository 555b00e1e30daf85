package probe

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/patch/frameio"
)

// writeEpisodesNPY writes a 1-D (or, with dims, any shape) array of
// descr holding vals.
func writeEpisodesNPY(t *testing.T, path, descr string, vals []int64, dims ...int) string {
	t.Helper()
	if dims == nil {
		dims = []int{len(vals)}
	}
	b := bytes.NewBuffer(frameio.NPYHeaderOf(descr, dims))
	size := int(descr[len(descr)-1] - '0')
	for _, v := range vals {
		var w [8]byte
		binary.LittleEndian.PutUint64(w[:], uint64(v))
		b.Write(w[:size])
	}
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func starts(seqs []Sequence) []int {
	s := make([]int, len(seqs))
	for i, q := range seqs {
		s[i] = q.Start
	}
	return s
}

// TestEpisodesNPYGolden: the arrays numpy.save wrote (golden files of
// testdata/ref/episodes_ref.py, Debian python3-numpy 1.24) give the starts
// numpy.flatnonzero finds in the mask, and the lengths tile the frames.
func TestEpisodesNPYGolden(t *testing.T) {
	dir := filepath.Join("testdata", "episodes")
	var ref struct {
		Frames int              `json:"frames"`
		Starts map[string][]int `json:"starts"`
	}
	b, err := os.ReadFile(filepath.Join(dir, "starts.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &ref); err != nil || len(ref.Starts) != 5 {
		t.Fatalf("starts.json: %v (%d files)", err, len(ref.Starts))
	}
	for name, want := range ref.Starts {
		seqs, err := readSequences(filepath.Join(dir, name), ref.Frames)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		if fmt.Sprint(starts(seqs)) != fmt.Sprint(want) {
			t.Errorf("%s: starts %v, NumPy says %v", name, starts(seqs), want)
		}
		total := 0
		for _, q := range seqs {
			total += q.Len
		}
		if total != ref.Frames {
			t.Errorf("%s: lengths sum to %d of %d frames", name, total, ref.Frames)
		}
	}
	// A mask must have one entry per frame.
	if _, err := readSequences(filepath.Join(dir, "mask_bool.npy"), ref.Frames+1); err == nil || !strings.Contains(err.Error(), "20 entries") {
		t.Errorf("mask for another frame count: %v", err)
	}
}

// TestRefEpisodesNPY: NumPy writes today the bytes of the golden files.
func TestRefEpisodesNPY(t *testing.T) {
	reftest.Need(t, "numpy")
	out := t.TempDir()
	reftest.Run(t, "episodes_ref.py", "write", out)
	ents, _ := os.ReadDir(filepath.Join("testdata", "episodes"))
	for _, e := range ents {
		a, _ := os.ReadFile(filepath.Join("testdata", "episodes", e.Name()))
		b, err := os.ReadFile(filepath.Join(out, e.Name()))
		if err != nil || !bytes.Equal(a, b) {
			t.Errorf("golden %s differs from what NumPy writes now (%v)", e.Name(), err)
		}
	}
}

// TestEpisodesNPY: a probe reads episode starts from a .npy mask or
// index array, the same sequences as the text file of the same starts.
func TestEpisodesNPY(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 20, 32, 32)
	mask := make([]int64, 20)
	for _, s := range []int{0, 7, 15} {
		mask[s] = 1
	}
	text := filepath.Join(dir, "e.csv")
	os.WriteFile(text, []byte("0\n7\n15\n"), 0o644)
	want := plan(t, Config{In: rec, Policy: "fresh", ActionSpace: "continuous:2", Episodes: text}).Sequences
	for _, file := range []string{
		writeEpisodesNPY(t, filepath.Join(dir, "b1.npy"), "|b1", mask),
		writeEpisodesNPY(t, filepath.Join(dir, "u1.npy"), "|u1", mask),
		writeEpisodesNPY(t, filepath.Join(dir, "i8.npy"), "<i8", []int64{0, 7, 15}),
		writeEpisodesNPY(t, filepath.Join(dir, "i2.npy"), "<i2", []int64{0, 7, 15}),
		writeEpisodesNPY(t, filepath.Join(dir, "u4.npy"), "<u4", []int64{0, 7, 15}),
	} {
		p := plan(t, Config{In: rec, Policy: "fresh", ActionSpace: "continuous:2", Episodes: file})
		if fmt.Sprint(p.Sequences) != fmt.Sprint(want) {
			t.Errorf("%s: sequences %v, want %v", filepath.Base(file), p.Sequences, want)
		}
	}
}

// TestEpisodesBadInput: bad .npy episodes and non-text files are one
// line naming the file, the row or index and what was expected, with no
// more of the file's bytes than a short excerpt.
func TestEpisodesBadInput(t *testing.T) {
	dir := t.TempDir()
	rec := recording(t, dir, 20, 32, 32)
	mask := func(n int, set ...int) []int64 {
		m := make([]int64, n)
		for _, s := range set {
			m[s] = 1
		}
		return m
	}
	npy := func(name, descr string, vals []int64, dims ...int) string {
		return writeEpisodesNPY(t, filepath.Join(dir, name), descr, vals, dims...)
	}
	var img bytes.Buffer
	png.Encode(&img, image.NewRGBA(image.Rect(0, 0, 64, 64)))
	pngFile := filepath.Join(dir, "frame.png")
	os.WriteFile(pngFile, img.Bytes(), 0o644)
	nul := filepath.Join(dir, "nul.txt")
	os.WriteFile(nul, []byte("0\n5\n\x00\x01\x02"+strings.Repeat("\xff", 500)), 0o644)
	long := filepath.Join(dir, "long.csv")
	os.WriteFile(long, []byte(strings.Repeat("x", 5000)+"\n0\n"), 0o644)
	for _, c := range []struct {
		name, file string
		want       []string
	}{
		{"short mask", npy("m1.npy", "|b1", mask(19, 0)), []string{"m1.npy", "19 entries", "20 frames"}},
		{"2-D mask", npy("m2.npy", "|b1", mask(20, 0), 20, 1), []string{"m2.npy", "shape (20, 1)", "1-D"}},
		{"first not a start", npy("m3.npy", "|u1", mask(20, 4)), []string{"m3.npy", "row 0", "first frame must start"}},
		{"mask value", npy("m4.npy", "|u1", []int64{1, 0, 0, 2, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0}), []string{"m4.npy", "row 3 holds 2", "0 or 1"}},
		{"unsorted", npy("s1.npy", "<i8", []int64{0, 10, 5}), []string{"s1.npy", "index 2", "not after the previous start 10"}},
		{"out of range", npy("s2.npy", "<i4", []int64{0, 25}), []string{"s2.npy", "index 1", "frames 0..19"}},
		{"negative", npy("s3.npy", "<i8", []int64{0, -3}), []string{"s3.npy", "index 1 holds -3"}},
		{"first index", npy("s4.npy", "<u2", []int64{4, 9}), []string{"s4.npy", "index 0 holds 4", "frame 0"}},
		{"2-D indices", npy("s5.npy", "<i8", []int64{0, 5, 9, 12}, 2, 2), []string{"s5.npy", "shape (2, 2)", "1-D"}},
		{"float", npy("f.npy", "<f8", []int64{0, 0}), []string{"f.npy", `"<f8"`, "mask", "start indices"}},
		{"cut short", npy("cut.npy", "<i8", []int64{0, 5}, 3), []string{"cut.npy", "entry 2 of the 3"}},
		{"png", pngFile, []string{"frame.png", "not a text file", "line 1", "offset 0"}},
		{"nul", nul, []string{"nul.txt", "not a text file", "line 3"}},
		{"long header", long, []string{"long.csv", "line 1", "…"}},
	} {
		_, err := NewPlan(Config{In: rec, Policy: "fresh", ActionSpace: "continuous:2", Episodes: c.file})
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		msg := err.Error()
		if strings.Contains(msg, "\n") || len(msg) > len(dir)+300 {
			t.Errorf("%s: error spans lines or dumps the file (%d bytes): %q", c.name, len(msg), msg)
		}
		for _, w := range c.want {
			if !strings.Contains(msg, w) {
				t.Errorf("%s: error %q does not say %q", c.name, msg, w)
			}
		}
	}
}
