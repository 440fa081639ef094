package gen

import (
	"math"

	"github.com/trueset/trueset/manifest"
)

// Backgrounds. Every value is taken at pixel centers (x+0.5, y+0.5).
//
//   - solid: tone A everywhere.
//   - gradient: t is the pixel center's projection on the direction of Angle
//     (degrees, clockwise from +x), scaled so the canvas spans t ∈ [0, 1];
//     the tone is A + t·(B − A).
//   - noise: value noise — a lattice of uniform random t ∈ [0, 1] every Cell
//     pixels, blended with the smoothstep 3u² − 2u³ in x and y; the tone is
//     A + t·(B − A) with A and B the recipe's range ends.
//
// Tones are rounded half away from zero. Each product is converted with
// float64(...) before it is added, so no build fuses it into an FMA and both
// painters below give the same bytes on every architecture.

// paintBackgroundReference fills the canvas one pixel at a time, straight
// from the definitions above. It is the reference twin of (*bgPainter).paint
// (TestBackgroundFastMatchesReference holds the two to the same bytes).
func paintBackgroundReference(b *BackgroundPlan, pix []uint8, stride, bpp, W, H int) {
	ch := 1
	if bpp == 4 {
		ch = 3
	}
	put := func(x, y int, t float64) {
		off := y*stride + x*bpp
		for c := 0; c < ch; c++ {
			a, z := float64(b.A[c]), float64(b.B[c])
			pix[off+c] = uint8(math.Round(a + float64(t*(z-a))))
		}
	}
	switch b.Kind {
	case "solid":
		for y := 0; y < H; y++ {
			for x := 0; x < W; x++ {
				put(x, y, 0)
			}
		}
	case "gradient":
		s, c, lo, hi := gradientFrame(b.Angle, W, H)
		for y := 0; y < H; y++ {
			for x := 0; x < W; x++ {
				v := float64((float64(x)+0.5)*c) + float64((float64(y)+0.5)*s)
				put(x, y, (v-lo)/(hi-lo))
			}
		}
	case "noise":
		gw, lat := noiseLattice(b, W, H, nil)
		for y := 0; y < H; y++ {
			fy := (float64(y) + 0.5) / b.Cell
			iy := int(fy)
			v := smooth(fy - float64(iy))
			for x := 0; x < W; x++ {
				fx := (float64(x) + 0.5) / b.Cell
				ix := int(fx)
				u := smooth(fx - float64(ix))
				t00, t10 := lat[iy*gw+ix], lat[iy*gw+ix+1]
				t01, t11 := lat[(iy+1)*gw+ix], lat[(iy+1)*gw+ix+1]
				top := t00 + float64(u*(t10-t00))
				bot := t01 + float64(u*(t11-t01))
				put(x, y, top+float64(v*(bot-top)))
			}
		}
	}
}

func smooth(u float64) float64 { return u * u * (3 - 2*u) }

// gradientFrame returns the sine and cosine of the gradient's direction and
// the range of the projection over the canvas corners.
func gradientFrame(angle float64, W, H int) (s, c, lo, hi float64) {
	s, c = math.Sincos(angle * math.Pi / 180)
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, p := range [4][2]float64{{0, 0}, {float64(W), 0}, {0, float64(H)}, {float64(W), float64(H)}} {
		v := float64(p[0]*c) + float64(p[1]*s)
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	return s, c, lo, hi
}

// noiseLattice draws the noise lattice (gw columns) into buf.
func noiseLattice(b *BackgroundPlan, W, H int, buf []float64) (gw int, lat []float64) {
	gw = int(math.Ceil(float64(W)/b.Cell)) + 2
	gh := int(math.Ceil(float64(H)/b.Cell)) + 2
	rng := manifest.RNG(b.NoiseSeed)
	lat = grow(buf, gw*gh)
	for i := range lat {
		lat[i] = rng.Float64()
	}
	return gw, lat
}

// bgPainter paints what paintBackgroundReference paints with the terms that
// depend on the column alone computed once per column and, for noise, the
// lattice rows interpolated across x (top, bot) once per band of rows that
// share a lattice row: the same operations on the same operands, so the same
// bytes. It keeps its buffers between calls.
type bgPainter struct {
	t        []float64 // per column: t of the current row
	col      []float64 // per column: smoothstep weight u (noise) or projection term (gradient)
	ix       []int     // per column: lattice column (noise)
	top, bot []float64 // per column: the band's interpolated upper and lower lattice rows
	lat      []float64
}

func (bp *bgPainter) paint(b *BackgroundPlan, pix []uint8, stride, bpp, W, H int) {
	bp.t = grow(bp.t, W)
	bp.col = grow(bp.col, W)
	tr, col := bp.t, bp.col
	switch b.Kind {
	case "solid":
		clear(tr)
		for y := 0; y < H; y++ {
			toneRow(b, pix[y*stride:], bpp, tr)
		}
	case "gradient":
		s, c, lo, hi := gradientFrame(b.Angle, W, H)
		for x := range col {
			col[x] = float64((float64(x) + 0.5) * c)
		}
		for y := 0; y < H; y++ {
			ys := float64((float64(y) + 0.5) * s)
			for x, cx := range col {
				tr[x] = (cx + ys - lo) / (hi - lo)
			}
			toneRow(b, pix[y*stride:], bpp, tr)
		}
	case "noise":
		var gw int
		gw, bp.lat = noiseLattice(b, W, H, bp.lat)
		lat := bp.lat
		if cap(bp.ix) < W {
			bp.ix = make([]int, W)
		}
		ix := bp.ix[:W]
		for x := range ix {
			fx := (float64(x) + 0.5) / b.Cell
			ix[x] = int(fx)
			col[x] = smooth(fx - float64(ix[x]))
		}
		bp.top, bp.bot = grow(bp.top, W), grow(bp.bot, W)
		top, bot := bp.top, bp.bot
		band := -1
		for y := 0; y < H; y++ {
			fy := (float64(y) + 0.5) / b.Cell
			iy := int(fy)
			v := smooth(fy - float64(iy))
			if iy != band {
				band = iy
				r0, r1 := lat[iy*gw:(iy+1)*gw], lat[(iy+1)*gw:(iy+2)*gw]
				for x, i := range ix {
					u := col[x]
					top[x] = r0[i] + float64(u*(r0[i+1]-r0[i]))
					bot[x] = r1[i] + float64(u*(r1[i+1]-r1[i]))
				}
			}
			for x, tp := range top {
				tr[x] = tp + float64(v*(bot[x]-tp))
			}
			toneRow(b, pix[y*stride:], bpp, tr)
		}
	}
}

// toneRow writes the tones A + t·(B − A) of one row, t[x] for column x.
func toneRow(b *BackgroundPlan, row []uint8, bpp int, t []float64) {
	if bpp == 1 {
		a := float64(b.A[0])
		d := float64(b.B[0]) - a
		row = row[:len(t)]
		for x, tx := range t {
			row[x] = round8(a + float64(tx*d))
		}
		return
	}
	for c := 0; c < 3; c++ {
		a := float64(b.A[c])
		d := float64(b.B[c]) - a
		for x, tx := range t {
			row[x*bpp+c] = round8(a + float64(tx*d))
		}
	}
}

// round8 is uint8(math.Round(v)) for v in (−0.5, 256), which holds every
// tone. v + 0.5 is rounded to float64 and may reach the next integer when
// v is just below a half; subtracting 0.5 from the result is exact, so the
// rare overshoot is seen and undone (a branch almost never taken, unlike
// one on the fraction).
func round8(v float64) uint8 {
	i := int(v + 0.5)
	if float64(i)-0.5 > v {
		i--
	}
	return uint8(i)
}

func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
