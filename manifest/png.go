package manifest

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"image/png"

	"github.com/klauspost/compress/flate"
)

// Encoder encodes images, semantic masks and instance masks as PNG
// (ISO/IEC 15948). The images trueset writes (8-bit gray, opaque RGBA,
// indexed masks, 16-bit instance maps) take a fast path (png_fast.go) with a
// row filter and deflate level chosen per kind — and for gray and RGB
// images by their content, from a sample of rows — and buffers kept between
// calls, so a hot loop allocates nothing. The choice depends on the pixels
// alone, so the same image always gives the same bytes; any other image goes through
// image/png (encodeReference). Both give standard PNGs that decode to the
// same pixels. An Encoder is not safe for concurrent use; give each worker
// its own.
type Encoder struct {
	enc  png.Encoder
	pool onePool
	buf  bytes.Buffer
	fast fastState
}

type onePool struct{ b *png.EncoderBuffer }

func (p *onePool) Get() *png.EncoderBuffer  { return p.b }
func (p *onePool) Put(b *png.EncoderBuffer) { p.b = b }

// NewEncoder returns an Encoder.
func NewEncoder() *Encoder {
	e := &Encoder{}
	e.enc.BufferPool = &e.pool
	return e
}

// Encode returns the PNG bytes of m. The slice is valid until the next call.
func (e *Encoder) Encode(m image.Image) ([]byte, error) {
	if b, ok, err := e.encodeFast(m, nil); ok {
		return b, err
	}
	return e.encodeReference(m)
}

// PNGChoice is a row filter type (ISO/IEC 15948 §9.2: 0 None, 1 Sub, 2 Up,
// 3 Average, 4 Paeth) and a deflate level of github.com/klauspost/compress/flate
// (0 stored, 1–9, −1 default, −2 Huffman-only coding).
type PNGChoice struct {
	Filter int
	Level  int
}

// EncodeWith is Encode with the filter and level of gray and RGB images
// fixed to c instead of chosen by content (masks and instance maps keep
// theirs), for benchmarks that compare choices. Other images, a filter
// outside 0–4 and a level outside −2–9 give an error.
func (e *Encoder) EncodeWith(m image.Image, c PNGChoice) ([]byte, error) {
	if c.Filter < filterNone || c.Filter > filterPaeth {
		return nil, fmt.Errorf("png: filter type %d, want 0 to 4", c.Filter)
	}
	if c.Level < flate.HuffmanOnly || c.Level > flate.BestCompression {
		return nil, fmt.Errorf("png: deflate level %d, want -2 to 9", c.Level)
	}
	b, ok, err := e.encodeFast(m, &c)
	if !ok {
		return nil, fmt.Errorf("png: EncodeWith takes the gray, RGB, indexed and 16-bit images of the fast path, not %T", m)
	}
	return b, err
}

// encodeReference is the simple path: image/png at its default settings
// (zlib default level, adaptive row filters, none for indexed images).
func (e *Encoder) encodeReference(m image.Image) ([]byte, error) {
	e.buf.Reset()
	if err := e.enc.Encode(&e.buf, m); err != nil {
		return nil, err
	}
	return e.buf.Bytes(), nil
}

// IgnoreID is the mask value for "no label here" (out-of-frame or cut-out
// pixels that a loss should skip).
const IgnoreID = 255

// Palette returns the mask palette for a class table: entry i is class i's
// color, so an indexed mask is viewable as is. It always has 256 entries so
// that image/png writes an 8-bit indexed PNG (it picks 1, 2 or 4 bits for
// smaller palettes) and every index is valid; unused entries are black and
// IgnoreID is white.
func Palette(classes []Class) color.Palette {
	p := make(color.Palette, 256)
	for i := range p {
		p[i] = color.RGBA{0, 0, 0, 255}
	}
	p[IgnoreID] = color.RGBA{255, 255, 255, 255}
	for _, c := range classes {
		p[c.ID] = color.RGBA{c.Color[0], c.Color[1], c.Color[2], 255}
	}
	return p
}

// MaskPalette is Palette cut after the largest class id: one entry per id
// of the class table, which is all a mask file needs to carry (5 entries
// instead of 256 for classes 0–4). Give it to masks encoded with an Encoder,
// which writes any larger index a pixel uses (IgnoreID) with Palette's
// color for it; image/png would write a short palette at 1, 2 or 4 bits.
func MaskPalette(classes []Class) color.Palette {
	n := 1
	for _, c := range classes {
		n = max(n, c.ID+1)
	}
	return Palette(classes)[:n:n]
}
