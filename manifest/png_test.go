package manifest

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"image"
	"image/color"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"
)

// ihdr returns bit depth and color type from a PNG's IHDR chunk, which the
// PNG specification (ISO/IEC 15948, §11.2.2) places right after the 8-byte
// signature: length(4) "IHDR"(4) width(4) height(4) depth(1) color type(1).
func ihdr(t *testing.T, b []byte) (w, h uint32, depth, ctype byte) {
	t.Helper()
	if !bytes.Equal(b[:8], []byte("\x89PNG\r\n\x1a\n")) || string(b[12:16]) != "IHDR" {
		t.Fatalf("not a PNG with a leading IHDR: % x", b[:16])
	}
	return binary.BigEndian.Uint32(b[16:]), binary.BigEndian.Uint32(b[20:]), b[24], b[25]
}

func TestMaskAndInstanceFormats(t *testing.T) {
	classes := []Class{{ID: 0, Name: "background"}, {ID: 1, Name: "a", Color: [3]uint8{255, 0, 0}}, {ID: 2, Name: "b", Color: [3]uint8{0, 255, 0}}}
	mask := image.NewPaletted(image.Rect(0, 0, 3, 2), Palette(classes))
	mask.Pix = []uint8{0, 1, 2, 2, 1, 0}
	inst := image.NewGray16(image.Rect(0, 0, 3, 2))
	inst.SetGray16(2, 1, struct{ Y uint16 }{300})
	enc := NewEncoder()

	b, err := enc.Encode(mask)
	if err != nil {
		t.Fatal(err)
	}
	b = append([]byte(nil), b...)
	if w, h, depth, ctype := ihdr(t, b); w != 3 || h != 2 || depth != 8 || ctype != 3 {
		t.Fatalf("mask IHDR %dx%d depth %d color type %d; want 3x2, 8-bit indexed (type 3)", w, h, depth, ctype)
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	pm := m.(*image.Paletted)
	if !bytes.Equal(pm.Pix, mask.Pix) {
		t.Fatalf("class ids %v, want %v", pm.Pix, mask.Pix)
	}
	if r, g, _, _ := pm.Palette[1].RGBA(); r>>8 != 255 || g != 0 {
		t.Fatalf("palette entry 1 is not class a's color")
	}

	b, err = enc.Encode(inst)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, depth, ctype := ihdr(t, b); depth != 16 || ctype != 0 {
		t.Fatalf("instances IHDR depth %d color type %d; want 16-bit gray (type 0)", depth, ctype)
	}
	g, _ := png.Decode(bytes.NewReader(b))
	if g.(*image.Gray16).Gray16At(2, 1).Y != 300 {
		t.Fatal("instance id 300 did not survive the round trip")
	}
}

// Instance ids, areas and boxes of a tiny literal mask, checkable by eye:
//
//	0 1 1
//	0 1 2
//
// id 1: area 3, box [1,0,3,2]; id 2: area 1, box [2,1,3,2].
func TestMeasureInstancesLiteral(t *testing.T) {
	m := image.NewGray16(image.Rect(0, 0, 3, 2))
	for i, v := range []uint16{0, 1, 1, 0, 1, 2} {
		m.SetGray16(i%3, i/3, struct{ Y uint16 }{v})
	}
	s := MeasureInstances(m)
	if len(s) != 2 || s[1].Area != 3 || s[1].BBox != [4]int{1, 0, 3, 2} || s[2].Area != 1 || s[2].BBox != [4]int{2, 1, 3, 2} {
		t.Fatalf("got %+v %+v", s[1], s[2])
	}
}

// decodeSame decodes a and b with image/png (the standard library's decoder,
// an implementation we did not write) and fails unless both give the same
// image type, bounds, pixels and palette.
func decodeSame(t *testing.T, name string, a, b []byte) {
	t.Helper()
	ma, err := png.Decode(bytes.NewReader(a))
	if err != nil {
		t.Fatalf("%s: fast path output does not decode: %v", name, err)
	}
	mb, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: reference output does not decode: %v", name, err)
	}
	if fmt.Sprintf("%T", ma) != fmt.Sprintf("%T", mb) || ma.Bounds() != mb.Bounds() {
		t.Fatalf("%s: fast decodes to %T %v, reference to %T %v", name, ma, ma.Bounds(), mb, mb.Bounds())
	}
	var pa, pb []uint8
	switch ma := ma.(type) {
	case *image.Gray:
		pa, pb = ma.Pix, mb.(*image.Gray).Pix
	case *image.RGBA:
		pa, pb = ma.Pix, mb.(*image.RGBA).Pix
	case *image.Gray16:
		pa, pb = ma.Pix, mb.(*image.Gray16).Pix
	case *image.Paletted:
		pa, pb = ma.Pix, mb.(*image.Paletted).Pix
		// The fast path writes the palette up to the largest index used:
		// every pixel must show the same color.
		pal := mb.(*image.Paletted).Palette
		for _, v := range ma.Pix {
			if !reflect.DeepEqual(ma.Palette[v], pal[v]) {
				t.Fatalf("%s: index %d is %v, reference %v", name, v, ma.Palette[v], pal[v])
			}
		}
	default:
		t.Fatalf("%s: unexpected decoded type %T", name, ma)
	}
	if !bytes.Equal(pa, pb) {
		t.Fatalf("%s: pixels differ", name)
	}
}

// fastAndReference encodes m both ways; the fast path must take it.
func fastAndReference(t *testing.T, name string, m image.Image) (fast, ref []byte) {
	t.Helper()
	e := NewEncoder()
	b, ok, err := e.encodeFast(m, nil)
	if !ok || err != nil {
		t.Fatalf("%s: fast path refused (%v, %v)", name, ok, err)
	}
	fast = append([]byte(nil), b...)
	r, err := e.encodeReference(m)
	if err != nil {
		t.Fatal(err)
	}
	return fast, append([]byte(nil), r...)
}

// testImages returns gray, RGB, indexed and 16-bit images: tiny literal ones
// (checkable by eye), random ones of odd sizes (every Paeth case: the
// predictor picks a, b and c), flat and extreme ones, and sub-images whose
// bounds do not start at the origin.
func testImages() map[string]image.Image {
	classes := []Class{{ID: 0, Name: "background"}, {ID: 1, Name: "a", Color: [3]uint8{255, 0, 0}}, {ID: 2, Name: "b", Color: [3]uint8{0, 255, 0}}}
	out := map[string]image.Image{}

	g := image.NewGray(image.Rect(0, 0, 3, 2))
	g.Pix = []uint8{0, 128, 255, 7, 0, 200}
	out["gray literal"] = g
	c := image.NewRGBA(image.Rect(0, 0, 2, 2))
	c.Pix = []uint8{255, 0, 0, 255, 0, 255, 0, 255, 0, 0, 255, 255, 10, 20, 30, 255}
	out["rgb literal"] = c
	p := image.NewPaletted(image.Rect(0, 0, 3, 2), Palette(classes))
	p.Pix = []uint8{0, 1, 2, 2, 1, IgnoreID}
	out["indexed literal"] = p
	i16 := image.NewGray16(image.Rect(0, 0, 3, 2))
	i16.Pix = []uint8{0, 0, 0, 1, 1, 44, 0, 0, 255, 255, 0, 1}
	out["gray16 literal"] = i16

	rng := rand.New(rand.NewPCG(7, 7))
	for _, sz := range [][2]int{{1, 1}, {1, 9}, {9, 1}, {7, 5}, {64, 64}, {129, 33}} {
		r := image.Rect(0, 0, sz[0], sz[1])
		g, c, p, i16 := image.NewGray(r), image.NewRGBA(r), image.NewPaletted(r, Palette(classes)), image.NewGray16(r)
		for k := range g.Pix {
			g.Pix[k] = uint8(rng.IntN(256))
			p.Pix[k] = uint8(rng.IntN(3))
		}
		for k := range c.Pix {
			c.Pix[k] = uint8(rng.IntN(256))
			if k%4 == 3 {
				c.Pix[k] = 255
			}
		}
		for k := range i16.Pix {
			i16.Pix[k] = uint8(rng.IntN(256))
		}
		n := fmt.Sprintf("%dx%d", sz[0], sz[1])
		out["gray random "+n], out["rgb random "+n], out["indexed random "+n], out["gray16 random "+n] = g, c, p, i16
	}
	flat := image.NewGray(image.Rect(0, 0, 40, 30))
	for k := range flat.Pix {
		flat.Pix[k] = 255
	}
	out["gray flat white"] = flat
	big := image.NewGray16(image.Rect(0, 0, 40, 30))
	for k := range big.Pix {
		big.Pix[k] = 0xff
	}
	out["gray16 all 65535"] = big
	r := image.Rect(3, 2, 50, 40)
	out["gray sub-image"] = out["gray random 64x64"].(*image.Gray).SubImage(r)
	out["rgb sub-image"] = out["rgb random 64x64"].(*image.RGBA).SubImage(r)
	out["indexed sub-image"] = out["indexed random 64x64"].(*image.Paletted).SubImage(r)
	out["gray16 sub-image"] = out["gray16 random 64x64"].(*image.Gray16).SubImage(r)
	return out
}

// The fast path decodes, with image/png, to the same pixels as the
// reference path for every kind of image trueset writes, and its IHDR says
// the same color type and bit depth.
func TestFastEncoderMatchesReference(t *testing.T) {
	for name, m := range testImages() {
		fast, ref := fastAndReference(t, name, m)
		decodeSame(t, name, fast, ref)
		fw, fh, fd, fc := ihdr(t, fast)
		rw, rh, rd, rc := ihdr(t, ref)
		if fw != rw || fh != rh || fd != rd || fc != rc {
			t.Fatalf("%s: fast IHDR %dx%d depth %d type %d, reference %dx%d depth %d type %d", name, fw, fh, fd, fc, rw, rh, rd, rc)
		}
	}
}

// Images the fast path does not handle go the reference way, and Encode
// gives image/png's bytes for them.
func TestFastEncoderDeclines(t *testing.T) {
	r := image.Rect(0, 0, 4, 4)
	translucent := image.NewRGBA(r)
	translucent.Pix[3] = 128
	seeThrough := image.NewPaletted(r, append(Palette(nil)[:255:255], color.RGBA{}))
	for name, m := range map[string]image.Image{
		"translucent RGBA": translucent, "translucent palette entry": seeThrough,
		"NRGBA": image.NewNRGBA(r), "empty": image.NewGray(image.Rect(0, 0, 0, 0)),
	} {
		e := NewEncoder()
		if _, ok, _ := e.encodeFast(m, nil); ok {
			t.Fatalf("%s: fast path took it", name)
		}
		got, gerr := e.Encode(m)
		var want bytes.Buffer
		werr := png.Encode(&want, m)
		if (gerr == nil) != (werr == nil) || !bytes.Equal(got, want.Bytes()) {
			t.Fatalf("%s: Encode differs from image/png (%v, %v)", name, gerr, werr)
		}
	}
}

// Every chunk the fast path writes has a correct length and CRC-32 (ISO/IEC
// 15948 §5.3), the chunks come in the order IHDR [PLTE] IDAT IEND, and the
// zlib header is valid (RFC 1950 §2.2: CMF·256 + FLG is a multiple of 31).
func TestFastEncoderChunks(t *testing.T) {
	for name, m := range testImages() {
		b, _ := fastAndReference(t, name, m)
		var types []string
		for off := 8; off < len(b); {
			n := int(binary.BigEndian.Uint32(b[off:]))
			typ := string(b[off+4 : off+8])
			if crc32.ChecksumIEEE(b[off+4:off+8+n]) != binary.BigEndian.Uint32(b[off+8+n:]) {
				t.Fatalf("%s: %s CRC wrong", name, typ)
			}
			if typ == "IDAT" && (uint16(b[off+8])<<8|uint16(b[off+9]))%31 != 0 {
				t.Fatalf("%s: zlib header %x %x", name, b[off+8], b[off+9])
			}
			types = append(types, typ)
			off += 12 + n
		}
		want := "IHDR IDAT IEND"
		if _, ok := m.(*image.Paletted); ok {
			want = "IHDR PLTE IDAT IEND"
		}
		if got := strings.Join(types, " "); got != want {
			t.Fatalf("%s: chunks %s, want %s", name, got, want)
		}
	}
}

// The fast path allocates nothing once its buffers have grown.
func TestFastEncoderAllocs(t *testing.T) {
	ims := testImages()
	e := NewEncoder()
	for _, name := range []string{"gray random 64x64", "rgb random 64x64", "indexed random 64x64", "gray16 random 64x64"} {
		m := ims[name]
		e.Encode(m)
		if n := testing.AllocsPerRun(20, func() { e.Encode(m) }); n != 0 {
			t.Fatalf("%s: %v allocations per encode", name, n)
		}
	}
}

// pngcheck (Debian's package of the libpng project's checker) accepts the
// fast path's files, when it is installed; bench/run.sh installs it.
func TestFastEncoderPngcheck(t *testing.T) {
	bin, err := exec.LookPath("pngcheck")
	if err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("pngcheck not installed; .ci/run installs it")
		}
		t.Skip("pngcheck not installed (apt-get install pngcheck); CI installs it and runs this test")
	}
	dir := t.TempDir()
	var files []string
	for name, m := range testImages() {
		b, _ := fastAndReference(t, name, m)
		f := filepath.Join(dir, strings.ReplaceAll(name, " ", "_")+".png")
		if err := os.WriteFile(f, b, 0o644); err != nil {
			t.Fatal(err)
		}
		files = append(files, f)
	}
	// Content-chosen and forced filters and levels on smooth and noisy images.
	e := NewEncoder()
	for name, m := range choiceImages() {
		for f := -1; f <= filterPaeth; f++ {
			var b []byte
			var err error
			if f < 0 {
				b, err = e.Encode(m)
			} else {
				b, err = e.EncodeWith(m, PNGChoice{Filter: f, Level: []int{levelHuffman, 1, 4, 9, 0}[f]})
			}
			if err != nil {
				t.Fatal(err)
			}
			p := filepath.Join(dir, fmt.Sprintf("%s_f%d.png", strings.ReplaceAll(name, " ", "_"), f))
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
			files = append(files, p)
		}
	}
	// Masks whose PLTE is the class table, or extended to an index beyond it.
	short := MaskPalette([]Class{{ID: 0, Name: "background"}, {ID: 1, Name: "a", Color: [3]uint8{255, 0, 0}}, {ID: 2, Name: "b", Color: [3]uint8{0, 255, 0}}})
	for i, pix := range [][]uint8{{0, 1, 2, 0}, {0, 0, 0, 0}, {0, 1, IgnoreID, 2}, {0, 9, 1, 1}} {
		m := image.NewPaletted(image.Rect(0, 0, 2, 2), short)
		copy(m.Pix, pix)
		b, err := e.Encode(m)
		if err != nil {
			t.Fatal(err)
		}
		p := filepath.Join(dir, fmt.Sprintf("short_palette_%d.png", i))
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		files = append(files, p)
	}
	out, err := exec.Command(bin, append([]string{"-q"}, files...)...).CombinedOutput()
	if err != nil {
		t.Fatalf("pngcheck: %v\n%s", err, out)
	}
}

// filterRowReference filters one row byte by byte with the formulas of
// ISO/IEC 15948 §9.2–9.4 (x the byte, a the byte bpp to its left, b the
// byte above, c the byte above a, each 0 where it falls outside the image),
// with the Paeth predictor written as the specification's pseudocode.
func filterRowReference(f byte, dst, cur, prev []byte, bpp int) {
	for i := range cur {
		var a, b, c int
		if i >= bpp {
			a, c = int(cur[i-bpp]), int(prev[i-bpp])
		}
		b = int(prev[i])
		var pred int
		switch f {
		case filterNone:
			pred = 0
		case filterSub:
			pred = a
		case filterUp:
			pred = b
		case filterAvg:
			pred = (a + b) / 2 // floor((a + b) / 2), computed without overflow
		case filterPaeth:
			p := a + b - c
			pa, pb, pc := iabs(p-a), iabs(p-b), iabs(p-c)
			switch {
			case pa <= pb && pa <= pc:
				pred = a
			case pb <= pc:
				pred = b
			default:
				pred = c
			}
		}
		dst[i] = uint8(int(cur[i]) - pred) // modulo 256
	}
}

func iabs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

// filterRow gives the bytes of the specification's formulas
// (filterRowReference) for every filter type, 1 to 8 bytes a pixel, random
// rows (every Paeth tie and branch comes up), constant rows, and the first
// row (no row above).
func TestFilterRowMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	for it := 0; it < 3000; it++ {
		bpp := []int{1, 2, 3, 4, 6, 8}[it%6]
		n := bpp * (1 + rng.IntN(40))
		cur, prev := make([]byte, n), make([]byte, n)
		span := []int{256, 4, 1}[it%3] // full range, near-ties, constant
		for i := range cur {
			cur[i], prev[i] = byte(rng.IntN(span)), byte(rng.IntN(span))
			if span == 1 {
				cur[i], prev[i] = 200, 100
			}
		}
		if it%7 == 0 {
			clear(prev)
		}
		for f := byte(filterNone); f <= filterPaeth; f++ {
			got, want := make([]byte, n), make([]byte, n)
			filterRow(f, got, cur, prev, bpp)
			filterRowReference(f, want, cur, prev, bpp)
			if !bytes.Equal(got, want) {
				t.Fatalf("filter %d, bpp %d: got % x, want % x (cur % x prev % x)", f, bpp, got, want, cur, prev)
			}
		}
	}
}

// choiceImages are gray and RGB images for the content choice: smooth
// (a gradient with a few flat shapes, as a generated scene), noisy (the same
// with Gaussian noise of σ 5 added, as an augmented copy), and random.
func choiceImages() map[string]image.Image {
	out := map[string]image.Image{}
	rng := rand.New(rand.NewPCG(3, 4))
	for _, side := range []int{8, 64, 200} {
		g := image.NewGray(image.Rect(0, 0, side, side))
		c := image.NewRGBA(image.Rect(0, 0, side, side))
		gn := image.NewGray(image.Rect(0, 0, side, side))
		cn := image.NewRGBA(image.Rect(0, 0, side, side))
		noisy := func(v int) uint8 {
			return uint8(min(255, max(0, v+int(math.Round(5*rng.NormFloat64())))))
		}
		for y := 0; y < side; y++ {
			for x := 0; x < side; x++ {
				v := 40 + 60*y/side
				if (x-side/3)*(x-side/3)+(y-side/2)*(y-side/2) < side*side/25 {
					v = 220
				}
				g.Pix[y*side+x] = uint8(v)
				gn.Pix[y*side+x] = noisy(v)
				for k := 0; k < 3; k++ {
					c.Pix[(y*side+x)*4+k] = uint8(v - 30*k)
					cn.Pix[(y*side+x)*4+k] = noisy(v - 30*k)
				}
				c.Pix[(y*side+x)*4+3], cn.Pix[(y*side+x)*4+3] = 255, 255
			}
		}
		n := fmt.Sprint(side)
		out["gray smooth "+n], out["rgb smooth "+n], out["gray noisy "+n], out["rgb noisy "+n] = g, c, gn, cn
	}
	return out
}

// Every filter type and a range of deflate levels, forced with EncodeWith
// on gray and RGB images, decode with image/png to the pixels of the
// reference path; and the content choice, over smooth and noisy images,
// comes to both filters and both kinds of level it can pick, so those paths
// are exercised by the tests above.
func TestEncodeWithEveryChoice(t *testing.T) {
	ims := choiceImages()
	for name, m := range testImages() {
		if _, ok := m.(*image.Gray); ok {
			ims[name] = m
		}
		if _, ok := m.(*image.RGBA); ok {
			ims[name] = m
		}
	}
	e := NewEncoder()
	for name, m := range ims {
		_, ref := fastAndReference(t, name, m)
		for f := filterNone; f <= filterPaeth; f++ {
			for _, lv := range []int{levelHuffman, 0, 1, 4, 9} {
				b, err := e.EncodeWith(m, PNGChoice{Filter: f, Level: lv})
				if err != nil {
					t.Fatal(err)
				}
				decodeSame(t, fmt.Sprintf("%s, filter %d, level %d", name, f, lv), b, ref)
			}
		}
	}
	seen := map[[2]int]bool{}
	for _, m := range ims {
		var s fastState
		r := m.Bounds()
		var row rowFunc
		n, bpp := r.Dx(), 1
		switch m := m.(type) {
		case *image.Gray:
			row = func(y int, _ []byte) []byte { o := m.PixOffset(r.Min.X, r.Min.Y+y); return m.Pix[o : o+n] }
		case *image.RGBA:
			n, bpp = 3*r.Dx(), 3
			row = func(y int, conv []byte) []byte {
				o := m.PixOffset(r.Min.X, r.Min.Y+y)
				for i := 0; i < r.Dx(); i++ {
					copy(conv[3*i:3*i+3], m.Pix[o+4*i:])
				}
				return conv
			}
		}
		f, lv := s.chooseImage(r.Dy(), n, bpp, row)
		seen[[2]int{int(f), lv}] = true
	}
	for _, want := range [][2]int{{filterAvg, levelHuffman}, {filterPaeth, levelHuffman}, {filterPaeth, imageLevel}} {
		if !seen[want] {
			t.Errorf("no test image is encoded with filter %d, level %d (seen %v)", want[0], want[1], seen)
		}
	}
	if _, err := e.EncodeWith(ims["gray smooth 8"], PNGChoice{Filter: 5}); err == nil {
		t.Error("filter type 5 accepted")
	}
	if _, err := e.EncodeWith(ims["gray smooth 8"], PNGChoice{Level: 10}); err == nil {
		t.Error("level 10 accepted")
	}
}

// The same image gives the same bytes from a fresh Encoder and from one
// that has just encoded other images at other levels and sizes, so the
// bytes do not depend on which worker, and after what, encodes it.
func TestEncoderBytesIndependentOfHistory(t *testing.T) {
	ims := choiceImages()
	for name, m := range testImages() {
		ims[name] = m
	}
	names := make([]string, 0, len(ims))
	for n := range ims {
		names = append(names, n)
	}
	sort.Strings(names)
	used := NewEncoder()
	for _, n := range names {
		used.Encode(ims[n])
	}
	for i := len(names) - 1; i >= 0; i-- {
		m := ims[names[i]]
		fresh, err := NewEncoder().Encode(m)
		if err != nil {
			t.Fatal(err)
		}
		again, err := used.Encode(m)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(fresh, again) {
			t.Fatalf("%s: a used encoder gives other bytes than a fresh one", names[i])
		}
	}
}

// A mask's PLTE is its palette — MaskPalette(classes) has an entry per
// class id, up to the largest, each Palette's — extended to the largest index a pixel uses when
// that is beyond it (ISO/IEC 15948 §11.2.3: the palette must cover every
// index used), black but for IgnoreID, which is white; the file stays
// 8-bit indexed whatever the palette's length (the design's mask format).
// Checked by reading the PLTE chunk's length and decoding with image/png.
func TestMaskPalette(t *testing.T) {
	classes := []Class{{ID: 0, Name: "background"}, {ID: 1, Name: "a", Color: [3]uint8{255, 0, 0}}, {ID: 2, Name: "b", Color: [3]uint8{0, 255, 0}}, {ID: 3, Name: "c", Color: [3]uint8{0, 0, 255}}, {ID: 4, Name: "d", Color: [3]uint8{9, 9, 9}}}
	pal := MaskPalette(classes)
	if len(pal) != 5 || !reflect.DeepEqual(pal, Palette(classes)[:5]) {
		t.Fatalf("MaskPalette of classes 0-4 has %d entries: %v", len(pal), pal)
	}
	gap := MaskPalette([]Class{{ID: 0, Name: "background"}, {ID: 3, Name: "x", Color: [3]uint8{1, 2, 3}}})
	for _, tc := range []struct {
		name    string
		pal     color.Palette
		pix     []uint8
		entries int
	}{
		{"background only", pal, []uint8{0, 0, 0, 0}, 5},
		{"classes up to 2", pal, []uint8{0, 2, 1, 0}, 5},
		{"class 4", pal, []uint8{4, 0, 0, 0}, 5},
		{"ignore", pal, []uint8{0, 1, IgnoreID, 0}, 256},
		{"beyond the palette", pal, []uint8{0, 1, 7, 0}, 8},
		{"ids 0 and 3", gap, []uint8{0, 3, 3, 0}, 4},
		{"2-entry palette", color.Palette{color.Black, color.White}, []uint8{0, 1, 1, 0}, 2},
	} {
		tc.pix = append(tc.pix, make([]uint8, 4*37)...) // 4×38: rows longer than 8 bytes
		tc.pix[len(tc.pix)-5], tc.pix[len(tc.pix)-13] = tc.pix[1], tc.pix[2]
		m := image.NewPaletted(image.Rect(0, 0, 38, 4), tc.pal)
		copy(m.Pix, tc.pix)
		b, err := NewEncoder().Encode(m)
		if err != nil {
			t.Fatal(err)
		}
		if _, _, depth, ctype := ihdr(t, b); depth != 8 || ctype != 3 {
			t.Fatalf("%s: depth %d color type %d, want 8-bit indexed", tc.name, depth, ctype)
		}
		// PLTE follows IHDR (8 signature + 25 IHDR bytes).
		if string(b[37:41]) != "PLTE" || int(binary.BigEndian.Uint32(b[33:])) != 3*tc.entries {
			t.Fatalf("%s: PLTE %q of %d bytes, want %d entries", tc.name, b[37:41], binary.BigEndian.Uint32(b[33:]), tc.entries)
		}
		d, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatal(err)
		}
		pm := d.(*image.Paletted)
		if !bytes.Equal(pm.Pix, m.Pix) {
			t.Fatalf("%s: indices %v, want %v", tc.name, pm.Pix, m.Pix)
		}
		for _, v := range m.Pix {
			want := color.Color(color.RGBA{0, 0, 0, 255})
			switch {
			case int(v) < len(tc.pal):
				want = tc.pal[v]
			case v == IgnoreID:
				want = color.RGBA{255, 255, 255, 255}
			}
			r1, g1, b1, a1 := pm.Palette[v].RGBA()
			r2, g2, b2, a2 := want.RGBA()
			if [4]uint32{r1, g1, b1, a1} != [4]uint32{r2, g2, b2, a2} {
				t.Fatalf("%s: index %d decodes to %v, want %v", tc.name, v, pm.Palette[v], want)
			}
		}
	}
}
