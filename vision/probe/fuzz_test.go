package probe

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/patch/frameio"
)

// FuzzActions: the .npy action parser never panics, and what it accepts
// has the rows and width its header states, all finite.
func FuzzActions(f *testing.F) {
	for _, h := range []string{
		"{'descr': '<f8', 'fortran_order': False, 'shape': (2, 2), }",
		"{'descr': '<i4', 'fortran_order': False, 'shape': (3,), }",
		"{'descr': '|u1', 'fortran_order': False, 'shape': (1, 1), }",
		"{'descr': '>f4', 'fortran_order': False, 'shape': (2,), }",
		"{'descr': '<f4', 'fortran_order': True, 'shape': (2, 3), }",
	} {
		var b bytes.Buffer
		b.WriteString("\x93NUMPY\x01\x00")
		b.WriteByte(byte(len(h) + 1))
		b.WriteByte(0)
		b.WriteString(h + "\n")
		b.Write(make([]byte, 32))
		f.Add(b.Bytes())
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		a, err := parseActions(bytes.NewReader(data))
		if err != nil {
			return
		}
		if a.Rows < 1 || a.Width < 1 || len(a.V) != a.Rows*a.Width {
			t.Fatalf("accepted %d×%d with %d values", a.Rows, a.Width, len(a.V))
		}
	})
}

// FuzzSequences: the episodes parser never panics, and what it accepts
// tiles the recording: starts from 0, increasing, lengths summing to
// the frame count.
func FuzzSequences(f *testing.F) {
	for _, s := range []string{"0\n5\n9\n", "start\n0\n3\n", "sequence\na\na\nb\nb\nb\nc\nc\nc\nd\nd\n", "# c\n0,x\n4,y\n", "id\t\n1\n1\n", "0\n10\n5\n"} {
		f.Add(s, 10)
	}
	f.Fuzz(func(t *testing.T, s string, frames int) {
		if frames < 1 || frames > 10000 || len(s) > 1<<14 {
			return
		}
		seqs, err := parseSequences(s, frames)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error spans lines: %q", err)
			}
			return
		}
		checkTiles(t, seqs, frames)
	})
}

// FuzzSequencesNPY: the .npy episodes parser never panics, its errors
// are one line, and what it accepts tiles the recording.
func FuzzSequencesNPY(f *testing.F) {
	ents, _ := os.ReadDir(filepath.Join("testdata", "episodes"))
	for _, e := range ents {
		if b, err := os.ReadFile(filepath.Join("testdata", "episodes", e.Name())); err == nil && strings.HasSuffix(e.Name(), ".npy") {
			f.Add(b, 20)
		}
	}
	for _, c := range []struct {
		descr string
		dims  []int
		data  []byte
	}{
		{"|b1", []int{4}, []byte{1, 0, 1, 0}},
		{"|u1", []int{4}, []byte{0, 1, 1, 0}},
		{"<i8", []int{2}, []byte{0, 0, 0, 0, 0, 0, 0, 0, 2, 0, 0, 0, 0, 0, 0, 0}},
		{"<i2", []int{3}, []byte{0, 0, 3, 0, 2, 0}},
		{"<u4", []int{2}, []byte{0, 0, 0, 0, 0xff, 0xff, 0xff, 0xff}},
		{"<i4", []int{2, 1}, []byte{0, 0, 0, 0, 1, 0, 0, 0}},
		{">i8", []int{1}, make([]byte, 8)},
		{"<f8", []int{1}, make([]byte, 8)},
	} {
		f.Add(append(frameio.NPYHeaderOf(c.descr, c.dims), c.data...), 4)
	}
	f.Fuzz(func(t *testing.T, data []byte, frames int) {
		if frames < 1 || frames > 10000 {
			return
		}
		seqs, err := parseSequencesNPY(bytes.NewReader(data), frames)
		if err != nil {
			if strings.Contains(err.Error(), "\n") || len(err.Error()) > 400 {
				t.Fatalf("error spans lines or is long: %q", err)
			}
			return
		}
		checkTiles(t, seqs, frames)
	})
}

// FuzzSequencesText: any bytes given as a text episodes file give
// sequences or a one-line error that quotes no more than an excerpt.
func FuzzSequencesText(f *testing.F) {
	for _, s := range []string{"0\n5\n9\n", "sequence\na\nb\n", "\x89PNG\r\n\x1a\n\x00\x00", "\xef\xbb\xbfstart\n0\n", "0\n\xff\xfe\n", strings.Repeat("y", 300) + "\n"} {
		f.Add([]byte(s), 10)
	}
	f.Fuzz(func(t *testing.T, data []byte, frames int) {
		if frames < 1 || frames > 10000 || len(data) > 1<<14 {
			return
		}
		if _, err := parseSequencesText(data, frames); err != nil {
			if msg := err.Error(); strings.Contains(msg, "\n") || len(msg) > 300 {
				t.Fatalf("error spans lines or dumps the file (%d bytes): %q", len(msg), msg)
			}
		}
	})
}

// checkTiles fails t unless seqs cover frames 0..frames-1 in order, each
// sequence non-empty and starting where the one before ended.
func checkTiles(t *testing.T, seqs []Sequence, frames int) {
	t.Helper()
	next := 0
	for _, q := range seqs {
		if q.Start != next || q.Len < 1 {
			t.Fatalf("sequences %v do not tile %d frames", seqs, frames)
		}
		next += q.Len
	}
	if next != frames {
		t.Fatalf("sequences %v cover %d of %d frames", seqs, next, frames)
	}
}
