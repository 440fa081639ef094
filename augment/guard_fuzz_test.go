package augment

import (
	"bytes"
	"image"
	"image/png"
	"testing"
)

// FuzzPNGHeader: the IHDR reader never panics, and whenever it accepts a
// header that the standard library's png.DecodeConfig also reads, both give
// the same size; a size it accepts is positive and below 2^31.
func FuzzPNGHeader(f *testing.F) {
	for _, m := range []image.Image{image.NewGray(image.Rect(0, 0, 3, 2)), image.NewGray16(image.Rect(0, 0, 1, 9)), opaqueRGBA(image.Rect(0, 0, 5, 5))} {
		f.Add(pngOf(f, m))
	}
	f.Add([]byte("\x89PNG\r\n\x1a\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		h, err := parsePNGHeader(b)
		if err != nil {
			return
		}
		if h.Width < 1 || h.Height < 1 || h.Width > 1<<31-1 || h.Height > 1<<31-1 {
			t.Fatalf("accepted size %d×%d", h.Width, h.Height)
		}
		if cfg, err := png.DecodeConfig(bytes.NewReader(b)); err == nil && (cfg.Width != h.Width || cfg.Height != h.Height) {
			t.Fatalf("IHDR reader says %d×%d, image/png %d×%d", h.Width, h.Height, cfg.Width, cfg.Height)
		}
	})
}

// FuzzJPEGScans: the scan counter never panics, ends on every input, never
// reports more than one scan past its limit, and counts no more scans than
// there are SOS marker codes (0xFF 0xDA) in the input.
func FuzzJPEGScans(f *testing.F) {
	f.Add(jpegWithScans(f, 0), 10)
	f.Add(jpegWithScans(f, 12), 10)
	f.Add([]byte{0xFF, 0xD8, 0xFF, 0xDA, 0x00, 0x02, 0xFF, 0x00, 0xFF, 0xD0, 0xFF, 0xD9}, 3)
	f.Fuzz(func(t *testing.T, b []byte, limit int) {
		limit = 1 + int(uint(limit)%200)
		n, err := countJPEGScans(bytes.NewReader(b), limit)
		if n > limit+1 || n > bytes.Count(b, []byte{0xFF, 0xDA}) {
			t.Fatalf("%d scans with limit %d in %d bytes", n, limit, len(b))
		}
		if n > limit && err == nil {
			t.Fatalf("%d scans over the limit %d without an error", n, limit)
		}
	})
}
