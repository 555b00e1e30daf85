package frameio

import (
	"bufio"
	"fmt"
	"io"
)

// The pixel budget: every image the package reads is measured from its
// header (PNG/JPEG/GIF config, the .npy shape) and refused before any
// pixel is decoded when a frame is larger than the budget. Options.MaxPixels
// raises or lowers it; MaxFramePixels is the default. Sides are limited to
// MaxSide whatever the budget.

// budget returns the pixel budget that opt asks for.
func (opt Options) budget() int {
	if opt.MaxPixels > 0 {
		return opt.MaxPixels
	}
	return MaxFramePixels
}

// checkBudget refuses a w×h frame that holds no pixels, has a side over
// MaxSide, or more than maxPixels pixels.
func checkBudget(w, h, maxPixels int) error {
	if w <= 0 || h <= 0 {
		return fmt.Errorf("frame size %dx%d holds no pixels", w, h)
	}
	if w > MaxSide || h > MaxSide {
		return fmt.Errorf("frame size %dx%d is over the %d-pixel side limit", w, h, MaxSide)
	}
	if int64(w)*int64(h) > int64(maxPixels) {
		return fmt.Errorf("frame size %dx%d (%d pixels) is over the pixel budget of %d (raise it with --max-pixels)", w, h, int64(w)*int64(h), maxPixels)
	}
	return nil
}

// gifScan is what scanGIF learns from a GIF's block structure.
type gifScan struct {
	frames int
	pixels int64 // the sum of the frames' areas
}

// scanGIF walks the blocks of a GIF stream (GIF89a specification:
// header, logical screen descriptor, optional global colour table, then
// extensions and image descriptors until the trailer) without decoding
// any image data, and sums the frames' areas. image/gif decodes a whole
// file at once and has no such pass, hence this hand-written walk. It
// stops quietly at anything it cannot follow; the decoder then reports
// the damage.
func scanGIF(r io.Reader) gifScan {
	br := bufio.NewReaderSize(r, 32<<10)
	var s gifScan
	var hdr [13]byte
	if _, err := io.ReadFull(br, hdr[:]); err != nil {
		return s
	}
	if hdr[10]&0x80 != 0 {
		if _, err := br.Discard(3 << (hdr[10]&7 + 1)); err != nil {
			return s
		}
	}
	for {
		b, err := br.ReadByte()
		if err != nil {
			return s
		}
		switch b {
		case 0x21: // extension: label, then sub-blocks
			if _, err := br.ReadByte(); err != nil {
				return s
			}
			if skipSubBlocks(br) != nil {
				return s
			}
		case 0x2C: // image descriptor
			var d [9]byte
			if _, err := io.ReadFull(br, d[:]); err != nil {
				return s
			}
			w := int64(d[4]) | int64(d[5])<<8
			h := int64(d[6]) | int64(d[7])<<8
			s.frames++
			s.pixels += w * h
			if d[8]&0x80 != 0 {
				if _, err := br.Discard(3 << (d[8]&7 + 1)); err != nil {
					return s
				}
			}
			if _, err := br.ReadByte(); err != nil { // LZW minimum code size
				return s
			}
			if skipSubBlocks(br) != nil {
				return s
			}
		default: // the trailer (0x3B) or damage
			return s
		}
	}
}

func skipSubBlocks(br *bufio.Reader) error {
	for {
		n, err := br.ReadByte()
		if err != nil {
			return err
		}
		if n == 0 {
			return nil
		}
		if _, err := br.Discard(int(n)); err != nil {
			return err
		}
	}
}

// checkGIFBudget refuses a GIF whose frames, decoded together (image/gif
// keeps every frame at one byte a pixel), would take more memory than one
// RGBA frame at the budget: 4·maxPixels bytes.
func checkGIFBudget(r io.Reader, maxPixels int) error {
	s := scanGIF(r)
	if s.pixels > 4*int64(maxPixels) {
		return fmt.Errorf("its %d frames hold %d pixels together, over the whole-file limit of 4 × the pixel budget of %d (raise it with --max-pixels)", s.frames, s.pixels, maxPixels)
	}
	return nil
}
