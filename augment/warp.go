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
	Mode  string     // "constant" (default), "edge" (repeat the border) or "reflect" (mirror about the border)
	Value [3]float32 // the constant, per channel
}

// index maps a tap index i into 0..n-1 under the fill mode; ok is false when
// the constant applies.
func (f Fill) index(i, n int) (int, bool) {
	if i >= 0 && i < n {
		return i, true
	}
	switch f.Mode {
	case "edge":
		if i < 0 {
			return 0, true
		}
		return n - 1, true
	case "reflect":
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
func keys(t float64) float64 {
	const a = -0.5
	t = math.Abs(t)
	switch {
	case t <= 1:
		return ((a+2)*t-(a+3))*t*t + 1
	case t < 2:
		return ((a*t-5*a)*t+8*a)*t - 4*a
	}
	return 0
}

// WarpImage resamples src through m onto an ow×oh image: each destination
// pixel centre (x+0.5, y+0.5) is mapped back by m⁻¹ to a source point (u, v)
// and the source is sampled there, source sample (i, j) sitting at
// (i+0.5, j+0.5). Bilinear interpolation at a point with fractional offsets
// (fx, fy) from tap (i, j) weighs the four taps by (1−fx)(1−fy), fx(1−fy),
// (1−fx)fy and fx·fy.
func WarpImage(src *Image, m Mat, ow, oh int, interp Interp, fill Fill) *Image {
	inv, ok := m.Invert()
	dst := NewImage(ow, oh, src.C)
	if !ok {
		return dst
	}
	C := src.C
	var acc [3]float64
	for y := 0; y < oh; y++ {
		for x := 0; x < ow; x++ {
			u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
			u, v = u-0.5, v-0.5
			i0, j0 := math.Floor(u), math.Floor(v)
			fx, fy := u-i0, v-j0
			acc = [3]float64{}
			if interp == Bicubic {
				for dj := -1; dj <= 2; dj++ {
					wy := keys(fy - float64(dj))
					jj, okj := fill.index(int(j0)+dj, src.H)
					for di := -1; di <= 2; di++ {
						w := wy * keys(fx-float64(di))
						ii, oki := fill.index(int(i0)+di, src.W)
						for c := 0; c < C; c++ {
							if okj && oki {
								acc[c] += w * float64(src.Pix[(jj*src.W+ii)*C+c])
							} else {
								acc[c] += w * float64(fill.Value[c])
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
								acc[c] += w * float64(src.Pix[(jj*src.W+ii)*C+c])
							} else {
								acc[c] += w * float64(fill.Value[c])
							}
						}
					}
				}
			}
			o := (y*ow + x) * C
			for c := 0; c < C; c++ {
				dst.Pix[o+c] = float32(acc[c])
			}
		}
	}
	return dst
}

// nearest returns the source pixel that contains the preimage of destination
// pixel (x, y)'s centre, or ok = false when it falls outside w×h.
func nearest(inv Mat, x, y, w, h int) (int, int, bool) {
	u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
	i, j := math.Floor(u), math.Floor(v)
	if i < 0 || j < 0 || i >= float64(w) || j >= float64(h) {
		return 0, 0, false
	}
	return int(i), int(j), true
}

// WarpMask resamples a semantic mask through m by nearest neighbour under the
// same pixel-centre convention as WarpImage; pixels whose preimage leaves the
// source take fillID.
func WarpMask(src *image.Paletted, m Mat, ow, oh int, fillID uint8) *image.Paletted {
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
// become 0 (no instance).
func WarpInstances(src *image.Gray16, m Mat, ow, oh int) *image.Gray16 {
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
