package augment

import (
	"image"
	"math"
)

// Interp is the image interpolation of a warp. Masks always use nearest
// neighbour.
type Interp int

const (
	Bilinear Interp = iota // 2×2 taps, linear in x and y
	Bicubic                // 4×4 taps, Keys' cubic convolution with a = −0.5
)

// Fill says what an image shows where the warp samples outside the source.
type Fill struct {
	Mode  string     // "tone" or "" (a fixed tone, the default), "extend" (repeat the border) or "mirror" (mirror about the border)
	Value [3]float32 // the tone, per channel
}

// index maps a tap index i into 0..n-1 under the fill mode; ok is false when
// the tone applies.
func (f Fill) index(i, n int) (int, bool) {
	if i >= 0 && i < n {
		return i, true
	}
	switch f.Mode {
	case "extend":
		if i < 0 {
			return 0, true
		}
		return n - 1, true
	case "mirror":
		// Half-sample symmetric: … 1 0 | 0 1 … n-1 | n-1 n-2 …
		p := 2 * n
		i = ((i % p) + p) % p
		if i >= n {
			i = p - 1 - i
		}
		return i, true
	}
	return 0, false
}

// keys is Keys' cubic convolution kernel with a = −0.5 (R. Keys, "Cubic
// convolution interpolation for digital image processing", IEEE Trans.
// ASSP 29(6), 1981).
//
// The float64 conversions round each product before it is added, so no
// build fuses them into FMAs and the kernel has the same values everywhere
// (see Mat.Apply).
func keys(t float64) float64 {
	const a = -0.5
	t = math.Abs(t)
	switch {
	case t <= 1: // ((a+2)t − (a+3))t² + 1
		p := float64((a+2)*t) - (a + 3)
		return float64(p*t*t) + 1
	case t < 2: // ((at − 5a)t + 8a)t − 4a
		p := float64(a*t) - 5*a
		p = float64(p*t) + 8*a
		return float64(p*t) - 4*a
	}
	return 0
}

// WarpImage resamples src through m onto an ow×oh image: each destination
// pixel center (x+0.5, y+0.5) is mapped back by m⁻¹ to a source point (u, v)
// and the source is sampled there, source sample (i, j) sitting at
// (i+0.5, j+0.5). Bilinear interpolation at a point with fractional offsets
// (fx, fy) from tap (i, j) weighs the four taps by (1−fx)(1−fy), fx(1−fy),
// (1−fx)fy and fx·fy.
//
// It runs the fast kernels of warp_fast.go, which give the same float32
// values, bit for bit, as the reference warpImageRef for finite source
// samples (all a decoded image holds); warp_fast_test.go checks that.
func WarpImage(src *Image, m Mat, ow, oh int, interp Interp, fill Fill) *Image {
	inv, ok := m.Invert()
	if !ok || !fastWarpOK(inv, ow, oh) || (src.C != 1 && src.C != 3) || len(src.Pix) != src.W*src.H*src.C {
		return warpImageRef(src, m, ow, oh, interp, fill)
	}
	dst := NewImage(ow, oh, src.C)
	if q, ok := quarterOf(inv); ok {
		warpImageQuarter(dst, src, inv, q, interp, fill)
	} else if interp == Bicubic {
		warpBicubic(dst, src, inv, fill)
	} else {
		warpBilinear(dst, src, inv, fill)
	}
	return dst
}

// warpImageRef is the reference image warp: every destination pixel sampled
// on its own by sampleRef. The fast kernels are tested against it.
func warpImageRef(src *Image, m Mat, ow, oh int, interp Interp, fill Fill) *Image {
	inv, ok := m.Invert()
	dst := NewImage(ow, oh, src.C)
	if !ok {
		return dst
	}
	C := src.C
	for y := 0; y < oh; y++ {
		for x := 0; x < ow; x++ {
			o := (y*ow + x) * C
			sampleRef(src, inv, x, y, interp, fill, dst.Pix[o:o+C])
		}
	}
	return dst
}

// sampleRef computes destination pixel (x, y) of a warp by inv (the inverse
// of the warp's matrix) into out (C values): the preimage of its center,
// then the bilinear (2×2) or bicubic (4×4) taps with the fill mode deciding
// taps outside the source. The fast kernels call it for the pixels they do
// not handle themselves (near the borders), so those are computed by the
// reference code itself.
func sampleRef(src *Image, inv Mat, x, y int, interp Interp, fill Fill, out []float32) {
	C := src.C
	var acc [3]float64
	u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
	u, v = u-0.5, v-0.5
	i0, j0 := math.Floor(u), math.Floor(v)
	fx, fy := u-i0, v-j0
	if interp == Bicubic {
		for dj := -1; dj <= 2; dj++ {
			wy := keys(fy - float64(dj))
			jj, okj := fill.index(int(j0)+dj, src.H)
			for di := -1; di <= 2; di++ {
				w := wy * keys(fx-float64(di))
				ii, oki := fill.index(int(i0)+di, src.W)
				for c := 0; c < C; c++ {
					if okj && oki {
						acc[c] += float64(w * float64(src.Pix[(jj*src.W+ii)*C+c]))
					} else {
						acc[c] += float64(w * float64(fill.Value[c]))
					}
				}
			}
		}
	} else {
		for dj := 0; dj <= 1; dj++ {
			wy := 1 - fy
			if dj == 1 {
				wy = fy
			}
			if wy == 0 {
				continue
			}
			jj, okj := fill.index(int(j0)+dj, src.H)
			for di := 0; di <= 1; di++ {
				wx := 1 - fx
				if di == 1 {
					wx = fx
				}
				if wx == 0 {
					continue
				}
				w := wx * wy
				ii, oki := fill.index(int(i0)+di, src.W)
				for c := 0; c < C; c++ {
					if okj && oki {
						acc[c] += float64(w * float64(src.Pix[(jj*src.W+ii)*C+c]))
					} else {
						acc[c] += float64(w * float64(fill.Value[c]))
					}
				}
			}
		}
	}
	for c := 0; c < C; c++ {
		out[c] = float32(acc[c])
	}
}

// nearest returns the source pixel that contains the preimage of destination
// pixel (x, y)'s center, or ok = false when it falls outside w×h.
func nearest(inv Mat, x, y, w, h int) (int, int, bool) {
	u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
	i, j := math.Floor(u), math.Floor(v)
	if i < 0 || j < 0 || i >= float64(w) || j >= float64(h) {
		return 0, 0, false
	}
	return int(i), int(j), true
}

// WarpMask resamples a semantic mask through m by nearest neighbour under the
// same pixel-center convention as WarpImage; pixels whose preimage leaves the
// source take fillID. It runs the fast kernels of warp_fast.go, which give
// the same pixels as the reference warpMaskRef.
func WarpMask(src *image.Paletted, m Mat, ow, oh int, fillID uint8) *image.Paletted {
	inv, ok := m.Invert()
	if !ok || !fastWarpOK(inv, ow, oh) || !fastPlaneOK(src.Rect, src.Stride, 1, len(src.Pix)) {
		return warpMaskRef(src, m, ow, oh, fillID)
	}
	dst := image.NewPaletted(image.Rect(0, 0, ow, oh), src.Palette)
	if q, ok := quarterOf(inv); ok {
		quarterPlane(dst.Pix, dst.Stride, ow, oh, src.Pix, src.Stride, src.Rect.Dx(), src.Rect.Dy(), 1, q, []byte{fillID})
	} else {
		nearestPlane(dst.Pix, dst.Stride, ow, oh, src.Pix, src.Stride, src.Rect.Dx(), src.Rect.Dy(), 1, inv, []byte{fillID})
	}
	return dst
}

// warpMaskRef is the reference mask warp: nearest for every pixel.
func warpMaskRef(src *image.Paletted, m Mat, ow, oh int, fillID uint8) *image.Paletted {
	dst := image.NewPaletted(image.Rect(0, 0, ow, oh), src.Palette)
	inv, ok := m.Invert()
	w, h := src.Rect.Dx(), src.Rect.Dy()
	for y := 0; y < oh; y++ {
		for x := 0; x < ow; x++ {
			v := fillID
			if ok {
				if i, j, in := nearest(inv, x, y, w, h); in {
					v = src.Pix[j*src.Stride+i]
				}
			}
			dst.Pix[y*dst.Stride+x] = v
		}
	}
	return dst
}

// WarpInstances resamples an instance mask like WarpMask; outside pixels
// become 0 (no instance). Fast kernels as WarpMask; the reference is
// warpInstancesRef.
func WarpInstances(src *image.Gray16, m Mat, ow, oh int) *image.Gray16 {
	inv, ok := m.Invert()
	if !ok || !fastWarpOK(inv, ow, oh) || !fastPlaneOK(src.Rect, src.Stride, 2, len(src.Pix)) {
		return warpInstancesRef(src, m, ow, oh)
	}
	dst := image.NewGray16(image.Rect(0, 0, ow, oh))
	if q, ok := quarterOf(inv); ok {
		quarterPlane(dst.Pix, dst.Stride, ow, oh, src.Pix, src.Stride, src.Rect.Dx(), src.Rect.Dy(), 2, q, []byte{0, 0})
	} else {
		nearestPlane(dst.Pix, dst.Stride, ow, oh, src.Pix, src.Stride, src.Rect.Dx(), src.Rect.Dy(), 2, inv, []byte{0, 0})
	}
	return dst
}

// WarpMasks is WarpMask(mask, m, ow, oh, fillID) and WarpInstances(inst,
// m, ow, oh) at once: the same pixels, with each preimage computed once for
// both planes where they have the same size.
func WarpMasks(mask *image.Paletted, inst *image.Gray16, m Mat, ow, oh int, fillID uint8) (*image.Paletted, *image.Gray16) {
	inv, ok := m.Invert()
	if !ok || !fastWarpOK(inv, ow, oh) || mask.Rect != inst.Rect ||
		!fastPlaneOK(mask.Rect, mask.Stride, 1, len(mask.Pix)) || !fastPlaneOK(inst.Rect, inst.Stride, 2, len(inst.Pix)) {
		return WarpMask(mask, m, ow, oh, fillID), WarpInstances(inst, m, ow, oh)
	}
	if _, q := quarterOf(inv); q {
		return WarpMask(mask, m, ow, oh, fillID), WarpInstances(inst, m, ow, oh)
	}
	dm := image.NewPaletted(image.Rect(0, 0, ow, oh), mask.Palette)
	di := image.NewGray16(image.Rect(0, 0, ow, oh))
	nearestPair(dm.Pix, dm.Stride, di.Pix, di.Stride, ow, oh, mask.Pix, mask.Stride, inst.Pix, inst.Stride, mask.Rect.Dx(), mask.Rect.Dy(), inv, fillID)
	return dm, di
}

// warpInstancesRef is the reference instance warp: nearest for every pixel.
func warpInstancesRef(src *image.Gray16, m Mat, ow, oh int) *image.Gray16 {
	dst := image.NewGray16(image.Rect(0, 0, ow, oh))
	inv, ok := m.Invert()
	if !ok {
		return dst
	}
	w, h := src.Rect.Dx(), src.Rect.Dy()
	for y := 0; y < oh; y++ {
		for x := 0; x < ow; x++ {
			if i, j, in := nearest(inv, x, y, w, h); in {
				so := j*src.Stride + 2*i
				do := y*dst.Stride + 2*x
				dst.Pix[do], dst.Pix[do+1] = src.Pix[so], src.Pix[so+1]
			}
		}
	}
	return dst
}
