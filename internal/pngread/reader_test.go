package pngread

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"image"
	"image/color"
	"image/png"
	"math/rand/v2"
	"reflect"
	"testing"
)

// The reference throughout is the standard library's image/png: a Decoder
// must give, for every input, the image png.Decode gives (type, bounds,
// stride, pixels, palette) or the same error, even when the files before
// it left a palette, an image or an inflater behind to reuse.

// chunk is one PNG chunk: length, type, data and the CRC-32 of type and
// data (PNG specification, section 5.3).
func chunk(typ string, data []byte) []byte {
	b := binary.BigEndian.AppendUint32(nil, uint32(len(data)))
	b = append(b, typ...)
	b = append(b, data...)
	return binary.BigEndian.AppendUint32(b, crc32.ChecksumIEEE(b[4:]))
}

// spec describes a PNG built byte by byte with random pixel data.
type spec struct {
	w, h, colorType, depth int
	interlace              bool
	plte, trns             []byte
	idats                  int  // IDAT chunks the stream is split into
	badFilter              bool // one row with filter type 5
	extraChunk             bool // an ancillary tEXt chunk before IDAT
}

// adam7 is the PNG specification's interlacing (section 8.2): x and y
// offset and step of each of the seven passes.
var adam7 = [7][4]int{{0, 0, 8, 8}, {4, 0, 8, 8}, {0, 4, 4, 8}, {2, 0, 4, 4}, {0, 2, 2, 4}, {1, 0, 2, 2}, {0, 1, 1, 2}}

// build writes s as a PNG: every row a random filter type 0..4 (Sub, Up,
// Average, Paeth or none) over random bytes, which any decoder must undo
// the same way.
func build(s spec, rng *rand.Rand) []byte {
	channels := map[int]int{0: 1, 2: 3, 3: 1, 4: 2, 6: 4}[s.colorType]
	bits := channels * s.depth
	var raw []byte
	row := func(w int) {
		if w == 0 {
			return
		}
		f := byte(rng.IntN(5))
		if s.badFilter && len(raw) > 0 && rng.IntN(3) == 0 {
			f, s.badFilter = 5, false
		}
		raw = append(raw, f)
		n := (w*bits + 7) / 8
		for i := 0; i < n; i++ {
			v := byte(rng.Uint32())
			if s.colorType == 3 && s.depth == 8 && len(s.plte) > 0 && rng.IntN(4) > 0 {
				v = byte(int(v) % (len(s.plte) / 3)) // mostly in range, sometimes not
			}
			raw = append(raw, v)
		}
	}
	if s.interlace {
		for _, p := range adam7 {
			w := (s.w - p[0] + p[2] - 1) / p[2]
			for y := p[1]; y < s.h; y += p[3] {
				row(w)
			}
		}
	} else {
		for y := 0; y < s.h; y++ {
			row(s.w)
		}
	}
	var z bytes.Buffer
	zw := zlib.NewWriter(&z)
	zw.Write(raw)
	zw.Close()
	il := byte(0)
	if s.interlace {
		il = 1
	}
	ihdr := binary.BigEndian.AppendUint32(nil, uint32(s.w))
	ihdr = binary.BigEndian.AppendUint32(ihdr, uint32(s.h))
	ihdr = append(ihdr, byte(s.depth), byte(s.colorType), 0, 0, il)
	out := []byte("\x89PNG\r\n\x1a\n")
	out = append(out, chunk("IHDR", ihdr)...)
	if s.plte != nil {
		out = append(out, chunk("PLTE", s.plte)...)
	}
	if s.trns != nil {
		out = append(out, chunk("tRNS", s.trns)...)
	}
	if s.extraChunk {
		out = append(out, chunk("tEXt", []byte("Comment\x00made by reader_test.go"))...)
	}
	data := z.Bytes()
	n := max(s.idats, 1)
	for i := 0; i < n; i++ {
		out = append(out, chunk("IDAT", data[i*len(data)/n:(i+1)*len(data)/n])...)
	}
	return append(out, chunk("IEND", nil)...)
}

func randBytes(rng *rand.Rand, n int) []byte {
	b := make([]byte, n)
	for i := range b {
		b[i] = byte(rng.Uint32())
	}
	return b
}

// corpus is valid PNGs of every color type and bit depth the PNG
// specification allows (table 11.1), interlaced or not, with and without
// tRNS, split over IDAT chunks; PNGs image/png's encoder writes; and
// damaged copies of them (truncated, a byte changed with its chunk's CRC
// left or fixed, a bad filter type).
func corpus(t testing.TB) [][]byte {
	rng := rand.New(rand.NewPCG(11, 1))
	var valid [][]byte
	depths := map[int][]int{0: {1, 2, 4, 8, 16}, 2: {8, 16}, 3: {1, 2, 4, 8}, 4: {8, 16}, 6: {8, 16}}
	sizes := [][2]int{{1, 1}, {3, 2}, {8, 8}, {13, 7}, {16, 16}, {5, 17}}
	for _, ct := range []int{0, 2, 3, 4, 6} {
		for _, depth := range depths[ct] {
			for i, sz := range sizes {
				s := spec{w: sz[0], h: sz[1], colorType: ct, depth: depth, interlace: i%2 == 1, idats: 1 + i%3, extraChunk: i == 2}
				if ct == 3 {
					entries := 1 + rng.IntN(1<<depth)
					if i == 4 {
						entries = 1 << depth // a shared palette: the same bytes each time
					}
					s.plte = randBytes(rng, 3*entries)
					if i == 4 {
						s.plte = bytes.Repeat([]byte{7, 8, 9}, entries)
					}
					if i%3 == 0 {
						s.trns = randBytes(rng, 1+rng.IntN(entries))
					}
				}
				if (ct == 0 || ct == 2) && i%3 == 0 {
					s.trns = randBytes(rng, map[int]int{0: 2, 2: 6}[ct])
					if depth < 16 {
						for j := 0; j < len(s.trns); j += 2 {
							s.trns[j] = 0
							s.trns[j+1] &= byte(1<<depth - 1)
						}
					}
				}
				valid = append(valid, build(s, rng))
			}
		}
	}
	// The same palette bytes with and without tRNS, one after the other.
	pal := bytes.Repeat([]byte{1, 2, 3, 200, 100, 50}, 8)
	valid = append(valid,
		build(spec{w: 9, h: 4, colorType: 3, depth: 8, plte: pal, trns: []byte{0, 128, 255}}, rng),
		build(spec{w: 9, h: 4, colorType: 3, depth: 8, plte: pal}, rng),
		build(spec{w: 9, h: 4, colorType: 3, depth: 4, plte: pal}, rng))
	// image/png's own encoder, at every compression level.
	for _, m := range []image.Image{
		image.NewGray(image.Rect(0, 0, 10, 6)), image.NewGray16(image.Rect(0, 0, 16, 16)),
		image.NewRGBA(image.Rect(0, 0, 7, 9)), image.NewNRGBA(image.Rect(0, 0, 12, 3)),
		image.NewRGBA64(image.Rect(0, 0, 4, 4)), image.NewNRGBA64(image.Rect(0, 0, 5, 5)),
		image.NewPaletted(image.Rect(0, 0, 16, 16), color.Palette{color.Black, color.White, color.RGBA{200, 60, 60, 255}}),
		image.NewPaletted(image.Rect(0, 0, 16, 16), color.Palette{color.Black, color.NRGBA{1, 2, 3, 4}}),
	} {
		fill(m, rng)
		for _, lvl := range []png.CompressionLevel{png.DefaultCompression, png.NoCompression, png.BestSpeed, png.BestCompression} {
			var b bytes.Buffer
			if err := (&png.Encoder{CompressionLevel: lvl}).Encode(&b, m); err != nil {
				t.Fatal(err)
			}
			valid = append(valid, b.Bytes())
		}
	}
	all := append([][]byte(nil), valid...)
	for i, v := range valid {
		all = append(all, v[:len(v)/2], v[:len(v)-1], v[:33], v[:8])
		for k := 0; k < 4; k++ {
			c := bytes.Clone(v)
			c[8+rng.IntN(len(c)-8)] ^= byte(1 + rng.IntN(255))
			all = append(all, c, fixCRCs(bytes.Clone(c)))
		}
		if i%4 == 0 {
			bad := append(bytes.Clone(v[:len(v)-12]), v[len(v)-12:]...)
			all = append(all, append(bad, chunk("IDAT", []byte{1, 2, 3})...)) // after IEND: never read
		}
	}
	all = append(all, build(spec{w: 6, h: 6, colorType: 0, depth: 8, badFilter: true}, rng), nil, []byte("\x89PNG\r\n\x1a\n"))
	// A changed byte in IHDR can claim millions of pixels, which both
	// decoders would allocate before finding the data short: left out.
	kept := all[:0]
	for _, b := range all {
		if cfg, err := png.DecodeConfig(bytes.NewReader(b)); err != nil || cfg.Width*cfg.Height <= 1<<16 {
			kept = append(kept, b)
		}
	}
	return kept
}

func fill(m image.Image, rng *rand.Rand) {
	b := m.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			c := color.NRGBA64{uint16(rng.Uint32()), uint16(rng.Uint32()), uint16(rng.Uint32()), uint16(rng.Uint32())}
			switch m := m.(type) {
			case *image.Paletted:
				m.SetColorIndex(x, y, uint8(rng.IntN(len(m.Palette))))
			case *image.RGBA, *image.RGBA64, *image.Gray, *image.Gray16:
				c.A = 0xffff
				m.(interface{ Set(int, int, color.Color) }).Set(x, y, c)
			default:
				m.(interface{ Set(int, int, color.Color) }).Set(x, y, c)
			}
		}
	}
}

// fixCRCs recomputes every chunk's CRC of a PNG whose bytes were changed,
// so that the change reaches the chunk's parser; it stops where the chunk
// lengths stop making sense.
func fixCRCs(b []byte) []byte {
	for p := 8; p+12 <= len(b); {
		n := int(binary.BigEndian.Uint32(b[p:]))
		if n < 0 || p+12+n > len(b) {
			break
		}
		binary.BigEndian.PutUint32(b[p+8+n:], crc32.ChecksumIEEE(b[p+4:p+8+n]))
		p += 12 + n
	}
	return b
}

// same says how got and gotErr differ from image/png's decode of b ("" if
// they do not).
func same(b []byte, got image.Image, gotErr error) string {
	want, wantErr := png.Decode(bytes.NewReader(b))
	if (gotErr == nil) != (wantErr == nil) || (gotErr != nil && gotErr.Error() != wantErr.Error()) {
		return fmt.Sprintf("error %v, image/png's %v", gotErr, wantErr)
	}
	if wantErr != nil {
		return ""
	}
	if reflect.TypeOf(got) != reflect.TypeOf(want) {
		return fmt.Sprintf("image %T, image/png's %T", got, want)
	}
	if !reflect.DeepEqual(got, want) {
		return fmt.Sprintf("%T %v differs from image/png's", got, got.Bounds())
	}
	return ""
}

// sameConfig says how got and gotErr differ from image/png's DecodeConfig
// of b ("" if they do not).
func sameConfig(b []byte, got image.Config, gotErr error) string {
	want, wantErr := png.DecodeConfig(bytes.NewReader(b))
	if (gotErr == nil) != (wantErr == nil) || (gotErr != nil && gotErr.Error() != wantErr.Error()) {
		return fmt.Sprintf("config error %v, image/png's %v", gotErr, wantErr)
	}
	if !reflect.DeepEqual(got, want) {
		return fmt.Sprintf("config %dx%d %T, image/png's %dx%d %T", got.Width, got.Height, got.ColorModel, want.Width, want.Height, want.ColorModel)
	}
	return ""
}

func TestDecoderMatchesImagePNG(t *testing.T) {
	all := corpus(t)
	var dec Decoder
	fails, decoded := 0, 0
	// Forward, then backward: every file follows a different one the
	// second time, whose palette, image and inflater are reused.
	for pass := 0; pass < 2; pass++ {
		for j := range all {
			i := j
			if pass == 1 {
				i = len(all) - 1 - j
			}
			// As verify does: the header first, then the pixels.
			cfg, err := dec.DecodeConfig(bytes.NewReader(all[i]))
			msg := sameConfig(all[i], cfg, err)
			if msg == "" {
				m, err := dec.Decode(bytes.NewReader(all[i]))
				if err == nil {
					decoded++
				}
				msg = same(all[i], m, err)
			}
			if msg != "" {
				fails++
				if fails <= 10 {
					t.Errorf("pass %d, file %d: %s", pass, i, msg)
				}
			}
		}
	}
	// The corpus must exercise both outcomes to mean anything.
	if decoded < len(all)/4 || decoded > 2*len(all)*3/4 {
		t.Errorf("%d of %d decodes succeeded; the corpus should mix valid and damaged files", decoded, 2*len(all))
	}
}

// TestDecoderReusesMemory checks the point of a Decoder: after the first
// file, decoding another of the same kind allocates next to nothing, where
// image/png allocates its ~44 KiB inflater every time.
func TestDecoderReusesMemory(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	pal := bytes.Repeat([]byte{10, 20, 30}, 4)
	files := [][]byte{
		build(spec{w: 16, h: 16, colorType: 3, depth: 8, plte: pal}, rng),
		build(spec{w: 16, h: 16, colorType: 0, depth: 16}, rng),
	}
	for _, b := range files {
		if _, err := png.Decode(bytes.NewReader(b)); err != nil {
			t.Fatal(err)
		}
		var dec Decoder
		dec.Decode(bytes.NewReader(b))
		r := bytes.NewReader(b)
		n := testing.AllocsPerRun(20, func() {
			r.Reset(b)
			if _, err := dec.Decode(r); err != nil {
				t.Fatal(err)
			}
		})
		std := testing.AllocsPerRun(20, func() {
			r.Reset(b)
			png.Decode(r)
		})
		// One: zlib's Reset allocates its 8-byte Adler-32 state; image/png
		// also allocates the inflater, its window and tables, a bufio.Reader,
		// the row buffers, the image and, for an indexed file, its palette.
		if n > 1 || std < 5 {
			t.Errorf("%d allocations per decode with a Decoder, %v with image/png", int(n), std)
		}
	}
}

func FuzzDecoderMatchesImagePNG(f *testing.F) {
	for _, b := range corpus(f) {
		f.Add(b)
	}
	var dec Decoder // shared across inputs, so that reuse is fuzzed too
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) > 1<<16 {
			return
		}
		if cfg, err := png.DecodeConfig(bytes.NewReader(b)); err == nil && cfg.Width*cfg.Height > 1<<20 {
			return
		}
		cfg, err := dec.DecodeConfig(bytes.NewReader(b))
		if msg := sameConfig(b, cfg, err); msg != "" {
			t.Error(msg)
		}
		m, err := dec.Decode(bytes.NewReader(b))
		if msg := same(b, m, err); msg != "" {
			t.Error(msg)
		}
	})
}
