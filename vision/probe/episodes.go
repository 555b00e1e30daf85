package probe

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"strconv"
	"unicode/utf8"

	"tilebench/patch/frameio"
)

// parseSequencesNPY reads sequence boundaries from a .npy array (NEP 1,
// C order), told apart by dtype:
//
//	bool or uint8      a mask, shape (frames,): 1 (true) at each
//	                   sequence's first frame, 0 elsewhere; entry 0 is 1
//	other integers     start indices, shape (S,): the first is 0, they
//	(int8..int64,      increase strictly, each below frames
//	uint16..uint64)
//
// The mask is what "tilebench record" writes as episode_starts.npy. The
// header is read by frameio; errors name the row or index.
func parseSequencesNPY(r io.Reader, frames int) ([]Sequence, error) {
	descr, dims, _, err := frameio.ReadNPYArrayHeader(r)
	if err != nil {
		return nil, err
	}
	kind, size, err := episodesDtype(descr)
	if err != nil {
		return nil, err
	}
	if len(dims) != 1 {
		return nil, fmt.Errorf("shape %s: want a 1-D array: a mask (%d,) or start indices (S,)", shapeText(dims), frames)
	}
	n := dims[0]
	br := bufio.NewReader(r)
	raw := make([]byte, size)
	next := func(i int) (uint64, bool, error) {
		if _, err := io.ReadFull(br, raw); err != nil {
			return 0, false, fmt.Errorf("data ends at entry %d of the %d the header announces", i, n)
		}
		if kind == 'i' {
			v := intOf(raw)
			return uint64(v), v < 0, nil
		}
		return uintOf(raw), false, nil
	}
	var seqs []Sequence
	if kind == 'b' || (kind == 'u' && size == 1) {
		if n != frames {
			return nil, fmt.Errorf("mask of %d entries, the recording has %d frames: want one entry per frame (or an integer array of start indices)", n, frames)
		}
		for i := 0; i < n; i++ {
			v, _, err := next(i)
			if err != nil {
				return nil, err
			}
			switch {
			case v > 1:
				return nil, fmt.Errorf("row %d holds %d: a mask holds 0 or 1 (true at each sequence's first frame)", i, v)
			case i == 0 && v == 0:
				return nil, errors.New("row 0 is not a start: the first frame must start a sequence")
			case v == 1:
				seqs = append(seqs, Sequence{Start: i})
			}
		}
	} else {
		if n == 0 {
			return nil, errors.New("holds no start indices")
		}
		for i := 0; i < n; i++ {
			v, neg, err := next(i)
			if err != nil {
				return nil, err
			}
			text := strconv.FormatUint(v, 10)
			if neg {
				text = strconv.FormatInt(int64(v), 10)
			}
			switch {
			case i == 0 && v != 0:
				return nil, fmt.Errorf("index 0 holds %s: the first sequence must start at frame 0", text)
			case neg || v >= uint64(frames):
				return nil, fmt.Errorf("index %d holds %s, out of range: the recording has frames 0..%d", i, text, frames-1)
			case i > 0 && int(v) <= seqs[len(seqs)-1].Start:
				return nil, fmt.Errorf("index %d holds %s, not after the previous start %d: starts must increase", i, text, seqs[len(seqs)-1].Start)
			}
			seqs = append(seqs, Sequence{Start: int(v)})
		}
	}
	if _, err := br.ReadByte(); err == nil {
		return nil, fmt.Errorf("bytes after the %d entries the header announces", n)
	}
	if len(seqs) == 0 {
		return nil, errors.New("holds no sequences")
	}
	setLengths(seqs, frames)
	return seqs, nil
}

// episodesDtype reads a descr as an episodes array's element: kind 'b'
// (bool), 'i' or 'u', and its size in bytes. Elements wider than a byte
// must be little-endian.
func episodesDtype(descr string) (kind byte, size int, err error) {
	bad := fmt.Errorf("dtype %q: want bool or uint8 (a mask per frame) or an integer type (start indices)", descr)
	d := descr
	order := byte('|')
	if len(d) == 3 && (d[0] == '<' || d[0] == '>' || d[0] == '|' || d[0] == '=') {
		order, d = d[0], d[1:]
	}
	if len(d) != 2 || d[1] < '1' || d[1] > '8' {
		return 0, 0, bad
	}
	kind, size = d[0], int(d[1]-'0')
	switch {
	case kind == 'b' && size == 1:
	case (kind == 'i' || kind == 'u') && (size == 1 || size == 2 || size == 4 || size == 8):
	default:
		return 0, 0, bad
	}
	if size > 1 && order == '>' {
		return 0, 0, fmt.Errorf("dtype %q: big-endian arrays are not read; save with a little-endian dtype", descr)
	}
	return kind, size, nil
}

// shapeText prints a shape as Python prints a tuple.
func shapeText(dims []int) string {
	s := "("
	for i, d := range dims {
		if i > 0 {
			s += ", "
		}
		s += strconv.Itoa(d)
	}
	if len(dims) == 1 {
		s += ","
	}
	return s + ")"
}

// maxExcerpt is the most of a line an error quotes.
const maxExcerpt = 40

// excerpt is s cut to maxExcerpt bytes (on a rune boundary), with "…"
// when cut, for quoting in one-line errors.
func excerpt(s string) string {
	if len(s) <= maxExcerpt {
		return s
	}
	i := maxExcerpt
	for i > 0 && !utf8.RuneStart(s[i]) {
		i--
	}
	return s[:i] + "…"
}

// checkText refuses data that is not text (invalid UTF-8, NUL or other
// control bytes than tab, CR and LF), naming the line and the offset of
// the first such byte and quoting a few bytes around it.
func checkText(data []byte) error {
	line := 1
	for i := 0; i < len(data); {
		c := data[i]
		if c == '\n' {
			line++
			i++
			continue
		}
		r, n := utf8.DecodeRune(data[i:])
		if (r == utf8.RuneError && n <= 1) || (c < 0x20 && c != '\t' && c != '\r') || c == 0x7f {
			lo := max(0, i-8)
			return fmt.Errorf("not a text file: line %d holds byte 0x%02x at offset %d (%q): want a .npy array (a bool/uint8 mask or integer start indices) or text lines", line, c, i, data[lo:min(len(data), i+8)])
		}
		i += n
	}
	return nil
}

// setLengths sets each sequence's length from the next one's start (the
// last runs to the end of the recording's frames).
func setLengths(seqs []Sequence, frames int) {
	for i := range seqs {
		end := frames
		if i+1 < len(seqs) {
			end = seqs[i+1].Start
		}
		seqs[i].Len = end - seqs[i].Start
	}
}
