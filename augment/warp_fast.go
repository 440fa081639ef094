package augment

import (
	"image"
	"math"
)

// Fast warp kernels. Each gives the same values, bit for bit, as its
// reference in warp.go (warpImageRef, warpMaskRef, warpInstancesRef), which
// warp_fast_test.go checks; they are faster because they
//   - loop over the raw planes, with no per-pixel calls or interface values;
//   - compute each preimage with the reference's own expression (Mat.Apply),
//     (inv[0]·(x+½) + inv[1]·(y+½)) + inv[2], but with inv[0]·(x+½) taken
//     from a table per column and inv[1]·(y+½) once per row, so the rounded
//     result is the same and not an accumulated one; like the reference,
//     every product is rounded before it is added (the float64
//     conversions), so no build fuses them into FMAs on one side and not the
//     other (the tests pass built with GOAMD64=v3, which fuses where allowed);
//   - sample all the taps of a pixel directly where they all lie inside the
//     source, leaving only the pixels near the borders (where the fill mode
//     decides) to the reference's own per-pixel code, sampleRef; those
//     inside form one run per row (insideRuns), found once, so the loops over
//     them test nothing per pixel, and keys4 gives the four bicubic weights
//     of an offset without keys' branches;
//   - visit turned maps in blocks of warpTile × warpTile destination pixels,
//     whose preimages stay in cache;
//   - move pixels by integer indices where the map is an exact flip or
//     quarter turn (every center lands on a center): pure copies.
//
// Bit-identity relies on three facts of IEEE 754 arithmetic in round to
// nearest: adding ±0 to a sum that is not −0 leaves it unchanged (so the
// reference's skipping of zero-weight taps changes nothing; its sums start at
// +0 and so are never −0), multiplication commutes exactly, and sums of small
// multiples of ½ are exact. The first needs finite samples: 0·Inf is NaN
// while a skipped tap contributes nothing. Decoded images are finite.

// fastWarpOK says whether the fast kernels may run: a finite inverse and an
// output small enough that integer coordinate arithmetic cannot overflow.
func fastWarpOK(inv Mat, ow, oh int) bool {
	for _, v := range inv {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return ow > 0 && oh > 0 && ow < 1<<24 && oh < 1<<24
}

// fastPlaneOK says whether a mask plane is laid out as the kernels assume:
// origin at (0, 0), bpp bytes per pixel, rows of stride bytes, all present.
func fastPlaneOK(r image.Rectangle, stride, bpp, n int) bool {
	w, h := r.Dx(), r.Dy()
	return r.Min == (image.Point{}) && w > 0 && h > 0 && stride >= w*bpp && n >= (h-1)*stride+w*bpp
}

// columnTerms returns inv[0]·(x+½) and inv[3]·(x+½) for x in 0..ow-1.
func columnTerms(inv Mat, ow int) (au, av []float64) {
	t := make([]float64, 2*ow)
	au, av = t[:ow], t[ow:]
	for x := range au {
		xc := float64(x) + 0.5
		au[x], av[x] = inv[0]*xc, inv[3]*xc
	}
	return au, av
}

// quarter is an exact flip or quarter turn: destination pixel (x, y) shows
// source pixel (i0 + ix·x + iy·y, j0 + jx·x + jy·y).
type quarter struct{ i0, j0, ix, iy, jx, jy int }

// quarterOf recognizes an inverse map that moves pixel centers onto pixel
// centers: its linear part a signed permutation of ±1 entries and the
// preimage of the first center a center. The reference's preimages are then
// exact (sums of small multiples of ½), so the integer indices here are the
// very pixels it samples, with fractional offsets 0.
func quarterOf(inv Mat) (quarter, bool) {
	a, b, d, e := inv[0], inv[1], inv[3], inv[4]
	unit := func(t float64) bool { return t == 1 || t == -1 }
	if !(b == 0 && d == 0 && unit(a) && unit(e)) && !(a == 0 && e == 0 && unit(b) && unit(d)) {
		return quarter{}, false
	}
	if math.Abs(inv[2]) > 1<<26 || math.Abs(inv[5]) > 1<<26 {
		return quarter{}, false
	}
	u, v := inv.Apply(0.5, 0.5)
	u, v = u-0.5, v-0.5
	if u != math.Floor(u) || v != math.Floor(v) {
		return quarter{}, false
	}
	return quarter{int(u), int(v), int(a), int(b), int(d), int(e)}, true
}

// warpTile is the side of the square blocks of destination pixels the
// kernels for turned maps visit one after the other. A block's preimage is
// a compact patch of the source that stays in cache while the block is
// computed, where one whole turned row runs across many source rows (and
// pages). The order of visits changes no value: every destination pixel is
// computed from the source alone.
const warpTile = 64

// warpImageQuarter copies pixels for an exact flip or quarter turn. Where the
// source pixel exists the reference's sum is 0 + 1·p (bilinear: the other
// taps have weight 0 and are skipped; bicubic: Keys' kernel is 1 at 0 and 0
// at ±1 and ±2, so the other taps add ±0), hence p + 0; elsewhere the fill
// mode decides and sampleRef computes the pixel. Blocks of warpTile rows
// and columns, since a quarter turn reads the source by columns.
func warpImageQuarter(dst, src *Image, inv Mat, q quarter, interp Interp, fill Fill) {
	W, H, C := src.W, src.H, src.C
	sp, dp := src.Pix, dst.Pix
	for ty := 0; ty < dst.H; ty += warpTile {
		for tx := 0; tx < dst.W; tx += warpTile {
			xe := min(tx+warpTile, dst.W)
			for y := ty; y < min(ty+warpTile, dst.H); y++ {
				i, j := q.i0+q.ix*tx+q.iy*y, q.j0+q.jx*tx+q.jy*y
				row := dp[y*dst.W*C : (y+1)*dst.W*C]
				for x := tx; x < xe; x++ {
					if uint(i) < uint(W) && uint(j) < uint(H) {
						s := (j*W + i) * C
						if C == 3 {
							o := row[3*x : 3*x+3 : 3*x+3]
							p := sp[s : s+3 : s+3]
							o[0], o[1], o[2] = p[0]+0, p[1]+0, p[2]+0
						} else {
							row[x] = sp[s] + 0
						}
					} else {
						sampleRef(src, inv, x, y, interp, fill, row[x*C:x*C+C])
					}
					i += q.ix
					j += q.jx
				}
			}
		}
	}
}

// insideRuns returns, for every destination row y, the run [runs[2y],
// runs[2y+1]) of its pixels whose preimage (au[x] + tu + inv[2] − h,
// av[x] + tv + inv[5] − h), summed left to right as the kernels sum it, lies
// in [lo, uhi) × [lo, vhi). Each coordinate is a rounded sum of a table
// monotone in x (a rounded product of a constant and x + ½) and constants,
// and rounding is monotone, so each is monotone in x and the pixels inside
// form one run: scanning in from both ends finds it, looking only at the
// pixels outside it and at most one inside.
func insideRuns(au, av []float64, inv Mat, oh int, h, lo, uhi, vhi float64) []int {
	runs := make([]int, 2*oh)
	for y := 0; y < oh; y++ {
		yc := float64(y) + 0.5
		tu, tv := float64(inv[1]*yc), float64(inv[4]*yc)
		in := func(x int) bool {
			u := au[x] + tu + inv[2] - h
			v := av[x] + tv + inv[5] - h
			return u >= lo && u < uhi && v >= lo && v < vhi
		}
		x0, x1 := 0, len(au)
		for x0 < x1 && !in(x0) {
			x0++
		}
		for x1 > x0 && !in(x1-1) {
			x1--
		}
		runs[2*y], runs[2*y+1] = x0, x1
	}
	return runs
}

// tileRun clips row y's run to the block column [tx, tx+warpTile).
func tileRun(runs []int, y, tx int) (int, int) {
	return max(runs[2*y], tx), min(runs[2*y+1], tx+warpTile)
}

// eachTiledRun visits every row's inside run (runs, from insideRuns) of an
// ow×oh output in warpTile×warpTile blocks, so a turned map reads its
// source block by block; fn gets the row, the run's part in the block and
// the row's terms inv[1]·(y+½) and inv[4]·(y+½), rounded as the reference
// rounds them.
func eachTiledRun(runs []int, ow, oh int, inv Mat, fn func(y, x0, x1 int, tu, tv float64)) {
	for ty := 0; ty < oh; ty += warpTile {
		for tx := 0; tx < ow; tx += warpTile {
			for y := ty; y < min(ty+warpTile, oh); y++ {
				x0, x1 := tileRun(runs, y, tx)
				if x0 >= x1 {
					continue
				}
				yc := float64(y) + 0.5
				fn(y, x0, x1, float64(inv[1]*yc), float64(inv[4]*yc))
			}
		}
	}
}

// sampleOutsideRuns computes the pixels left and right of each row's
// inside run with the reference sampler.
func sampleOutsideRuns(dst, src *Image, inv Mat, runs []int, interp Interp, fill Fill) {
	C := src.C
	for y := 0; y < dst.H; y++ {
		row := dst.Pix[y*dst.W*C : (y+1)*dst.W*C]
		for x := 0; x < runs[2*y]; x++ {
			sampleRef(src, inv, x, y, interp, fill, row[x*C:x*C+C])
		}
		for x := runs[2*y+1]; x < dst.W; x++ {
			sampleRef(src, inv, x, y, interp, fill, row[x*C:x*C+C])
		}
	}
}

// warpBilinear is the bilinear warp for a general map. A pixel whose
// preimage (u, v) (less ½) has 0 ≤ u < W−1 and 0 ≤ v < H−1 has all four taps
// inside: its floor is then the integer truncation and its weights and sums
// are the reference's, in the reference's order. Those pixels form one run
// per row (insideRuns), computed block by block; the pixels left and right
// of it go to sampleRef.
func warpBilinear(dst, src *Image, inv Mat, fill Fill) {
	W, C := src.W, src.C
	au, av := columnTerms(inv, dst.W)
	runs := insideRuns(au, av, inv, dst.H, 0.5, 0, float64(src.W-1), float64(src.H-1))
	sampleOutsideRuns(dst, src, inv, runs, Bilinear, fill)
	c2, c5 := inv[2], inv[5]
	sp := src.Pix
	stride := W * C
	eachTiledRun(runs, dst.W, dst.H, inv, func(y, x0, x1 int, tu, tv float64) {
		ru, rv := au[x0:x1], av[x0:x1]
		rv = rv[:len(ru)]
		if C == 3 {
			bilinearRGB(dst.Pix[(y*dst.W+x0)*3:(y*dst.W+x1)*3], ru, rv, tu, tv, c2, c5, sp, stride)
		} else {
			bilinearGray(dst.Pix[y*dst.W+x0:y*dst.W+x1], ru, rv, tu, tv, c2, c5, sp, stride)
		}
	})
}

// bilinearGray computes a run of gray pixels whose taps all lie inside:
// pixel k's preimage from ru[k], rv[k] and the row's terms, its four taps,
// the products and sums in the reference's order.
func bilinearGray(out []float32, ru, rv []float64, tu, tv, c2, c5 float64, sp []float32, stride int) {
	rv = rv[:len(ru)]
	out = out[:len(ru)]
	for k := range ru {
		u := ru[k] + tu + c2 - 0.5
		v := rv[k] + tv + c5 - 0.5
		i, j := int(u), int(v)
		fx, fy := u-float64(i), v-float64(j)
		gx, gy := 1-fx, 1-fy
		s := j*stride + i
		p := sp[s : s+2 : s+2]
		q := sp[s+stride : s+stride+2 : s+stride+2]
		out[k] = float32(0 + float64(gx*gy*float64(p[0])) + float64(fx*gy*float64(p[1])) + float64(gx*fy*float64(q[0])) + float64(fx*fy*float64(q[1])))
	}
}

// bilinearRGB is bilinearGray for RGB pixels.
func bilinearRGB(out []float32, ru, rv []float64, tu, tv, c2, c5 float64, sp []float32, stride int) {
	rv = rv[:len(ru)]
	out = out[:3*len(ru)]
	for k := range ru {
		u := ru[k] + tu + c2 - 0.5
		v := rv[k] + tv + c5 - 0.5
		i, j := int(u), int(v)
		fx, fy := u-float64(i), v-float64(j)
		gx, gy := 1-fx, 1-fy
		w00, w10, w01, w11 := gx*gy, fx*gy, gx*fy, fx*fy
		s := j*stride + 3*i
		p := sp[s : s+6 : s+6]
		q := sp[s+stride : s+stride+6 : s+stride+6]
		o := out[3*k : 3*k+3 : 3*k+3]
		o[0] = float32(0 + float64(w00*float64(p[0])) + float64(w10*float64(p[3])) + float64(w01*float64(q[0])) + float64(w11*float64(q[3])))
		o[1] = float32(0 + float64(w00*float64(p[1])) + float64(w10*float64(p[4])) + float64(w01*float64(q[1])) + float64(w11*float64(q[4])))
		o[2] = float32(0 + float64(w00*float64(p[2])) + float64(w10*float64(p[5])) + float64(w01*float64(q[2])) + float64(w11*float64(q[5])))
	}
}

// keys4 returns Keys' kernel at the four tap offsets of a fractional
// offset f ∈ [0, 1): keys(f+1), keys(f), keys(f−1), keys(f−2), each
// argument formed as keys' callers form it. Their absolute values lie in
// [1, 2], [0, 1), (0, 1] and (1, 2], so each takes its branch of keys
// without testing; where an argument rounds to the end of its range (f+1 to
// 1 or 2, |f−2| to 2) both of keys' formulas give +0 (keys returns 0 at 2),
// which TestKeys4 checks along with the rest.
func keys4(f float64) (k0, k1, k2, k3 float64) {
	const a = -0.5
	inner := func(t float64) float64 { // ((a+2)t − (a+3))t² + 1
		p := float64((a+2)*t) - (a + 3)
		return float64(p*t*t) + 1
	}
	outer := func(t float64) float64 { // ((at − 5a)t + 8a)t − 4a
		p := float64(a*t) - 5*a
		p = float64(p*t) + 8*a
		return float64(p*t) - 4*a
	}
	return outer(f + 1), inner(f), inner(math.Abs(f - 1)), outer(math.Abs(f - 2))
}

// warpBicubic is the bicubic warp for a general map: all 16 taps lie inside
// where 1 ≤ u < W−2 and 1 ≤ v < H−2 (one run per row, insideRuns, computed
// block by block; the pixels left and right of it go to sampleRef). The 4 +
// 4 kernel weights are computed once per pixel (keys4; the reference
// computes the same values 4 + 16 times) and the 16 products summed in the
// reference's order, row by row.
func warpBicubic(dst, src *Image, inv Mat, fill Fill) {
	W, C := src.W, src.C
	au, av := columnTerms(inv, dst.W)
	runs := insideRuns(au, av, inv, dst.H, 0.5, 1, float64(src.W-2), float64(src.H-2))
	sampleOutsideRuns(dst, src, inv, runs, Bicubic, fill)
	c2, c5 := inv[2], inv[5]
	sp := src.Pix
	stride := W * C
	eachTiledRun(runs, dst.W, dst.H, inv, func(y, x0, x1 int, tu, tv float64) {
		row := dst.Pix[y*dst.W*C : (y+1)*dst.W*C]
		for x := x0; x < x1; x++ {
			u := au[x] + tu + c2 - 0.5
			v := av[x] + tv + c5 - 0.5
			i, j := int(u), int(v)
			var kx, ky [4]float64
			kx[0], kx[1], kx[2], kx[3] = keys4(u - float64(i))
			ky[0], ky[1], ky[2], ky[3] = keys4(v - float64(j))
			s := (j-1)*stride + (i-1)*C
			if C == 3 {
				var a0, a1, a2 float64
				for dj := 0; dj < 4; dj++ {
					p := sp[s+dj*stride : s+dj*stride+12 : s+dj*stride+12]
					wy := ky[dj]
					for di := 0; di < 4; di++ {
						w := wy * kx[di]
						a0 += float64(w * float64(p[3*di]))
						a1 += float64(w * float64(p[3*di+1]))
						a2 += float64(w * float64(p[3*di+2]))
					}
				}
				o := row[3*x : 3*x+3 : 3*x+3]
				o[0], o[1], o[2] = float32(a0), float32(a1), float32(a2)
			} else {
				var a0 float64
				for dj := 0; dj < 4; dj++ {
					p := sp[s+dj*stride : s+dj*stride+4 : s+dj*stride+4]
					wy := ky[dj]
					a0 += float64(wy * kx[0] * float64(p[0]))
					a0 += float64(wy * kx[1] * float64(p[1]))
					a0 += float64(wy * kx[2] * float64(p[2]))
					a0 += float64(wy * kx[3] * float64(p[3]))
				}
				row[x] = float32(a0)
			}
		}
	})
}

// nearestPlane is the nearest-neighbour warp of a mask plane of bpp bytes a
// pixel (1: class ids, 2: 16-bit instance ids): the reference's test
// floor(u) ∈ [0, w) is u ∈ [0, w), after which floor is truncation. The
// pixels inside form one run per row (insideRuns), computed block by block;
// the others take the bpp bytes of fill.
func nearestPlane(dp []byte, dstride, ow, oh int, sp []byte, sstride, w, h, bpp int, inv Mat, fill []byte) {
	au, av := columnTerms(inv, ow)
	runs := insideRuns(au, av, inv, oh, 0, 0, float64(w), float64(h))
	for y := 0; y < oh; y++ {
		row := dp[y*dstride : y*dstride+ow*bpp]
		for x := 0; x < runs[2*y]; x++ {
			copy(row[x*bpp:x*bpp+bpp], fill)
		}
		for x := runs[2*y+1]; x < ow; x++ {
			copy(row[x*bpp:x*bpp+bpp], fill)
		}
	}
	c2, c5 := inv[2], inv[5]
	eachTiledRun(runs, ow, oh, inv, func(y, x0, x1 int, tu, tv float64) {
		ru, rv := au[x0:x1], av[x0:x1]
		rv = rv[:len(ru)]
		if bpp == 1 {
			nearest1(dp[y*dstride+x0:y*dstride+x1], ru, rv, tu, tv, c2, c5, sp, sstride)
		} else {
			nearest2(dp[y*dstride+2*x0:y*dstride+2*x1], ru, rv, tu, tv, c2, c5, sp, sstride)
		}
	})
}

// nearest1 computes a run of 1-byte mask pixels whose preimages all lie
// inside: pixel k's preimage from ru[k], rv[k] and the row's terms, then
// the source pixel it falls in.
func nearest1(out []byte, ru, rv []float64, tu, tv, c2, c5 float64, sp []byte, sstride int) {
	rv = rv[:len(ru)]
	out = out[:len(ru)]
	for k := range ru {
		u := ru[k] + tu + c2
		v := rv[k] + tv + c5
		out[k] = sp[int(v)*sstride+int(u)]
	}
}

// nearest2 is nearest1 for 2-byte pixels.
func nearest2(out []byte, ru, rv []float64, tu, tv, c2, c5 float64, sp []byte, sstride int) {
	rv = rv[:len(ru)]
	out = out[:2*len(ru)]
	for k := range ru {
		u := ru[k] + tu + c2
		v := rv[k] + tv + c5
		s := int(v)*sstride + 2*int(u)
		p := sp[s : s+2 : s+2]
		o := out[2*k : 2*k+2 : 2*k+2]
		o[0], o[1] = p[0], p[1]
	}
}

// nearestPair is nearestPlane for a class mask (1 byte a pixel, fill
// fillID) and an instance mask (2 bytes, fill 0) of the same w×h size at
// once: one preimage per pixel, read in both.
func nearestPair(dm []byte, dmStride int, di []byte, diStride int, ow, oh int, sm []byte, smStride int, si []byte, siStride int, w, h int, inv Mat, fillID uint8) {
	au, av := columnTerms(inv, ow)
	runs := insideRuns(au, av, inv, oh, 0, 0, float64(w), float64(h))
	for y := 0; y < oh; y++ {
		rm := dm[y*dmStride : y*dmStride+ow]
		ri := di[y*diStride : y*diStride+2*ow]
		for x := 0; x < runs[2*y]; x++ {
			rm[x], ri[2*x], ri[2*x+1] = fillID, 0, 0
		}
		for x := runs[2*y+1]; x < ow; x++ {
			rm[x], ri[2*x], ri[2*x+1] = fillID, 0, 0
		}
	}
	c2, c5 := inv[2], inv[5]
	eachTiledRun(runs, ow, oh, inv, func(y, x0, x1 int, tu, tv float64) {
		nearestBoth(dm[y*dmStride+x0:y*dmStride+x1], di[y*diStride+2*x0:y*diStride+2*x1], au[x0:x1], av[x0:x1], tu, tv, c2, c5, sm, smStride, si, siStride)
	})
}

// nearestBoth is nearest1 and nearest2 in one loop.
func nearestBoth(om, oi []byte, ru, rv []float64, tu, tv, c2, c5 float64, sm []byte, smStride int, si []byte, siStride int) {
	rv = rv[:len(ru)]
	om = om[:len(ru)]
	oi = oi[:2*len(ru)]
	for k := range ru {
		u := ru[k] + tu + c2
		v := rv[k] + tv + c5
		i, j := int(u), int(v)
		om[k] = sm[j*smStride+i]
		s := j*siStride + 2*i
		p := si[s : s+2 : s+2]
		o := oi[2*k : 2*k+2 : 2*k+2]
		o[0], o[1] = p[0], p[1]
	}
}

// quarterPlane is nearestPlane for an exact flip or quarter turn: the
// reference's preimages are then pixel centers i + ½, whose floor is i.
// Blocks of warpTile rows and columns, as warpImageQuarter.
func quarterPlane(dp []byte, dstride, ow, oh int, sp []byte, sstride, w, h, bpp int, q quarter, fill []byte) {
	for ty := 0; ty < oh; ty += warpTile {
		for tx := 0; tx < ow; tx += warpTile {
			xe := min(tx+warpTile, ow)
			for y := ty; y < min(ty+warpTile, oh); y++ {
				i, j := q.i0+q.ix*tx+q.iy*y, q.j0+q.jx*tx+q.jy*y
				row := dp[y*dstride : y*dstride+ow*bpp]
				if bpp == 1 {
					f := fill[0]
					for x := tx; x < xe; x++ {
						if uint(i) < uint(w) && uint(j) < uint(h) {
							row[x] = sp[j*sstride+i]
						} else {
							row[x] = f
						}
						i += q.ix
						j += q.jx
					}
					continue
				}
				f0, f1 := fill[0], fill[1]
				for x := tx; x < xe; x++ {
					o := row[2*x : 2*x+2 : 2*x+2]
					if uint(i) < uint(w) && uint(j) < uint(h) {
						s := j*sstride + 2*i
						p := sp[s : s+2 : s+2]
						o[0], o[1] = p[0], p[1]
					} else {
						o[0], o[1] = f0, f1
					}
					i += q.ix
					j += q.jx
				}
			}
		}
	}
}
