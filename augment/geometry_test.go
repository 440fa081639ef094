package augment

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/disintegration/imaging"
	"golang.org/x/image/draw"
	"golang.org/x/image/math/f64"
)

// Geometry checked against things this project did not write:
//   - github.com/disintegration/imaging v1.6.2 FlipH, FlipV, Rotate90/180/270
//     (reference library) for flips and quarter turns, pixel for pixel;
//   - golang.org/x/image/draw v0.48.0 Transform (reference library) with
//     NearestNeighbor, BiLinear and CatmullRom for arbitrary angles;
//   - the unit-square formula of bilinear interpolation (Wikipedia, "Bilinear
//     interpolation", from memory) on hand-worked numbers;
//   - the 2-D rotation matrix [cos −sin; sin cos] (Wikipedia, "Rotation
//     matrix", from memory) and plain matrix algebra for composition;
//   - R. Keys, "Cubic convolution interpolation for digital image
//     processing", IEEE Trans. ASSP 29(6), 1981, for the cubic kernel.

// geoImage builds a w×h test image whose every pixel (and channel) holds a
// distinct value, so a transform that moves any pixel to the wrong place is
// seen. c = 1 gives *image.Gray, c = 3 an opaque *image.NRGBA.
func geoImage(w, h, c int) image.Image {
	if c == 1 {
		g := image.NewGray(image.Rect(0, 0, w, h))
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				g.Pix[y*g.Stride+x] = uint8(3 + 7*(x+w*y))
			}
		}
		return g
	}
	m := image.NewNRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			i := x + w*y
			o := y*m.Stride + 4*x
			m.Pix[o], m.Pix[o+1], m.Pix[o+2], m.Pix[o+3] = uint8(1+i), uint8(200-5*i), uint8(17+3*i), 255
		}
	}
	return m
}

// geoMasks builds a class plane (8-bit indexed, every pixel a distinct id
// including the ignore id 255 somewhere) and an instance plane (16-bit ids
// with both bytes in use, every pixel distinct).
func geoMasks(w, h int) (*image.Paletted, *image.Gray16) {
	pal := make(color.Palette, 256)
	for i := range pal {
		pal[i] = color.Gray{uint8(i)}
	}
	m := image.NewPaletted(image.Rect(0, 0, w, h), pal)
	in := image.NewGray16(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			i := x + w*y
			m.Pix[y*m.Stride+x] = uint8(255 - 2*i)
			id := uint16(257*(i+1) + 3)
			in.Pix[y*in.Stride+2*x], in.Pix[y*in.Stride+2*x+1] = uint8(id>>8), uint8(id)
		}
	}
	return m, in
}

// geoClassImage and geoInstImage turn mask planes into images imaging can
// transform losslessly: class id as gray; instance id as R = high byte,
// G = low byte.
func geoClassImage(m *image.Paletted) *image.Gray {
	g := image.NewGray(m.Rect)
	copy(g.Pix, m.Pix)
	return g
}

func geoInstImage(in *image.Gray16) *image.NRGBA {
	b := in.Rect
	out := image.NewNRGBA(b)
	for y := 0; y < b.Dy(); y++ {
		for x := 0; x < b.Dx(); x++ {
			o := y*out.Stride + 4*x
			out.Pix[o], out.Pix[o+1], out.Pix[o+2], out.Pix[o+3] = in.Pix[y*in.Stride+2*x], in.Pix[y*in.Stride+2*x+1], 0, 255
		}
	}
	return out
}

// geoSameRGB compares an image to imaging's NRGBA output channel by channel
// (gray images must give R = G = B there).
func geoSameRGB(t *testing.T, what string, got, want image.Image) {
	t.Helper()
	if got.Bounds() != want.Bounds() {
		t.Fatalf("%s: size %v, imaging gives %v", what, got.Bounds(), want.Bounds())
	}
	b := got.Bounds()
	bad := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r1, g1, b1, _ := got.At(x, y).RGBA()
			r2, g2, b2, _ := want.At(x, y).RGBA()
			if r1 != r2 || g1 != g2 || b1 != b2 {
				if bad < 3 {
					t.Errorf("%s: pixel (%d, %d) is %d,%d,%d; imaging gives %d,%d,%d", what, x, y, r1>>8, g1>>8, b1>>8, r2>>8, g2>>8, b2>>8)
				}
				bad++
			}
		}
	}
	if bad > 0 {
		t.Errorf("%s: %d of %d pixels differ from imaging", what, bad, b.Dx()*b.Dy())
	}
}

// TestQuarterTurnsAndFlipsMatchImaging checks flips and right-angle turns of
// images (gray and RGB, both interpolations) and of both masks against
// github.com/disintegration/imaging v1.6.2 (reference library), on a
// non-square 7×5 canvas.
//
// Direction: our Rotate(deg) turns clockwise on screen (y points down), while
// imaging.Rotate90 turns counter-clockwise (its doc comment; verified here:
// with deg = +90 the 7×5 test image does not match Rotate90, with deg = −90 it
// does). So Rotate90 ↔ −90°, Rotate180 ↔ 180°, Rotate270 ↔ −270° (= +90°).
func TestQuarterTurnsAndFlipsMatchImaging(t *testing.T) {
	const w, h = 7, 5
	type geoCase struct {
		name string
		m    Mat
		ow   int
		oh   int
		ref  func(image.Image) *image.NRGBA
	}
	turn := func(deg float64) (Mat, int, int) { return RotateCanvas(w, h, deg, true) }
	m90, w90, h90 := turn(-90)
	m180, w180, h180 := turn(180)
	m270, w270, h270 := turn(-270)
	cases := []geoCase{
		{"flip-horizontal", FlipH(w), w, h, imaging.FlipH},
		{"flip-vertical", FlipV(h), w, h, imaging.FlipV},
		{"rotate -90 = imaging.Rotate90", m90, w90, h90, imaging.Rotate90},
		{"rotate 180 = imaging.Rotate180", m180, w180, h180, imaging.Rotate180},
		{"rotate -270 = imaging.Rotate270", m270, w270, h270, imaging.Rotate270},
	}
	// 270 counter-clockwise is 90 clockwise: the same canvas map.
	if m, _, _ := turn(90); m != m270 {
		t.Errorf("RotateCanvas(90) = %v, RotateCanvas(−270) = %v; want the same map", m, m270)
	}
	mask, inst := geoMasks(w, h)
	for _, c := range cases {
		for _, ch := range []int{1, 3} {
			src := geoImage(w, h, ch)
			for _, ip := range []Interp{Bilinear, Bicubic} {
				got := WarpImage(FromImage(src), c.m, c.ow, c.oh, ip, Fill{}).ToImage()
				geoSameRGB(t, fmt.Sprintf("%s, %d channel(s), interp %d", c.name, ch, ip), got, c.ref(src))
			}
		}
		gm := WarpMask(mask, c.m, c.ow, c.oh, 0)
		geoSameRGB(t, c.name+", class plane", geoClassImage(gm), c.ref(geoClassImage(mask)))
		gi := WarpInstances(inst, c.m, c.ow, c.oh)
		geoSameRGB(t, c.name+", instance plane", geoInstImage(gi), c.ref(geoInstImage(inst)))
	}
	// The direction note above: +90° is not imaging's Rotate90.
	mp, wp, hp := turn(90)
	g := WarpImage(FromImage(geoImage(w, h, 1)), mp, wp, hp, Bilinear, Fill{}).ToImage().(*image.Gray)
	r := imaging.Rotate90(geoImage(w, h, 1))
	same := true
	for y := 0; y < hp; y++ {
		for x := 0; x < wp; x++ {
			if g.Pix[y*g.Stride+x] != r.Pix[y*r.Stride+4*x] {
				same = false
			}
		}
	}
	if same {
		t.Errorf("Rotate(+90) equals imaging.Rotate90 (counter-clockwise); the direction note is wrong")
	}
}

// geoSmooth is a smooth 64×64 test image (a sum of sinusoids, values well
// inside 0..255), c = 1 as *image.Gray, c = 3 as *image.RGBA.
func geoSmooth(n, c int) image.Image {
	v := func(x, y, k float64) uint8 {
		f := 128 + 50*math.Sin(0.21*x+0.5*k) + 40*math.Cos(0.17*y-0.3*k) + 25*math.Sin(0.11*(x+y)+k)
		return uint8(math.Round(f))
	}
	if c == 1 {
		g := image.NewGray(image.Rect(0, 0, n, n))
		for y := 0; y < n; y++ {
			for x := 0; x < n; x++ {
				g.Pix[y*g.Stride+x] = v(float64(x), float64(y), 0)
			}
		}
		return g
	}
	m := image.NewRGBA(image.Rect(0, 0, n, n))
	for y := 0; y < n; y++ {
		for x := 0; x < n; x++ {
			o := y*m.Stride + 4*x
			for k := 0; k < 3; k++ {
				m.Pix[o+k] = v(float64(x), float64(y), float64(k))
			}
			m.Pix[o+3] = 255
		}
	}
	return m
}

// geoBlobs draws random overlapping discs into a class plane (*image.Gray)
// and an instance plane (*image.Gray16), later discs on top.
func geoBlobs(n int, rng *rand.Rand) (*image.Gray, *image.Gray16) {
	cls := image.NewGray(image.Rect(0, 0, n, n))
	ins := image.NewGray16(image.Rect(0, 0, n, n))
	for id := 1; id <= 14; id++ {
		cx, cy := rng.Float64()*float64(n), rng.Float64()*float64(n)
		r := 3 + rng.Float64()*9
		c := uint8(1 + rng.IntN(5))
		for y := 0; y < n; y++ {
			for x := 0; x < n; x++ {
				dx, dy := float64(x)+0.5-cx, float64(y)+0.5-cy
				if dx*dx+dy*dy <= r*r {
					cls.Pix[y*cls.Stride+x] = c
					ins.Pix[y*ins.Stride+2*x], ins.Pix[y*ins.Stride+2*x+1] = uint8((id*131)>>8), uint8(id*131)
				}
			}
		}
	}
	return cls, ins
}

// geoArbitrary are the matrices for the x/image/draw comparisons: turns by
// awkward angles with a scale ≥ 1 and a sub-pixel shift, about the center.
func geoArbitrary(n int) []Mat {
	c := float64(n) / 2
	return []Mat{
		About(Rotate(17).Then(Scale(1, 1)), c, c, c+0.3, c-0.7),
		About(Rotate(-33).Then(Scale(1.25, 1.25)), c, c, c-1.1, c+0.4),
		About(Rotate(61).Then(Scale(1.5, 1.2)), c, c, c+0.25, c+0.6),
	}
}

// geoEdgeDist is how far (in source pixels) the preimage u of a destination
// center lies from the nearest pixel edge (integer coordinate).
func geoEdgeDist(u float64) float64 { return math.Abs(u - math.Round(u)) }

// TestMaskWarpMatchesXImageNearest compares WarpMask and WarpInstances with
// golang.org/x/image/draw's NearestNeighbor.Transform (reference library)
// given the same src→dst matrix. Reading draw/impl.go (v0.48.0): it maps the
// destination center (dx+0.5, dy+0.5) back by its own inverse of the matrix
// and takes the source pixel int(sx), after adding an integer bias that makes
// coordinates positive — the same rule as ours (floor of the preimage).
//
// Ties: where a preimage lies (within rounding) on a source pixel edge, the
// two codes may floor to different sides, because their inverses are
// computed with different operation orders and x/image adds and subtracts the
// bias; the last bits differ. Every disagreement must be such a tie (preimage
// within 1e-9 px of an edge), and ties must be rare (< 0.5 % of pixels).
func TestMaskWarpMatchesXImageNearest(t *testing.T) {
	const n = 64
	rng := rand.New(rand.NewPCG(7, 11))
	cls, ins := geoBlobs(n, rng)
	pal := make(color.Palette, 256)
	for i := range pal {
		pal[i] = color.Gray{uint8(i)}
	}
	mask := image.NewPaletted(cls.Rect, pal)
	copy(mask.Pix, cls.Pix)
	// compare counts disagreeing pixels, failing any that is not a tie.
	compare := func(m Mat) (diff int) {
		inv, _ := m.Invert()
		ref := image.NewGray(image.Rect(0, 0, n, n))
		for i := range ref.Pix {
			ref.Pix[i] = 255 // the fill id outside the source, both sides
		}
		draw.NearestNeighbor.Transform(ref, f64.Aff3(m), cls, cls.Rect, draw.Src, nil)
		refI := image.NewGray16(image.Rect(0, 0, n, n))
		draw.NearestNeighbor.Transform(refI, f64.Aff3(m), ins, ins.Rect, draw.Src, nil)
		gm := WarpMask(mask, m, n, n, 255)
		gi := WarpInstances(ins, m, n, n)
		for y := 0; y < n; y++ {
			for x := 0; x < n; x++ {
				a, b := gm.Pix[y*gm.Stride+x], ref.Pix[y*ref.Stride+x]
				o := y*gi.Stride + 2*x
				ai, bi := gi.Pix[o:o+2], refI.Pix[o:o+2]
				if a == b && ai[0] == bi[0] && ai[1] == bi[1] {
					continue
				}
				diff++
				u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
				if d := math.Min(geoEdgeDist(u), geoEdgeDist(v)); d > 1e-9 {
					t.Errorf("matrix %v: pixel (%d, %d) is class %d instance %d, x/image/draw gives %d / %d, and its preimage (%.6f, %.6f) is %.3g px from a pixel edge: not a tie", m, x, y, a, int(ai[0])<<8|int(ai[1]), b, int(bi[0])<<8|int(bi[1]), u, v, d)
				}
			}
		}
		return diff
	}
	total, diff := 0, 0
	for _, m := range geoArbitrary(n) {
		diff += compare(m)
		total += n * n
	}
	// Matrices built to put preimages on pixel edges: scale 3 with a
	// −0.5 shift puts u = (x+1)/3 (an edge for every third column, 1/6 not
	// being exact in binary), and 45° with scale √2 puts many centers on
	// edges. These show that ties are real and are only ties; they are
	// adversarial, so they are not part of the share below.
	for _, m := range []Mat{{3, 0, -0.5, 0, 3, -0.5}, About(Rotate(45).Then(Scale(math.Sqrt2, math.Sqrt2)), n/2, n/2, n/2, n/2)} {
		t.Logf("edge-seeking matrix %.4g: %d of %d pixels are ties decided differently", m, compare(m), n*n)
	}
	share := float64(diff) / float64(total)
	t.Logf("nearest neighbour vs x/image/draw: %d of %d pixels differ (tie share %.4f %%)", diff, total, 100*share)
	if share >= 0.005 {
		t.Errorf("tie share %.4f %% ≥ 0.5 %%", 100*share)
	}
}

// geoPSNR is 10·log10(255²/MSE) over the destination pixels whose preimage
// lies at least margin px inside the source (so every tap is inside and edge
// handling — x/image/draw renormalizes clipped kernels, we blend in the fill
// — plays no part). PSNR with peak 255 is common practice.
func geoPSNR(got *Image, ref *image.RGBA64, m Mat, n int, margin float64) (psnr float64, count int) {
	inv, _ := m.Invert()
	se := 0.0
	for y := 0; y < got.H; y++ {
		for x := 0; x < got.W; x++ {
			u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
			if u < margin || v < margin || u > float64(n)-margin || v > float64(n)-margin {
				continue
			}
			o := y*ref.Stride + 8*x
			for c := 0; c < got.C; c++ {
				r := float64(uint16(ref.Pix[o+2*c])<<8|uint16(ref.Pix[o+2*c+1])) / 257
				d := float64(got.Pix[(y*got.W+x)*got.C+c]) - r
				se += d * d
				count++
			}
		}
	}
	if se == 0 {
		return math.Inf(1), count
	}
	return 10 * math.Log10(255*255/(se/float64(count))), count
}

// TestImageWarpMatchesXImageKernels compares WarpImage with
// golang.org/x/image/draw's BiLinear (tent kernel) and CatmullRom
// Kernel.Transform (reference library), same matrix, gray and RGB.
// CatmullRom is the cubic BC-spline B = 0, C = 0.5 (x/image doc comment,
// citing Mitchell & Netravali 1988), which is Keys' kernel with a = −C = −0.5
// (from memory; its polynomial in draw/scale.go, 1.5t³ − 2.5t² + 1 on [0, 1),
// is the a = −0.5 case of keys()).
//
// Scale ≥ 1 on purpose: reading draw/impl.go, Kernel.Transform widens its
// kernel by max(|d2s[0]|, |d2s[1]|) (resp. row 2) when that exceeds 1, i.e.
// when the map shrinks, and is a plain 2×2 (4×4) kernel only when it does
// not. With scale s ≥ 1 every entry of the inverse is ≤ max(|cos|, |sin|)/s ≤ 1.
// x/image/draw writes into an RGBA64 here (16-bit, rounded), so the
// comparison is not limited by its 8-bit truncation. Interior only: a 2 px
// margin for bilinear, 3 px for the 4×4 cubic.
func TestImageWarpMatchesXImageKernels(t *testing.T) {
	const n = 64
	for _, ch := range []int{1, 3} {
		src := geoSmooth(n, ch)
		wsrc := FromImage(src)
		for _, m := range geoArbitrary(n) {
			inv, _ := m.Invert()
			if math.Max(math.Abs(inv[0]), math.Abs(inv[1])) > 1 || math.Max(math.Abs(inv[3]), math.Abs(inv[4])) > 1 {
				t.Fatalf("matrix %v shrinks; x/image/draw would widen its kernel", m)
			}
			for _, k := range []struct {
				name   string
				interp Interp
				ref    *draw.Kernel
				margin float64
			}{{"bilinear vs draw.BiLinear", Bilinear, draw.BiLinear, 2}, {"bicubic vs draw.CatmullRom", Bicubic, draw.CatmullRom, 3}} {
				ref := image.NewRGBA64(image.Rect(0, 0, n, n))
				k.ref.Transform(ref, f64.Aff3(m), src, src.Bounds(), draw.Src, nil)
				got := WarpImage(wsrc, m, n, n, k.interp, Fill{})
				psnr, cnt := geoPSNR(got, ref, m, n, k.margin)
				t.Logf("%s, %d channel(s), matrix %.4f: PSNR %.1f dB over %d interior samples", k.name, ch, m, psnr, cnt)
				if cnt < n*n*ch/3 {
					t.Errorf("only %d interior samples compared", cnt)
				}
				if psnr < 40 {
					t.Errorf("%s, %d channel(s), matrix %v: PSNR %.1f dB < 40 dB", k.name, ch, m, psnr)
				}
			}
		}
	}
}

// geoSample returns WarpImage's value at the source point (px, py) (in
// continuous coordinates, pixel centers at +0.5): a 1×1 destination whose
// only center (0.5, 0.5) maps back to (px, py).
func geoSample(src *Image, px, py float64, ip Interp) float64 {
	return float64(WarpImage(src, Translate(0.5-px, 0.5-py), 1, 1, ip, Fill{}).Pix[0])
}

// TestBilinearHandWorked checks bilinear interpolation against the
// unit-square formula (Wikipedia, "Bilinear interpolation", from memory):
// f(fx, fy) = f00(1−fx)(1−fy) + f10·fx(1−fy) + f01(1−fx)fy + f11·fx·fy, with
// f00 at the first pixel center (0.5, 0.5) and fx, fy the offsets from it.
func TestBilinearHandWorked(t *testing.T) {
	img := &Image{W: 2, H: 2, C: 1, Pix: []float32{10, 20, 30, 40}}
	cases := []struct {
		x, y, want float64
		how        string
	}{
		// Midway between the four centers: fx = fy = 1/2, (10+20+30+40)/4.
		{1, 1, 25, "mid: (10+20+30+40)/4 = 25"},
		// A quarter offset: fx = fy = 1/4:
		// 10·(3/4)(3/4) + 20·(1/4)(3/4) + 30·(3/4)(1/4) + 40·(1/4)(1/4)
		// = 5.625 + 3.75 + 5.625 + 2.5 = 17.5.
		{0.75, 0.75, 17.5, "quarter: 5.625+3.75+5.625+2.5"},
		// fx = 1/4, fy = 3/4:
		// 10·(3/4)(1/4) + 20·(1/4)(1/4) + 30·(3/4)(3/4) + 40·(1/4)(3/4)
		// = 1.875 + 1.25 + 16.875 + 7.5 = 27.5.
		{0.75, 1.25, 27.5, "fx 1/4, fy 3/4: 1.875+1.25+16.875+7.5"},
		// On a pixel center the sample is that pixel.
		{1.5, 0.5, 20, "center of pixel (1, 0)"},
	}
	for _, c := range cases {
		if got := geoSample(img, c.x, c.y, Bilinear); math.Abs(got-c.want) > 1e-5 {
			t.Errorf("bilinear at (%g, %g) = %g, want %g (%s)", c.x, c.y, got, c.want, c.how)
		}
	}
	// With a cross term (f11 = 70, not f10 + f01 − f00 = 40), the mid value
	// is (10+20+30+70)/4 = 32.5, and at fx = fy = 1/4:
	// 10·9/16 + 20·3/16 + 30·3/16 + 70·1/16 = (90+60+90+70)/16 = 19.375.
	img2 := &Image{W: 2, H: 2, C: 1, Pix: []float32{10, 20, 30, 70}}
	for _, c := range []struct{ x, y, want float64 }{{1, 1, 32.5}, {0.75, 0.75, 19.375}} {
		if got := geoSample(img2, c.x, c.y, Bilinear); math.Abs(got-c.want) > 1e-5 {
			t.Errorf("bilinear [[10,20],[30,70]] at (%g, %g) = %g, want %g", c.x, c.y, got, c.want)
		}
	}
	// Keys' cubic at the half-sample point of a 4-tap row weighs the taps
	// −1/16, 9/16, 9/16, −1/16 (Keys 1981 with a = −0.5; from memory): for
	// the row 0, 16, 32, 160 at x = 2 (midway between 16 and 32):
	// (−0 + 9·16 + 9·32 − 160)/16 = (144 + 288 − 160)/16 = 17.
	// A 1-row image would blend the constant fill 0 into the vertical
	// taps, so the row is repeated 4 times (vertical weights sum to 1).
	row := []float32{0, 16, 32, 160}
	tall := &Image{W: 4, H: 4, C: 1, Pix: append(append(append(append([]float32{}, row...), row...), row...), row...)}
	if got := geoSample(tall, 2, 2, Bicubic); math.Abs(got-17) > 1e-4 {
		t.Errorf("bicubic half-sample = %g, want 17", got)
	}
}

// TestAffineWorkedMatrices checks composition against worked matrices.
func TestAffineWorkedMatrices(t *testing.T) {
	near := func(a, b float64) bool { return math.Abs(a-b) <= 1e-12*math.Max(1, math.Abs(b)) }
	// Rotation matrix [cos −sin; sin cos] (Wikipedia "Rotation matrix", from
	// memory) at 90°: [0 −1; 1 0], so (1, 0) ↦ (0, 1); then Scale(2, 3)
	// gives (0·2, 1·3) = (0, 3). In y-down screen coordinates the x axis
	// turning onto +y is a clockwise turn, as Rotate's doc says.
	if x, y := Rotate(90).Then(Scale(2, 3)).Apply(1, 0); x != 0 || y != 3 {
		t.Errorf("Rotate(90) then Scale(2, 3) maps (1, 0) to (%g, %g), want (0, 3)", x, y)
	}
	// The other order: Scale first, (1, 0) ↦ (2, 0) ↦ (0, 2).
	if x, y := Scale(2, 3).Then(Rotate(90)).Apply(1, 0); x != 0 || y != 2 {
		t.Errorf("Scale(2, 3) then Rotate(90) maps (1, 0) to (%g, %g), want (0, 2)", x, y)
	}
	// 30°: cos = √3/2, sin = 1/2, (2, 0) ↦ (√3, 1).
	if x, y := Rotate(30).Apply(2, 0); !near(x, math.Sqrt(3)) || !near(y, 1) {
		t.Errorf("Rotate(30) maps (2, 0) to (%g, %g), want (√3, 1)", x, y)
	}
	rng := rand.New(rand.NewPCG(3, 5))
	rnd := func() Mat {
		var m Mat
		for i := range m {
			m[i] = rng.Float64()*4 - 2
		}
		return m
	}
	for i := 0; i < 200; i++ {
		a, b, c := rnd(), rnd(), rnd()
		l, r := a.Then(b).Then(c), a.Then(b.Then(c))
		for k := range l {
			if math.Abs(l[k]-r[k]) > 1e-12*math.Max(1, math.Abs(l[k])) {
				t.Fatalf("Then is not associative: (ab)c = %v, a(bc) = %v", l, r)
			}
		}
		// Apply agrees with composition: (a then b)(p) = b(a(p)).
		px, py := rng.Float64()*10, rng.Float64()*10
		x1, y1 := a.Then(b).Apply(px, py)
		x2, y2 := b.Apply(a.Apply(px, py))
		if math.Abs(x1-x2) > 1e-12 || math.Abs(y1-y2) > 1e-12 {
			t.Fatalf("(a then b)(p) = (%g, %g), b(a(p)) = (%g, %g)", x1, y1, x2, y2)
		}
		if math.Abs(a.Det()) < 0.1 {
			continue // too close to singular for a 1e-12 round trip
		}
		inv, ok := a.Invert()
		if !ok {
			t.Fatalf("Invert(%v) failed", a)
		}
		for _, p := range []Mat{a.Then(inv), inv.Then(a)} {
			for k := range p {
				if math.Abs(p[k]-Identity[k]) > 1e-12 {
					t.Fatalf("m then m⁻¹ = %v, want identity within 1e-12", p)
				}
			}
		}
	}
	if _, ok := (Mat{1, 2, 0, 2, 4, 0}).Invert(); ok {
		t.Errorf("a singular matrix inverted")
	}
	// Half turn about (cx, cy): (cx+a, cy+b) ↦ (cx−a, cy−b).
	cx, cy := 13.5, 7.25
	for _, ab := range [][2]float64{{1, 0}, {0, 1}, {2.5, -3}, {-4, 6.75}} {
		x, y := About(Rotate(180), cx, cy, cx, cy).Apply(cx+ab[0], cy+ab[1])
		if x != cx-ab[0] || y != cy-ab[1] {
			t.Errorf("half turn about (%g, %g) maps (%g, %g) to (%g, %g), want (%g, %g)", cx, cy, cx+ab[0], cy+ab[1], x, y, cx-ab[0], cy-ab[1])
		}
	}
	// A mirror reverses orientation: determinant −1 (linear algebra).
	if d := FlipH(7).Det(); d != -1 {
		t.Errorf("det FlipH = %g, want −1", d)
	}
	if d := FlipV(5).Det(); d != -1 {
		t.Errorf("det FlipV = %g, want −1", d)
	}
	if d := Rotate(37).Det(); !near(d, 1) {
		t.Errorf("det Rotate(37) = %g, want 1", d)
	}
	// Flipping twice is the identity; FlipH maps the left edge x = 0 to x = w.
	if m := FlipH(7).Then(FlipH(7)); m != Identity {
		t.Errorf("FlipH twice = %v", m)
	}
	if x, _ := FlipH(7).Apply(0, 0); x != 7 {
		t.Errorf("FlipH(7) maps x = 0 to %g, want 7", x)
	}
	// A quarter turn with expand swaps the canvas sides.
	for _, deg := range []float64{90, -90, 270} {
		if _, ow, oh := RotateCanvas(7, 5, deg, true); ow != 5 || oh != 7 {
			t.Errorf("RotateCanvas(7, 5, %g, expand) = %d×%d, want 5×7", deg, ow, oh)
		}
	}
	if _, ow, oh := RotateCanvas(7, 5, 180, true); ow != 7 || oh != 5 {
		t.Errorf("RotateCanvas(7, 5, 180, expand) = %d×%d, want 7×5", ow, oh)
	}
	// 45° with expand: the box of a w×h turned by 45° is (w+h)/√2 a side.
	if _, ow, oh := RotateCanvas(10, 10, 45, true); ow != 14 || oh != 14 {
		t.Errorf("RotateCanvas(10, 10, 45, expand) = %d×%d, want 14×14 (10√2 = 14.14)", ow, oh)
	}
	// Without expand the canvas is kept and the center stays the center.
	m, ow, oh := RotateCanvas(7, 5, 33, false)
	if x, y := m.Apply(3.5, 2.5); ow != 7 || oh != 5 || !near(x, 3.5) || !near(y, 2.5) {
		t.Errorf("RotateCanvas(7, 5, 33) keeps %d×%d, center ↦ (%g, %g)", ow, oh, x, y)
	}
	// CropResize maps the crop's corners onto the output's corners.
	cr := CropResize(3, 4, 10, 20, 5, 40)
	if x, y := cr.Apply(3, 4); x != 0 || y != 0 {
		t.Errorf("crop origin ↦ (%g, %g)", x, y)
	}
	if x, y := cr.Apply(13, 24); !near(x, 5) || !near(y, 40) {
		t.Errorf("crop far corner ↦ (%g, %g), want (5, 40)", x, y)
	}
}

// TestKeysKernel checks the cubic convolution kernel of Keys (1981), a = −0.5:
// it interpolates (1 at 0, 0 at the other integers) and its shifted copies
// sum to 1 (partition of unity, so constants are reproduced).
func TestKeysKernel(t *testing.T) {
	if keys(0) != 1 || keys(1) != 0 || keys(-1) != 0 || keys(2) != 0 || keys(-2) != 0 || keys(3) != 0 {
		t.Errorf("keys(0, ±1, ±2, 3) = %g %g %g %g %g %g, want 1 0 0 0 0 0", keys(0), keys(1), keys(-1), keys(2), keys(-2), keys(3))
	}
	// Half-sample weights 9/16 and −1/16 (from memory, Keys 1981 a = −0.5).
	if math.Abs(keys(0.5)-9.0/16) > 1e-15 || math.Abs(keys(1.5)+1.0/16) > 1e-15 {
		t.Errorf("keys(0.5) = %g, keys(1.5) = %g; want 9/16 and −1/16", keys(0.5), keys(1.5))
	}
	for _, tt := range []float64{0, 0.1, 0.25, 1.0 / 3, 0.5, 0.77, 0.999} {
		sum, first := 0.0, 0.0
		for k := -3; k <= 3; k++ {
			sum += keys(tt - float64(k))
			first += (tt - float64(k)) * keys(tt-float64(k))
		}
		if math.Abs(sum-1) > 1e-12 {
			t.Errorf("Σ keys(%g − k) = %.15g, want 1", tt, sum)
		}
		// Keys' kernel also reproduces linear functions: Σ (t−k)·keys(t−k) = 0
		// (the interpolant of f(x) = x at t is t).
		if math.Abs(first) > 1e-12 {
			t.Errorf("Σ (t−k)·keys(t − k) = %g at t = %g, want 0", first, tt)
		}
	}
}
