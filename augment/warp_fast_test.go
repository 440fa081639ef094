package augment

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"math"
	"math/rand/v2"
	"testing"
)

// The fast warp kernels (warp_fast.go) against the reference ones (warp.go):
// every float32 of the image bit for bit (math.Float32bits), every byte of
// both masks, over maps that exercise each path — exact flips and quarter
// turns (the copy path), the same off by half a pixel (not exact: the general
// paths), general turns, scales up and down, shears, maps that leave the
// source partly or wholly, and tiny canvases where every pixel is a border
// pixel — for gray and RGB, both interpolations and all three fill modes.

// fastTestMaps returns the maps for a w×h source with output ow×oh.
func fastTestMaps(w, h int, rng *rand.Rand) (maps []Mat, quarters int) {
	fw, fh := float64(w), float64(h)
	for _, deg := range []float64{0, 90, 180, 270, -90} {
		m, _, _ := RotateCanvas(fw, fh, deg, true)
		maps = append(maps, m, FlipH(fw).Then(m), FlipV(fh).Then(m), m.Then(Translate(3, -2)))
		quarters += 4
	}
	maps = append(maps, Translate(0.5, 0), Translate(-0.25, 0.75), FlipH(fw).Then(Translate(0, 0.5)))
	for _, deg := range []float64{17, -33, 45, 61, 89.9, 135, -170} {
		for _, s := range []float64{0.37, 1, 1.25, 2.5} {
			m := About(Rotate(deg).Then(Scale(s, s*1.1)), fw/2, fh/2, fw/2+rng.Float64()*3-1.5, fh/2+rng.Float64()*3-1.5)
			maps = append(maps, m)
		}
	}
	maps = append(maps,
		About(ShearX(20), fw/2, fh/2, fw/2, fh/2),
		CropResize(1.3, 0.7, fw*0.6, fh*0.8, w, h),
		Scale(3, 3).Then(Translate(-0.5, -0.5)), // centers on edges: the nearest ties
		Translate(fw*2, 0),                      // wholly outside
		Mat{1e-9, 0, 0, 0, 1e-9, 0},             // extreme shrink
	)
	for i := 0; i < 8; i++ {
		var m Mat
		for k := range m {
			m[k] = rng.Float64()*4 - 2
		}
		m[2], m[5] = m[2]*fw, m[5]*fh
		maps = append(maps, m)
	}
	return maps, quarters
}

func fastTestImage(w, h, c int, rng *rand.Rand, integers bool) *Image {
	m := NewImage(w, h, c)
	for i := range m.Pix {
		v := rng.Float32() * 255
		if integers {
			v = float32(math.Round(float64(v)))
		} else if i%17 == 0 {
			v = float32(math.Copysign(0, -1)) // −0: the reference's sums turn it into +0
		}
		m.Pix[i] = v
	}
	return m
}

func fastTestMasks(w, h int, rng *rand.Rand) (*image.Paletted, *image.Gray16) {
	pal := make(color.Palette, 256)
	for i := range pal {
		pal[i] = color.Gray{uint8(i)}
	}
	m := image.NewPaletted(image.Rect(0, 0, w, h), pal)
	in := image.NewGray16(image.Rect(0, 0, w, h))
	for i := range m.Pix {
		m.Pix[i] = uint8(rng.IntN(256))
	}
	for i := range in.Pix {
		in.Pix[i] = uint8(rng.IntN(256))
	}
	return m, in
}

func TestWarpFastMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	fills := []Fill{{Mode: "tone"}, {Mode: "tone", Value: [3]float32{12.5, 200, 77}}, {Mode: "extend"}, {Mode: "mirror"}}
	sizes := [][4]int{{1, 1, 3, 2}, {2, 3, 4, 4}, {7, 5, 7, 5}, {5, 7, 9, 6}, {64, 64, 64, 64}, {48, 33, 40, 52}}
	checked, quarterSeen := 0, 0
	for _, sz := range sizes {
		w, h, ow, oh := sz[0], sz[1], sz[2], sz[3]
		maps, _ := fastTestMaps(w, h, rng)
		mask, inst := fastTestMasks(w, h, rng)
		for _, c := range []int{1, 3} {
			for _, integers := range []bool{true, false} {
				src := fastTestImage(w, h, c, rng, integers)
				for mi, m := range maps {
					inv, ok := m.Invert()
					if _, q := quarterOf(inv); ok && q {
						quarterSeen++
					}
					for _, ip := range []Interp{Bilinear, Bicubic} {
						for _, f := range fills {
							// Quarter turns keep the canvas only for
							// square sources; try both output sizes.
							for _, o := range [][2]int{{ow, oh}, {h, w}} {
								got := WarpImage(src, m, o[0], o[1], ip, f)
								want := warpImageRef(src, m, o[0], o[1], ip, f)
								what := fmt.Sprintf("%d×%d→%d×%d, %d channel(s), map %d %v, interp %d, fill %+v", w, h, o[0], o[1], c, mi, m, ip, f)
								fastSameImage(t, what, got, want)
								checked++
							}
						}
					}
				}
			}
		}
		for mi, m := range maps {
			for _, o := range [][2]int{{ow, oh}, {h, w}} {
				for _, fid := range []uint8{0, 255} {
					got, want := WarpMask(mask, m, o[0], o[1], fid), warpMaskRef(mask, m, o[0], o[1], fid)
					if !bytes.Equal(got.Pix, want.Pix) || got.Rect != want.Rect {
						t.Errorf("%d×%d→%d×%d map %d %v: class mask differs from the reference", w, h, o[0], o[1], mi, m)
					}
				}
				got, want := WarpInstances(inst, m, o[0], o[1]), warpInstancesRef(inst, m, o[0], o[1])
				if !bytes.Equal(got.Pix, want.Pix) || got.Rect != want.Rect {
					t.Errorf("%d×%d→%d×%d map %d %v: instance mask differs from the reference", w, h, o[0], o[1], mi, m)
				}
			}
		}
	}
	if quarterSeen == 0 {
		t.Fatal("no map took the quarter-turn path")
	}
	t.Logf("%d image warps bit-identical to the reference (%d of them on quarter-turn maps); masks byte-identical", checked, quarterSeen)
}

// fastSameImage fails unless the two images have the same size and the same
// bits in every value (NaN payloads included).
func fastSameImage(t *testing.T, what string, got, want *Image) {
	t.Helper()
	if got.W != want.W || got.H != want.H || got.C != want.C || len(got.Pix) != len(want.Pix) {
		t.Fatalf("%s: %d×%d×%d, reference %d×%d×%d", what, got.W, got.H, got.C, want.W, want.H, want.C)
	}
	bad := 0
	for i := range got.Pix {
		if math.Float32bits(got.Pix[i]) != math.Float32bits(want.Pix[i]) {
			if bad < 3 {
				t.Errorf("%s: value %d (pixel %d) is %v (%#x), reference %v (%#x)", what, i, i/got.C, got.Pix[i], math.Float32bits(got.Pix[i]), want.Pix[i], math.Float32bits(want.Pix[i]))
			}
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%s: %d of %d values differ from the reference", what, bad, len(got.Pix))
	}
}

// TestWarpFastPathsTaken checks that the maps meant for each fast path reach
// it (so the comparison above covers them): exact quarter turns and flips are
// recognized, the same maps off by half a pixel are not.
func TestWarpFastPathsTaken(t *testing.T) {
	for _, deg := range []float64{0, 90, 180, 270, -90, 360} {
		m, _, _ := RotateCanvas(7, 5, deg, true)
		for _, mm := range []Mat{m, FlipH(7).Then(m), FlipV(5).Then(m), m.Then(Translate(-4, 9))} {
			inv, _ := mm.Invert()
			if _, ok := quarterOf(inv); !ok {
				t.Errorf("%v (turn %g°): not recognized as an exact quarter turn", mm, deg)
			}
			inv2, _ := mm.Then(Translate(0.5, 0)).Invert()
			if _, ok := quarterOf(inv2); ok {
				t.Errorf("%v shifted by half a pixel taken for an exact quarter turn", mm)
			}
		}
	}
	if _, ok := quarterOf(Rotate(30)); ok {
		t.Errorf("a 30° turn taken for a quarter turn")
	}
}

// TestU8 checks the rounding to 8 bits against its definition, floor(v + ½)
// clamped to 0..255, with NaN giving 0, on every float32 in [−2, 258) with a
// 1/1024 step and on the neighbours of every half-integer.
func TestU8(t *testing.T) {
	def := func(v float32) uint8 {
		if math.IsNaN(float64(v)) || v <= 0 {
			return 0
		}
		r := math.Floor(float64(v) + 0.5)
		return uint8(math.Min(255, r))
	}
	check := func(v float32) {
		if got, want := u8(v), def(v); got != want {
			t.Fatalf("u8(%v) = %d, want %d", v, got, want)
		}
	}
	for i := -2048; i < 258*1024; i++ {
		check(float32(i) / 1024)
	}
	for k := 0; k <= 512; k++ {
		h := float32(k)/2 - 0.5
		check(math.Nextafter32(h, -1))
		check(h)
		check(math.Nextafter32(h, 1000))
	}
	for _, v := range []float32{float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1)), float32(math.Copysign(0, -1)), 1e30, -1e30, 254.49998, 254.5, 255} {
		check(v)
	}
}

// TestKeys4 holds keys4 to keys at the four tap offsets the reference
// forms (f+1, f, f−1, f−2): at the ends of [0, 1), where f+1 rounds to 1 or
// 2, at the neighbours of ½ and of small powers of two, and at random f.
func TestKeys4(t *testing.T) {
	fs := []float64{0, math.SmallestNonzeroFloat64, 1e-300, 0x1p-54, 0x1p-53, 0x1p-52, 0.25, 0.5, 0.75,
		math.Nextafter(0.5, 0), math.Nextafter(0.5, 1), math.Nextafter(1, 0), math.Nextafter(math.Nextafter(1, 0), 0)}
	rng := rand.New(rand.NewPCG(3, 9))
	for i := 0; i < 200000; i++ {
		fs = append(fs, rng.Float64())
	}
	for _, f := range fs {
		k0, k1, k2, k3 := keys4(f)
		got := [4]float64{k0, k1, k2, k3}
		for k := range got {
			want := keys(f - float64(k-1))
			if math.Float64bits(got[k]) != math.Float64bits(want) {
				t.Fatalf("keys4(%v)[%d] = %v (%#x), keys(%v) = %v (%#x)", f, k, got[k], math.Float64bits(got[k]), f-float64(k-1), want, math.Float64bits(want))
			}
		}
	}
}

// TestWarpFastTiles compares fast and reference warps on canvases larger
// than warpTile, so that rows are cut into several blocks and runs start
// and end inside blocks.
func TestWarpFastTiles(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 8))
	const w, h = 150, 137
	mask, inst := fastTestMasks(w, h, rng)
	maps := []Mat{
		About(Rotate(13), w/2, h/2, w/2+1.5, h/2-2),
		About(Rotate(-71).Then(Scale(0.8, 1.3)), w/2, h/2, w/2, h/2),
		FlipH(w).Then(About(Rotate(90), w/2, h/2, h/2, w/2)),
		CropResize(10.3, 7.7, 97.1, 88.4, 160, 171),
	}
	for _, c := range []int{1, 3} {
		src := fastTestImage(w, h, c, rng, false)
		for mi, m := range maps {
			for _, ip := range []Interp{Bilinear, Bicubic} {
				for _, f := range []Fill{{Mode: "tone", Value: [3]float32{3, 4, 5}}, {Mode: "mirror"}} {
					what := fmt.Sprintf("%d×%d→160×171, %d channel(s), map %d %v, interp %d, fill %+v", w, h, c, mi, m, ip, f)
					fastSameImage(t, what, WarpImage(src, m, 160, 171, ip, f), warpImageRef(src, m, 160, 171, ip, f))
				}
			}
		}
	}
	for mi, m := range maps {
		if got, want := WarpMask(mask, m, 160, 171, 255), warpMaskRef(mask, m, 160, 171, 255); !bytes.Equal(got.Pix, want.Pix) {
			t.Errorf("map %d %v: class mask differs from the reference", mi, m)
		}
		if got, want := WarpInstances(inst, m, 160, 171), warpInstancesRef(inst, m, 160, 171); !bytes.Equal(got.Pix, want.Pix) {
			t.Errorf("map %d %v: instance mask differs from the reference", mi, m)
		}
	}
}

// TestWarpMasksMatchesReference holds WarpMasks (both masks in one pass) to
// warpMaskRef and warpInstancesRef over the maps and sizes of the tests
// above, both fill ids, and a pair of masks of different sizes (warped one
// by one).
func TestWarpMasksMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 5))
	sizes := [][4]int{{1, 1, 3, 2}, {7, 5, 7, 5}, {5, 7, 9, 6}, {64, 64, 64, 64}, {150, 137, 160, 171}}
	for _, sz := range sizes {
		w, h := sz[0], sz[1]
		mask, inst := fastTestMasks(w, h, rng)
		_, other := fastTestMasks(w+1, h, rng)
		maps, _ := fastTestMaps(w, h, rng)
		for mi, m := range maps {
			for _, o := range [][2]int{{sz[2], sz[3]}, {h, w}} {
				for _, fid := range []uint8{0, 255} {
					gm, gi := WarpMasks(mask, inst, m, o[0], o[1], fid)
					wm, wi := warpMaskRef(mask, m, o[0], o[1], fid), warpInstancesRef(inst, m, o[0], o[1])
					if !bytes.Equal(gm.Pix, wm.Pix) || gm.Rect != wm.Rect || !bytes.Equal(gi.Pix, wi.Pix) || gi.Rect != wi.Rect {
						t.Errorf("%d×%d→%d×%d map %d %v fill %d: masks differ from the references", w, h, o[0], o[1], mi, m, fid)
					}
				}
				gm, gi := WarpMasks(mask, other, m, o[0], o[1], 3)
				if !bytes.Equal(gm.Pix, warpMaskRef(mask, m, o[0], o[1], 3).Pix) || !bytes.Equal(gi.Pix, warpInstancesRef(other, m, o[0], o[1]).Pix) {
					t.Errorf("%d×%d (instances %d wide)→%d×%d map %d %v: masks differ from the references", w, h, w+1, o[0], o[1], mi, m)
				}
			}
		}
	}
}
