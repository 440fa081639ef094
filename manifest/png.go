package manifest

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
)

// Encoder encodes images, semantic masks and instance masks as PNG
// (ISO/IEC 15948). The images trueset writes (8-bit gray, opaque RGBA,
// indexed masks, 16-bit instance maps) take a fast path (png_fast.go) with a
// row filter and deflate level chosen per kind and buffers kept between
// calls, so a hot loop allocates nothing; any other image goes through
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
	if b, ok, err := e.encodeFast(m); ok {
		return b, err
	}
	return e.encodeReference(m)
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
// smaller palettes); unused entries are black and IgnoreID is white.
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
