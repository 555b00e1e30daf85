package probe

import (
	"bytes"
	"strings"
	"testing"
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
	})
}
