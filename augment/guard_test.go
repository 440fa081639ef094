package augment

import (
	"bytes"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"math"
	"strings"
	"sync"
	"testing"
)

// pngOf encodes m with the standard library's PNG encoder.
func pngOf(t testing.TB, m image.Image) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := png.Encode(&b, m); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// withIHDR returns b with its IHDR data edited by edit and the chunk CRC
// made right again (PNG §5.3: CRC-32 over chunk type and data).
func withIHDR(b []byte, edit func(d []byte)) []byte {
	c := append([]byte(nil), b...)
	edit(c[16:29])
	binary.BigEndian.PutUint32(c[29:33], crc32.ChecksumIEEE(c[12:29]))
	return c
}

// TestParsePNGHeader checks the IHDR reader against the standard library:
// for the encoder's own files it gives what png.DecodeConfig gives, and it
// refuses what the PNG standard forbids (ISO/IEC 15948 §5.2 signature, §5.3
// CRC, §11.2.2 IHDR fields and the bit depths allowed per color type).
func TestParsePNGHeader(t *testing.T) {
	r := image.Rect(0, 0, 7, 5)
	pal := color.Palette{color.Black, color.White}
	for _, c := range []struct {
		name      string
		m         image.Image
		depth, ct byte
	}{
		{"8-bit gray", image.NewGray(r), 8, 0},
		{"16-bit gray", image.NewGray16(r), 16, 0},
		{"8-bit RGB (opaque RGBA is written as RGB)", opaqueRGBA(r), 8, 2},
		{"indexed", image.NewPaletted(r, pal), 1, 3}, // two colors: the encoder packs 1 bit per pixel
	} {
		b := pngOf(t, c.m)
		h, err := parsePNGHeader(b)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		cfg, err := png.DecodeConfig(bytes.NewReader(b))
		if err != nil {
			t.Fatal(err)
		}
		if h.Width != cfg.Width || h.Height != cfg.Height || h.Depth != c.depth || h.ColorType != c.ct {
			t.Errorf("%s: got %+v, want %d×%d depth %d type %d", c.name, h, cfg.Width, cfg.Height, c.depth, c.ct)
		}
	}
	good := pngOf(t, image.NewGray(r))
	for _, c := range []struct {
		name string
		b    []byte
		want string
	}{
		{"empty", nil, "shorter than"},
		{"signature only", good[:8], "shorter than"},
		{"JPEG", []byte("\xff\xd8\xff\xe0" + strings.Repeat("\x00", 40)), "no PNG signature"},
		{"IHDR not first", func() []byte { c := append([]byte(nil), good...); copy(c[12:16], "tEXt"); return c }(), "not a 13-byte IHDR"},
		{"CRC changed", func() []byte { c := append([]byte(nil), good...); c[32] ^= 1; return c }(), "CRC"},
		{"width 0", withIHDR(good, func(d []byte) { binary.BigEndian.PutUint32(d[0:4], 0) }), "size of 0×5"},
		{"height 2^31", withIHDR(good, func(d []byte) { binary.BigEndian.PutUint32(d[4:8], 1<<31) }), "size of"},
		{"color type 5", withIHDR(good, func(d []byte) { d[9] = 5 }), "color type 5 does not exist"},
		{"RGB at 4 bits", withIHDR(good, func(d []byte) { d[8], d[9] = 4, 2 }), "bit depth 4 is not allowed with color type 2"},
		{"indexed at 16 bits", withIHDR(good, func(d []byte) { d[8], d[9] = 16, 3 }), "bit depth 16 is not allowed with color type 3"},
		{"interlace 2", withIHDR(good, func(d []byte) { d[12] = 2 }), "interlace"},
	} {
		if _, err := parsePNGHeader(c.b); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want it to say %q", c.name, err, c.want)
		}
	}
}

func opaqueRGBA(r image.Rectangle) *image.RGBA {
	m := image.NewRGBA(r)
	for i := range m.Pix {
		m.Pix[i] = 255
	}
	return m
}

// jpegWithScans returns a baseline JPEG from the standard library's encoder
// (one interleaved scan: image/jpeg writes a single SOS) with extra copies of
// its scan (the SOS segment and its entropy-coded data) inserted before EOI,
// so it holds 1+extra scans.
func jpegWithScans(t testing.TB, extra int) []byte {
	t.Helper()
	var b bytes.Buffer
	m := image.NewGray(image.Rect(0, 0, 16, 16))
	for i := range m.Pix {
		m.Pix[i] = uint8(i * 7)
	}
	if err := jpeg.Encode(&b, m, &jpeg.Options{Quality: 90}); err != nil {
		t.Fatal(err)
	}
	j := b.Bytes()
	sos := bytes.Index(j, []byte{0xFF, 0xDA})
	eoi := len(j) - 2
	if sos < 0 || j[eoi] != 0xFF || j[eoi+1] != 0xD9 {
		t.Fatal("the encoder's output has no SOS or does not end in EOI")
	}
	scan := j[sos:eoi]
	out := append([]byte(nil), j[:eoi]...)
	for i := 0; i < extra; i++ {
		out = append(out, scan...)
	}
	return append(out, 0xFF, 0xD9)
}

// TestCountJPEGScans counts SOS markers as ITU-T T.81 §B.1.1 lays a file
// out; the reference count is image/jpeg's encoder, which writes one scan.
func TestCountJPEGScans(t *testing.T) {
	for _, c := range []struct {
		name  string
		b     []byte
		limit int
		want  int
		err   string
	}{
		{"baseline from image/jpeg", jpegWithScans(t, 0), 100, 1, ""},
		{"ten scans", jpegWithScans(t, 9), 100, 10, ""},
		{"at the limit", jpegWithScans(t, 99), 100, 100, ""},
		{"one over", jpegWithScans(t, 100), 100, 101, "more than 100 scans"},
		// Stuffed 0xFF00 and RST markers inside a scan, fill bytes before a
		// marker, and stray bytes between segments (which Go's decoder
		// skips) do not hide or add scans.
		{"stuffing, restarts and fill", []byte{0xFF, 0xD8, 0xFF, 0xFF, 0xDA, 0x00, 0x02, 0x12, 0xFF, 0x00, 0x34, 0xFF, 0xD0, 0x56,
			0xFF, 0xDA, 0x00, 0x02, 0x01, 0x02, 0x13, 0x37, 0xFF, 0xDA, 0x00, 0x02, 0xFF, 0xD9}, 100, 3, ""},
		{"scans after EOI are not counted", append(jpegWithScans(t, 0), jpegWithScans(t, 5)[2:]...), 100, 1, ""},
		{"not a JPEG", []byte("\x89PNG"), 100, 0, "not a JPEG"},
		{"truncated in a length", []byte{0xFF, 0xD8, 0xFF, 0xDA, 0x00}, 100, 0, ""},
	} {
		n, err := countJPEGScans(bytes.NewReader(c.b), c.limit)
		if n != c.want || (err == nil) != (c.err == "") || err != nil && !strings.Contains(err.Error(), c.err) {
			t.Errorf("%s: %d scans, error %v; want %d, error %q", c.name, n, err, c.want, c.err)
		}
	}
	if got := jpegScanLimit(8192, 8192); got != 32 {
		t.Errorf("scan limit of 8192²: %d, want 2^31/2^26 = 32", got)
	}
	if got := jpegScanLimit(640, 480); got != maxJPEGScans {
		t.Errorf("scan limit of 640×480: %d, want %d", got, maxJPEGScans)
	}
}

// TestCheckOutputNames: every clash between a source's name and another
// source's, or a copy's (<id>-cNN, NN at least two digits), is refused
// before anything is written, naming both sources.
func TestCheckOutputNames(t *testing.T) {
	for _, c := range []struct {
		name   string
		ids    []string
		copies int
		none   []int // sources that get no copies
		want   []string
	}{
		{"plain ids", []string{"a", "b", "a-c1", "a-c001"}, 3, nil, nil},
		{"same id twice", []string{"a", "b", "a"}, 1, nil, []string{"src0 and src2", `both have id "a"`}},
		{"letter case only", []string{"Leaf", "leaf"}, 0, nil, []string{"src0 and src1", "differ only in letter case"}},
		{"a and a-c01", []string{"a", "a-c01"}, 1, nil, []string{"src1", `id "a-c01" is the name of copy 1 of src0`}},
		{"A and a-C02", []string{"A", "a-C02"}, 2, nil, []string{"src1", "copy 2 of src0"}},
		{"a-c01 beyond the copies", []string{"a", "a-c05"}, 3, nil, nil},
		{"a without copies", []string{"a", "a-c01"}, 1, []int{0}, nil},
		{"no copies at all", []string{"a", "a-c01"}, 0, nil, nil},
		{"three digits for 100 copies", []string{"a", "a-c01"}, 100, nil, nil},
		{"three digits clash", []string{"a", "a-c042"}, 100, nil, []string{"copy 42 of src0"}},
		{"copy of a copy-like id", []string{"x-c01", "x-c01-c01"}, 1, nil, []string{"src1", "copy 1 of src0"}},
		{"backslash", []string{`a\b`}, 0, nil, []string{"not a safe file name"}},
		{"id that leaves", []string{"../x"}, 0, nil, []string{"not a safe file name"}},
		{"copy id too long", []string{strings.Repeat("n", 125)}, 1, nil, []string{"125 bytes", "129 bytes", "over the 128"}},
		{"longest id whose copies fit", []string{strings.Repeat("n", 124)}, 1, nil, nil},
	} {
		no := map[int]bool{}
		for _, i := range c.none {
			no[i] = true
		}
		err := checkOutputNames(c.ids, func(i int) bool { return !no[i] }, c.copies, func(i int) string { return "src" + string(rune('0'+i)) })
		if c.want == nil {
			if err != nil {
				t.Errorf("%s: %v", c.name, err)
			}
			continue
		}
		if err == nil {
			t.Errorf("%s: accepted", c.name)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: %q does not say %q", c.name, err, w)
			}
		}
	}
}

// TestRotateBound checks the largest canvas of a turn with grow_canvas
// against a dense sweep of RotateCanvas over the range: never smaller than
// any angle gives (a sweep cannot beat the exact maximum), and reached by
// the sweep within a pixel. The exact maximum of w|cos θ| + h|sin θ| is
// √(w² + h²) at tan θ = h/w (calculus; the diagonal of the source).
func TestRotateBound(t *testing.T) {
	for _, c := range []struct {
		w, h   int
		lo, hi float64
	}{
		{4000, 4000, 0, 90}, {4000, 100, -10, 10}, {300, 200, 30, 35}, {300, 200, -180, 180}, {1, 1000, 89, 91}, {640, 480, 0, 0},
	} {
		bw, bh := rotateBound(c.w, c.h, c.lo, c.hi)
		sw, sh := c.w, c.h
		for i := 0; i <= 20000; i++ {
			a := c.lo + (c.hi-c.lo)*float64(i)/20000
			_, ow, oh := RotateCanvas(float64(c.w), float64(c.h), a, true)
			sw, sh = max(sw, ow), max(sh, oh)
		}
		if bw < sw || bh < sh || bw-sw > 1 || bh-sh > 1 {
			t.Errorf("%d×%d over [%g, %g]: bound %d×%d, sweep %d×%d", c.w, c.h, c.lo, c.hi, bw, bh, sw, sh)
		}
		if c.lo <= 45 && c.hi >= 45 && c.w == c.h {
			if d := int(math.Round(math.Sqrt2 * float64(c.w))); bw != d {
				t.Errorf("%d² at 45°: bound %d, the diagonal is %d", c.w, bw, d)
			}
		}
	}
}

// TestCheckCanvas: a plan whose rotate with grow_canvas can exceed MaxSide
// from a source is refused naming the plan file, the step path and its line;
// steps with chance 0, turns without grow_canvas and sizes set by a resize
// before the turn are taken into account.
func TestCheckCanvas(t *testing.T) {
	for _, c := range []struct {
		name, src string
		w, h      int
		want      string // "" = accepted
	}{
		{"45° of 3000²", "name: g\ngeometry:\n  moves:\n    - do: flip\n      axis: horizontal\n    - do: rotate\n      angle: [30, 60]\n      grow_canvas: true\n", 3000, 3000,
			"grow.yaml:6:7: geometry.moves[1]: rotate with grow_canvas can make a side of 4243 pixels from src (3000×3000); at most 4096"},
		{"inside a pick", "name: g\ngeometry:\n  moves:\n    - do: pick\n      from:\n        - do: flip\n          axis: vertical\n        - do: rotate\n          angle: 45\n          grow_canvas: true\n", 3000, 3000,
			"geometry.moves[0].from[1]"},
		{"chance 0.5 still can", "name: g\ngeometry:\n  moves:\n    - do: rotate\n      angle: 45\n      grow_canvas: true\n      chance: 0.5\n", 3000, 3000, "geometry.moves[0]"},
		{"chance 0 cannot", "name: g\ngeometry:\n  moves:\n    - do: rotate\n      angle: 45\n      grow_canvas: true\n      chance: 0\n", 3000, 3000, ""},
		{"no grow_canvas", "name: g\ngeometry:\n  moves:\n    - do: rotate\n      angle: 45\n", 3000, 3000, ""},
		{"resized first", "name: g\ngeometry:\n  moves:\n    - do: resize\n      to: [1000, 1000]\n    - do: rotate\n      angle: 45\n      grow_canvas: true\n", 3000, 3000, ""},
		{"small turn of a wide source", "name: g\ngeometry:\n  moves:\n    - do: rotate\n      angle: [-3, 3]\n      grow_canvas: true\n", 4000, 100, ""},
		{"small turn of a 4096 source", "name: g\ngeometry:\n  moves:\n    - do: rotate\n      angle: [-3, 3]\n      grow_canvas: true\n", 4096, 100, "geometry.moves[0]"},
	} {
		p, err := ParsePlan("grow.yaml", []byte(c.src))
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		err = p.CheckCanvas(c.w, c.h, "src")
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.name, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%s: error %v, want %q", c.name, err, c.want)
		}
	}
}

// TestPixelBudget: the pixels taken at once never exceed the budget, and a
// weight above the whole budget still runs (alone).
func TestPixelBudget(t *testing.T) {
	b := newPixelBudget(100)
	var mu sync.Mutex
	inUse, peak, bigWithOthers := int64(0), int64(0), false
	var wg sync.WaitGroup
	for i := 0; i < 64; i++ {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			w := int64(10 + i*7%60)
			if i%16 == 0 {
				w = 500 // over the budget
			}
			held := b.take(w)
			mu.Lock()
			inUse += held
			peak = max(peak, inUse)
			if w == 500 && inUse != held {
				bigWithOthers = true
			}
			mu.Unlock()
			for k := 0; k < 1000; k++ {
				_ = k * k
			}
			mu.Lock()
			inUse -= held
			mu.Unlock()
			b.give(held)
		}(i)
	}
	wg.Wait()
	if peak > 100 || peak == 0 {
		t.Errorf("peak %d pixels in use, budget 100", peak)
	}
	if bigWithOthers {
		t.Error("a source over the budget ran beside others")
	}
}
