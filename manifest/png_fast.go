package manifest

import (
	"encoding/binary"
	"hash/adler32"
	"hash/crc32"
	"image"
	"image/color"

	"github.com/klauspost/compress/flate"
)

// The fast PNG path. It writes the images trueset makes (8-bit gray, opaque
// RGBA as 8-bit RGB, indexed with an opaque palette, 16-bit gray) as
// IHDR, PLTE for indexed images, one IDAT, IEND (ISO/IEC 15948 §5.6), like
// image/png but for two things: indexed images are always 8-bit (image/png
// packs palettes of up to 16 entries into 1, 2 or 4 bits) and their PLTE
// reaches every index used, even beyond the image's palette (plte); and
// the row filter and deflate
// level are chosen per kind of image, and for gray and RGB images by their
// content (chooseImage). Buffers are reused so that encoding allocates
// nothing. Deflate is
// github.com/klauspost/compress/flate, a well-kept, widely used pure-Go
// implementation whose fast levels are several times quicker than
// compress/flate's; its output is a plain RFC 1951 stream. Any other image
// goes through the reference path (encodeReference, image/png at its
// defaults). The tests check that both paths decode to the same pixels.

// PNG filter types (ISO/IEC 15948 §9.2).
const (
	filterNone  = 0
	filterSub   = 1
	filterUp    = 2
	filterAvg   = 3
	filterPaeth = 4
)

// Deflate levels. Masks and instance maps are flat regions of equal values,
// for which no filter keeps long runs of one byte for deflate to match (Sub
// was 20–25% larger); level 1 is within 100 bytes a file of level 6.
// Images are chosen by content (chooseImage).
const (
	levelHuffman = flate.HuffmanOnly // no string matching, Huffman codes only
	imageLevel   = 4                 // images with flat stretches
	maskLevel    = 1
	instLevel    = 1
)

// pngSignature starts every PNG file (ISO/IEC 15948 §5.2).
const pngSignature = "\x89PNG\r\n\x1a\n"

// sink is the io.Writer the deflate writer appends to.
type sink struct{ b []byte }

func (s *sink) Write(p []byte) (int, error) {
	s.b = append(s.b, p...)
	return len(p), nil
}

// fastState holds the fast path's reused buffers.
type fastState struct {
	out   sink
	raw   []byte // filtered scanlines, each led by its filter type byte
	rows  [2][]byte
	zero  []byte
	try   []byte // one filtered sample row (chooseImage)
	pal   []byte // PLTE data
	flate map[int]*flate.Writer
}

// rowFunc returns the raw bytes of scanline y; conv is scratch of the row's
// length that it may fill and return (for pixel layouts that need converting).
type rowFunc func(y int, conv []byte) []byte

// encodeFast encodes m on the fast path, or reports ok = false for an image
// it does not handle (the caller then uses the reference path). choice, when
// not nil, replaces the content-chosen filter and level of an image (gray or
// RGB); masks and instance maps keep theirs.
func (e *Encoder) encodeFast(m image.Image, choice *PNGChoice) (b []byte, ok bool, err error) {
	r := m.Bounds()
	w, h := r.Dx(), r.Dy()
	if w <= 0 || h <= 0 || w >= 1<<24 || h >= 1<<24 {
		return nil, false, nil // image/png's own errors and limits
	}
	var (
		ctype, depth byte
		bpp, n       int
		filter       byte
		level        int
		pal          []byte // PLTE chunk data
		row          rowFunc
		isImage      bool
	)
	s := &e.fast
	switch m := m.(type) {
	case *image.Gray:
		ctype, depth, bpp, n, isImage = 0, 8, 1, w, true
		row = func(y int, _ []byte) []byte {
			o := m.PixOffset(r.Min.X, r.Min.Y+y)
			return m.Pix[o : o+w]
		}
	case *image.RGBA:
		if !m.Opaque() {
			return nil, false, nil
		}
		ctype, depth, bpp, n, isImage = 2, 8, 3, 3*w, true
		row = func(y int, conv []byte) []byte {
			o := m.PixOffset(r.Min.X, r.Min.Y+y)
			src := m.Pix[o : o+4*w]
			for i, j := 0, 0; j < len(src); i, j = i+3, j+4 {
				conv[i], conv[i+1], conv[i+2] = src[j], src[j+1], src[j+2]
			}
			return conv
		}
	case *image.Paletted:
		// A translucent entry needs a tRNS chunk; that goes the reference way.
		if len(m.Palette) == 0 || len(m.Palette) > 256 || !opaquePalette(m.Palette) {
			return nil, false, nil
		}
		ctype, depth, bpp, n, filter, level = 3, 8, 1, w, filterNone, maskLevel
		row = func(y int, _ []byte) []byte {
			o := m.PixOffset(r.Min.X, r.Min.Y+y)
			return m.Pix[o : o+w]
		}
		pal = s.plte(m.Palette, h, row)
	case *image.Gray16:
		ctype, depth, bpp, n, filter, level = 0, 16, 2, 2*w, filterNone, instLevel
		row = func(y int, _ []byte) []byte {
			o := m.PixOffset(r.Min.X, r.Min.Y+y)
			return m.Pix[o : o+2*w]
		}
	default:
		return nil, false, nil
	}
	if isImage {
		if choice != nil {
			filter, level = byte(choice.Filter), choice.Level
		} else {
			filter, level = s.chooseImage(h, n, bpp, row)
		}
	}
	s.filterRows(h, n, bpp, filter, row)

	out := append(s.out.b[:0], pngSignature...)
	var ihdr [13]byte
	binary.BigEndian.PutUint32(ihdr[0:], uint32(w))
	binary.BigEndian.PutUint32(ihdr[4:], uint32(h))
	ihdr[8], ihdr[9] = depth, ctype // compression, filter method, interlace: 0
	out = appendChunk(out, "IHDR", ihdr[:])
	if pal != nil {
		out = appendChunk(out, "PLTE", pal)
	}

	// IDAT: one zlib stream (RFC 1950): header, deflate data, Adler-32.
	start := len(out)
	out = append(out, 0, 0, 0, 0, 'I', 'D', 'A', 'T', 0x78, zlibFlags(level))
	s.out.b = out
	fw := s.writer(level)
	fw.Reset(&s.out)
	if _, err := fw.Write(s.raw); err != nil {
		return nil, true, err
	}
	if err := fw.Close(); err != nil {
		return nil, true, err
	}
	out = binary.BigEndian.AppendUint32(s.out.b, adler32.Checksum(s.raw))
	out = closeChunk(out, start)
	out = appendChunk(out, "IEND", nil)
	s.out.b = out
	return out, true, nil
}

// plte returns the PLTE data of an indexed image: its palette, extended
// to the largest index a pixel uses when that is beyond it (ISO/IEC 15948
// §11.2.3: a pixel index outside the palette is an error), the added
// entries as Palette fills them: white for IgnoreID, black for any other.
// A mask made with MaskPalette for classes 0–4 thus carries 5 entries, and
// 256 only when it holds IgnoreID.
func (s *fastState) plte(p color.Palette, h int, row rowFunc) []byte {
	n := len(p)
	for y := 0; y < h && n < 256; y++ {
		r := row(y, nil)
		for ; len(r) >= 8; r = r[8:] {
			if binary.LittleEndian.Uint64(r) == 0 {
				continue // background, eight pixels at a time
			}
			for _, v := range r[:8] {
				n = max(n, int(v)+1)
			}
		}
		for _, v := range r {
			n = max(n, int(v)+1)
		}
	}
	out := s.pal[:0]
	for i := 0; i < n; i++ {
		switch {
		case i < len(p):
			cr, cg, cb, _ := p[i].RGBA()
			out = append(out, uint8(cr>>8), uint8(cg>>8), uint8(cb>>8))
		case i == IgnoreID:
			out = append(out, 255, 255, 255)
		default:
			out = append(out, 0, 0, 0)
		}
	}
	s.pal = out
	return out
}

// chooseImage picks the row filter and deflate level of an image (gray or
// RGB, n bytes a row) from a sample of its rows: h/8 rows, at least 1 and at
// most 16, evenly spaced, each filtered against the row above as the image
// will be.
//
//   - Level: when at least a quarter of the sampled Paeth residuals are
//     zero, the image has flat stretches that string matching codes far
//     below the bit a byte Huffman-only coding needs at least: Paeth at
//     imageLevel. Otherwise (pixel noise) matching finds next to nothing
//     and Huffman-only coding is both faster and smaller.
//   - Filter, for Huffman-only coding: Average or Paeth, whichever gives the
//     smaller sum of absolute residuals (read as signed bytes) over the
//     sample, the heuristic the PNG specification suggests for choosing
//     filters (ISO/IEC 15948, "Filter selection"; from memory). Average
//     suits pixel noise, which it averages over two neighbours (on
//     independent noise of variance σ² its residual has variance 1.5σ²,
//     Sub's and Up's 2σ²); Paeth suits edges.
//
// The threshold sits in a wide gap: on 24 samples of each preset and of
// bench/recipes' 512² and 1024² scenes, and augmented copies of them
// (bench/plans/kernels.yaml's steps), the sampled zero share was at most
// 0.13 on the copies and at least 0.41 on the generated images.
// BenchmarkPNGChoice (png_bench_test.go) compares the choice with fixed
// filters and levels.
func (s *fastState) chooseImage(h, n, bpp int, row rowFunc) (filter byte, level int) {
	if cap(s.try) < n {
		s.try = make([]byte, n)
	}
	if cap(s.zero) < n {
		s.zero = make([]byte, n)
	}
	try := s.try[:n]
	rows := min(16, max(1, h/8))
	step := h / rows
	sample := func(f byte) (sad, zeros int) {
		for k := 0; k < rows; k++ {
			y := step/2 + k*step
			prev := s.zero[:n]
			if y > 0 {
				prev = row(y-1, s.nextRow(n))
			}
			filterRow(f, try, row(y, s.nextRow(n)), prev, bpp)
			a, z := residualStats(try)
			sad += a
			zeros += z
		}
		return sad, zeros
	}
	sadP, zeros := sample(filterPaeth)
	if 4*zeros >= rows*n {
		return filterPaeth, imageLevel
	}
	if sadA, _ := sample(filterAvg); sadA < sadP {
		return filterAvg, levelHuffman
	}
	return filterPaeth, levelHuffman
}

// residualStats returns the sum of the absolute values of r read as signed
// bytes, and how many are zero.
func residualStats(r []byte) (sad, zeros int) {
	for _, v := range r {
		a := int(int8(v))
		m := a >> 63
		sad += (a ^ m) - m
		if v == 0 {
			zeros++
		}
	}
	return sad, zeros
}

// filterRows fills s.raw with h scanlines of n bytes filtered with filter,
// row(y) giving the raw bytes of scanline y.
func (s *fastState) filterRows(h, n, bpp int, filter byte, row rowFunc) {
	size := h * (n + 1)
	if cap(s.raw) < size {
		s.raw = make([]byte, size)
	}
	s.raw = s.raw[:size]
	if cap(s.zero) < n {
		s.zero = make([]byte, n)
	}
	prev := s.zero[:n]
	for y := 0; y < h; y++ {
		cur := row(y, s.nextRow(n))
		dst := s.raw[y*(n+1) : (y+1)*(n+1)]
		dst[0] = filter
		filterRow(filter, dst[1:], cur, prev, bpp)
		prev = cur
	}
}

// nextRow returns a scratch row of n bytes, alternating between two buffers
// so that the previous row stays intact while the next is converted.
func (s *fastState) nextRow(n int) []byte {
	s.rows[0], s.rows[1] = s.rows[1], s.rows[0]
	if cap(s.rows[0]) < n {
		s.rows[0] = make([]byte, n)
	}
	return s.rows[0][:n]
}

func (s *fastState) writer(level int) *flate.Writer {
	if fw := s.flate[level]; fw != nil {
		return fw
	}
	if s.flate == nil {
		s.flate = map[int]*flate.Writer{}
	}
	fw, err := flate.NewWriter(nil, level)
	if err != nil {
		panic(err) // levels are constants of this file
	}
	s.flate[level] = fw
	return fw
}

// filterRow writes row cur filtered with type f into dst, prev being the
// row above (zeros for the first row) and bpp the bytes per complete pixel
// (ISO/IEC 15948 §9.2: x is the byte being filtered, a the byte bpp to its
// left, b the byte above, c the byte above a; a and c are 0 left of the
// row). filterRowReference is its twin, written from the specification's
// formulas byte by byte.
func filterRow(f byte, dst, cur, prev []byte, bpp int) {
	n := len(cur)
	dst, prev = dst[:n], prev[:n]
	switch f {
	case filterNone:
		copy(dst, cur)
	case filterSub:
		copy(dst[:bpp], cur[:bpp])
		for i := bpp; i < n; i++ {
			dst[i] = cur[i] - cur[i-bpp]
		}
	case filterUp:
		for i := range dst {
			dst[i] = cur[i] - prev[i]
		}
	case filterAvg:
		for i := 0; i < bpp && i < n; i++ {
			dst[i] = cur[i] - prev[i]>>1
		}
		for i := bpp; i < n; i++ {
			dst[i] = cur[i] - uint8((uint(cur[i-bpp])+uint(prev[i]))>>1)
		}
	case filterPaeth:
		paethRow(dst, cur, prev, bpp)
	}
}

// paethRow writes the Paeth filter of cur (ISO/IEC 15948 §9.4): each byte
// minus the one of its left (a), upper (b) and upper-left (c) neighbours
// nearest to p = a + b − c, ties broken in the order a, b, c. The choice is
// written as two conditional moves rather than branches, which noisy rows
// would mispredict half the time: start from a; take b if it is strictly
// nearer; take c if it is strictly nearer than both.
func paethRow(dst, cur, prev []byte, bpp int) {
	n := len(cur)
	dst, prev = dst[:n], prev[:n]
	for i := 0; i < bpp && i < n; i++ {
		dst[i] = cur[i] - prev[i] // a = c = 0: the predictor is b
	}
	for i := bpp; i < n; i++ {
		a, b, c := int32(cur[i-bpp]), int32(prev[i]), int32(prev[i-bpp])
		pa, pb := b-c, a-c // |p − a|, |p − b| before taking absolute values
		pc := pa + pb      // p − c
		pa = (pa ^ (pa >> 31)) - (pa >> 31)
		pb = (pb ^ (pb >> 31)) - (pb >> 31)
		pc = (pc ^ (pc >> 31)) - (pc >> 31)
		p := a
		if pb < pa {
			p, pa = b, pb
		}
		if pc < pa {
			p = c
		}
		dst[i] = cur[i] - uint8(p)
	}
}

// zlibFlags is the FLG byte after CMF 0x78 (deflate, 32 KiB window): FLEVEL
// as compress/zlib sets it for the level, and FCHECK making CMF·256 + FLG
// a multiple of 31 (RFC 1950 §2.2).
func zlibFlags(level int) byte {
	var f byte
	switch {
	case level == 6 || level == -1:
		f = 2 << 6
	case level >= 7:
		f = 3 << 6
	case level >= 2:
		f = 1 << 6
	}
	return f + byte(31-(0x78<<8+uint16(f))%31)
}

func opaquePalette(p color.Palette) bool {
	for _, c := range p {
		if _, _, _, a := c.RGBA(); a != 0xffff {
			return false
		}
	}
	return true
}

// appendChunk appends a PNG chunk: length, type, data, CRC-32 of type and data.
func appendChunk(out []byte, typ string, data []byte) []byte {
	start := len(out)
	out = append(out, 0, 0, 0, 0)
	out = append(out, typ...)
	out = append(out, data...)
	return closeChunk(out, start)
}

// closeChunk fills in the length of the chunk that starts at out[start] and
// appends its CRC.
func closeChunk(out []byte, start int) []byte {
	binary.BigEndian.PutUint32(out[start:], uint32(len(out)-start-8))
	return binary.BigEndian.AppendUint32(out, crc32.ChecksumIEEE(out[start+4:]))
}
