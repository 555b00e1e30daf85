package record

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"

	"tilebench/patch/frameio"
)

// column is one .npy file of the dataset: rows of a fixed shape, appended
// through a buffer, the row count patched into the header in place.
type column struct {
	name   string
	descr  string // NumPy type: '|u1', '<f4', '<i2', '<i4', '<u8', '|b1'
	shape  []int  // per row
	item   int    // bytes per value
	row    int    // bytes per row
	hlen   int    // header bytes
	f      *os.File
	w      *bufio.Writer
	rows   int
	buf    []byte
	broken error
}

// newColumn describes a column; open creates or reopens its file.
func newColumn(name, descr string, shape ...int) *column {
	if shape == nil {
		shape = []int{} // a scalar per row: [] in the manifest, not null
	}
	item := map[string]int{"|u1": 1, "|b1": 1, "<i2": 2, "<i4": 4, "<f4": 4, "<u8": 8}[descr]
	c := &column{name: name, descr: descr, shape: shape, item: item}
	c.row = item
	for _, d := range shape {
		c.row *= d
	}
	c.hlen = len(c.header(0))
	c.buf = make([]byte, 0, c.row)
	return c
}

func (c *column) file() string { return c.name + ".npy" }

func (c *column) header(rows int) []byte {
	return frameio.NPYHeaderOf(c.descr, append([]int{rows}, c.shape...))
}

// create makes the file in dir with an empty array.
func (c *column) create(dir string) error {
	f, err := os.OpenFile(filepath.Join(dir, c.file()), os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return err
	}
	if _, err := f.Write(c.header(0)); err != nil {
		f.Close()
		return fmt.Errorf("%s: %w", c.file(), err)
	}
	c.f, c.rows = f, 0
	c.w = bufio.NewWriterSize(f, 1<<18)
	return nil
}

// reopen opens the file of a dataset being resumed, cuts it to rows rows
// (dropping an episode that was being written when the run stopped) and
// positions it for appending.
func (c *column) reopen(dir string, rows int) error {
	path := filepath.Join(dir, c.file())
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		return err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return err
	}
	size := int64(c.hlen) + int64(rows)*int64(c.row)
	if st.Size() < size {
		f.Close()
		return fmt.Errorf("%s holds %d bytes, the manifest's %d rows need %d", c.file(), st.Size(), rows, size)
	}
	head := make([]byte, c.hlen)
	if _, err := io.ReadFull(f, head); err != nil || string(head) != string(c.header(rows)) {
		f.Close()
		return fmt.Errorf("%s: header does not match the manifest (%d rows of %v %s)", c.file(), rows, c.shape, c.descr)
	}
	if err := f.Truncate(size); err != nil {
		f.Close()
		return err
	}
	if _, err := f.Seek(size, io.SeekStart); err != nil {
		f.Close()
		return err
	}
	c.f, c.rows = f, rows
	c.w = bufio.NewWriterSize(f, 1<<18)
	return nil
}

// put appends one row of raw bytes (len c.row).
func (c *column) put(b []byte) {
	if c.broken != nil {
		return
	}
	if _, err := c.w.Write(b); err != nil {
		c.broken = err
	}
	c.rows++
}

// putF32 appends one row of float32 values.
func (c *column) putF32(v []float64) {
	b := c.buf[:0]
	for _, x := range v {
		b = binary.LittleEndian.AppendUint32(b, math.Float32bits(float32(x)))
	}
	c.put(b)
}

// putScalar appends one row holding one value of the column's type.
func (c *column) putScalar(v uint64) {
	b := c.buf[:c.item]
	switch c.item {
	case 1:
		b[0] = byte(v)
	case 2:
		binary.LittleEndian.PutUint16(b, uint16(v))
	case 4:
		binary.LittleEndian.PutUint32(b, uint32(v))
	case 8:
		binary.LittleEndian.PutUint64(b, v)
	}
	c.put(b)
}

// sync flushes the buffer and writes the row count into the header, so
// that the file is a complete .npy array of c.rows rows.
func (c *column) sync() error {
	if c.broken != nil {
		return fmt.Errorf("%s: %w", c.file(), c.broken)
	}
	if err := c.w.Flush(); err != nil {
		return fmt.Errorf("%s: %w", c.file(), err)
	}
	if _, err := c.f.WriteAt(c.header(c.rows), 0); err != nil {
		return fmt.Errorf("%s: %w", c.file(), err)
	}
	return nil
}

// cut drops rows after keep (an episode that failed) and syncs.
func (c *column) cut(keep int) error {
	if err := c.w.Flush(); err != nil {
		return err
	}
	size := int64(c.hlen) + int64(keep)*int64(c.row)
	if err := c.f.Truncate(size); err != nil {
		return err
	}
	if _, err := c.f.Seek(size, io.SeekStart); err != nil {
		return err
	}
	c.rows = keep
	c.broken = nil
	return c.sync()
}

func (c *column) close() error {
	if c.f == nil {
		return nil
	}
	err := c.f.Close()
	c.f = nil
	return err
}
