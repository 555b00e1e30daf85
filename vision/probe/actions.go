package probe

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"regexp"
	"strconv"
	"strings"
)

// maxActionWidth is the widest recorded action accepted.
const maxActionWidth = 1024

// Actions are the recorded actions of a recording, one row per frame.
type Actions struct {
	// Rows is the number of frames, Width the values per frame.
	Rows, Width int
	// Integer is true when the array held integers (discrete choices).
	Integer bool
	// V holds Rows×Width values, row-major.
	V []float64
}

// Row returns the values of frame i.
func (a *Actions) Row(i int) []float64 { return a.V[i*a.Width : (i+1)*a.Width] }

var (
	descrRE   = regexp.MustCompile(`'descr'\s*:\s*'([<>|=]?)([fiu])([1248])'`)
	fortranRE = regexp.MustCompile(`'fortran_order'\s*:\s*(True|False)`)
	shapeRE   = regexp.MustCompile(`'shape'\s*:\s*\(\s*([0-9]+)\s*(?:,\s*([0-9]+)\s*)?,?\s*\)`)
)

// readActions reads a .npy array (NEP 1) of recorded actions: shape (N,)
// or (N, W), C order, dtype float32/float64, or a signed or unsigned
// integer of 1, 2, 4 or 8 bytes, little-endian. The header is matched by
// hand (a few patterns over NumPy's dict), as frameio's .npy reader takes
// uint8 frames only. Errors name the file.
func readActions(path string) (*Actions, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("actions %s: %w", path, unwrapPath(err))
	}
	defer f.Close()
	a, err := parseActions(bufio.NewReader(f))
	if err != nil {
		return nil, fmt.Errorf("actions %s: %w", path, err)
	}
	return a, nil
}

func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// maxActionRows bounds the rows of an actions file (far above any
// recording a laptop can probe).
const maxActionRows = 1 << 28

func parseActions(r io.Reader) (*Actions, error) {
	var pre [10]byte
	if _, err := io.ReadFull(r, pre[:8]); err != nil || string(pre[:6]) != "\x93NUMPY" {
		return nil, errors.New("not a .npy file (missing the \\x93NUMPY magic string)")
	}
	var hlen int
	switch pre[6] {
	case 1:
		if _, err := io.ReadFull(r, pre[8:10]); err != nil {
			return nil, errors.New(".npy header cut short")
		}
		hlen = int(binary.LittleEndian.Uint16(pre[8:10]))
	case 2, 3:
		var l [4]byte
		if _, err := io.ReadFull(r, l[:]); err != nil {
			return nil, errors.New(".npy header cut short")
		}
		hlen = int(binary.LittleEndian.Uint32(l[:]))
		if hlen > 1<<20 {
			return nil, fmt.Errorf(".npy header of %d bytes is too long", hlen)
		}
	default:
		return nil, fmt.Errorf(".npy format version %d.%d: want 1.0, 2.0 or 3.0", pre[6], pre[7])
	}
	hb := make([]byte, hlen)
	if _, err := io.ReadFull(r, hb); err != nil {
		return nil, errors.New(".npy header cut short")
	}
	h := string(hb)
	d := descrRE.FindStringSubmatch(h)
	if d == nil {
		return nil, errors.New("dtype: want float32, float64 or an integer type (descr '<f4', '<f8', '<i8', ...)")
	}
	if d[1] == ">" && d[3] != "1" {
		return nil, errors.New("dtype: big-endian arrays are not read; save with a little-endian dtype")
	}
	kind, size := d[2], int(d[3][0]-'0')
	if kind == "f" && size != 4 && size != 8 {
		return nil, fmt.Errorf("dtype float%d: want float32 or float64", 8*size)
	}
	if fo := fortranRE.FindStringSubmatch(h); fo == nil || fo[1] != "False" {
		return nil, errors.New("array must be in C order (fortran_order False)")
	}
	s := shapeRE.FindStringSubmatch(h)
	if s == nil {
		return nil, errors.New("shape: want (N,) or (N, W)")
	}
	rows, err1 := strconv.Atoi(s[1])
	width := 1
	var err2 error
	if s[2] != "" {
		width, err2 = strconv.Atoi(s[2])
	}
	if err1 != nil || err2 != nil || rows < 1 || rows > maxActionRows || width < 1 || width > maxActionWidth {
		return nil, fmt.Errorf("shape (%s, %s): want 1..%d rows of 1..%d values", s[1], s[2], maxActionRows, maxActionWidth)
	}
	n := rows * width
	raw := make([]byte, size)
	a := &Actions{Rows: rows, Width: width, Integer: kind != "f", V: make([]float64, n)}
	for i := 0; i < n; i++ {
		if _, err := io.ReadFull(r, raw); err != nil {
			return nil, fmt.Errorf("data ends at value %d (row %d) of %d×%d", i, i/width, rows, width)
		}
		var v float64
		switch {
		case kind == "f" && size == 4:
			v = float64(math.Float32frombits(binary.LittleEndian.Uint32(raw)))
		case kind == "f":
			v = math.Float64frombits(binary.LittleEndian.Uint64(raw))
		case kind == "u":
			v = float64(uintOf(raw))
		default:
			v = float64(intOf(raw))
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("row %d value %d is %v: recorded actions must be finite", i/width, i%width, v)
		}
		a.V[i] = v
	}
	if _, err := r.Read(raw[:1]); err == nil {
		return nil, fmt.Errorf("bytes after the %d×%d values the header announces", rows, width)
	}
	return a, nil
}

func uintOf(b []byte) uint64 {
	switch len(b) {
	case 1:
		return uint64(b[0])
	case 2:
		return uint64(binary.LittleEndian.Uint16(b))
	case 4:
		return uint64(binary.LittleEndian.Uint32(b))
	}
	return binary.LittleEndian.Uint64(b)
}

func intOf(b []byte) int64 {
	switch len(b) {
	case 1:
		return int64(int8(b[0]))
	case 2:
		return int64(int16(binary.LittleEndian.Uint16(b)))
	case 4:
		return int64(int32(binary.LittleEndian.Uint32(b)))
	}
	return int64(binary.LittleEndian.Uint64(b))
}

// Sequence is one recorded sequence: frames Start..Start+Len-1.
type Sequence struct {
	Start int `json:"start"`
	Len   int `json:"len"`
}

// readSequences reads the sequence boundaries of a recording of frames
// frames from an --episodes file. A file that starts with the .npy magic
// string is an array (see parseSequencesNPY): a bool or uint8 mask with
// one entry per frame, true at each sequence's first frame (what
// "tilebench record" writes as episode_starts.npy), or an integer array
// of start indices. Any other file must be text, in one of two layouts
// told apart by an optional header line:
//
//	start        one line per sequence: the index of its first frame;
//	             the first start is 0, starts increase strictly, each
//	             below frames (the default without a header)
//	sequence     one line per frame: a sequence id (any word or
//	             number); a new id starts a sequence, and an id may not
//	             come back after another one (sequences are contiguous);
//	             exactly frames lines
//
// Commas, tabs or semicolons may separate columns; the column named in
// the header is used (the first without one). Blank lines and lines
// starting with # are skipped. Errors are one line naming the file and the line, row or
// index, and quote at most a short excerpt of the file.
func readSequences(path string, frames int) ([]Sequence, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("episodes %s: %w", path, unwrapPath(err))
	}
	defer f.Close()
	br := bufio.NewReader(f)
	var seqs []Sequence
	if magic, _ := br.Peek(6); string(magic) == "\x93NUMPY" {
		seqs, err = parseSequencesNPY(br, frames)
	} else {
		var data []byte
		if data, err = io.ReadAll(br); err == nil {
			seqs, err = parseSequencesText(data, frames)
		}
	}
	if err != nil {
		return nil, fmt.Errorf("episodes %s: %w", path, unwrapPath(err))
	}
	return seqs, nil
}

// parseSequencesText checks that data is text (a UTF-8 byte-order mark
// is skipped) and parses it.
func parseSequencesText(data []byte, frames int) ([]Sequence, error) {
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	if err := checkText(data); err != nil {
		return nil, err
	}
	return parseSequences(string(data), frames)
}

func splitCols(line string) []string {
	f := strings.FieldsFunc(line, func(r rune) bool { return r == ',' || r == '\t' || r == ';' })
	for i := range f {
		f[i] = strings.TrimSpace(f[i])
	}
	return f
}

func parseSequences(data string, frames int) ([]Sequence, error) {
	lines := strings.Split(data, "\n")
	mode, col := "start", 0
	first := true
	var seqs []Sequence
	var ids = map[string]bool{}
	prevID := ""
	row := 0
	for ln, raw := range lines {
		line := strings.TrimSpace(strings.TrimSuffix(raw, "\r"))
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		cols := splitCols(line)
		if len(cols) == 0 {
			return nil, fmt.Errorf("line %d: %q holds no value", ln+1, excerpt(line))
		}
		if first {
			first = false
			if _, err := strconv.Atoi(cols[0]); err != nil || len(cols) > 1 {
				// A header names the column.
				found := false
				for i, c := range cols {
					switch strings.ToLower(c) {
					case "start", "first", "start_index":
						mode, col, found = "start", i, true
					case "sequence", "episode", "sequence_id", "episode_id", "id":
						mode, col, found = "id", i, true
					}
					if found {
						break
					}
				}
				if !found {
					if _, err := strconv.Atoi(cols[0]); err != nil {
						return nil, fmt.Errorf("line %d: header %q names no column start (one line per sequence) or sequence (one id per frame)", ln+1, excerpt(line))
					}
				} else {
					continue
				}
			}
		}
		if col >= len(cols) {
			return nil, fmt.Errorf("line %d: has %d columns, the %s column is number %d", ln+1, len(cols), mode, col+1)
		}
		v := cols[col]
		switch mode {
		case "start":
			s, err := strconv.Atoi(v)
			if err != nil {
				return nil, fmt.Errorf("line %d: start %q is not a whole number", ln+1, excerpt(v))
			}
			switch {
			case len(seqs) == 0 && s != 0:
				return nil, fmt.Errorf("line %d: the first sequence must start at frame 0, not %d", ln+1, s)
			case s < 0 || s >= frames:
				return nil, fmt.Errorf("line %d: start %d is out of range: the recording has frames 0..%d", ln+1, s, frames-1)
			case len(seqs) > 0 && s <= seqs[len(seqs)-1].Start:
				return nil, fmt.Errorf("line %d: start %d is not after the previous start %d: starts must increase", ln+1, s, seqs[len(seqs)-1].Start)
			}
			seqs = append(seqs, Sequence{Start: s})
		case "id":
			if row >= frames {
				return nil, fmt.Errorf("line %d: more sequence ids than the %d frames of the recording", ln+1, frames)
			}
			if row == 0 || v != prevID {
				if ids[v] {
					return nil, fmt.Errorf("line %d: sequence %q comes back at frame %d after another sequence: a sequence's frames must be contiguous", ln+1, excerpt(v), row)
				}
				ids[v] = true
				seqs = append(seqs, Sequence{Start: row})
				prevID = v
			}
			row++
		}
	}
	if len(seqs) == 0 {
		return nil, errors.New("holds no sequences")
	}
	if mode == "id" && row != frames {
		return nil, fmt.Errorf("has %d sequence ids, the recording has %d frames: want one id per frame", row, frames)
	}
	setLengths(seqs, frames)
	return seqs, nil
}
