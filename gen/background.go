package gen

import (
	"math"

	"github.com/trueset/trueset/manifest"
)

// paintBackground fills the canvas. Every value is taken at pixel centers
// (x+0.5, y+0.5).
//
//   - solid: tone A everywhere.
//   - gradient: t is the pixel center's projection on the direction of Angle
//     (degrees, clockwise from +x), scaled so the canvas spans t ∈ [0, 1];
//     the tone is A + t·(B − A).
//   - noise: value noise — a lattice of uniform random t ∈ [0, 1] every Cell
//     pixels, blended with the smoothstep 3u² − 2u³ in x and y; the tone is
//     A + t·(B − A) with A and B the recipe's range ends.
func paintBackground(b *BackgroundPlan, pix []uint8, stride, bpp, W, H int) {
	ch := 1
	if bpp == 4 {
		ch = 3
	}
	put := func(x, y int, t float64) {
		off := y*stride + x*bpp
		for c := 0; c < ch; c++ {
			a, z := float64(b.A[c]), float64(b.B[c])
			pix[off+c] = uint8(math.Round(a + t*(z-a)))
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
		s, c := math.Sincos(b.Angle * math.Pi / 180)
		// Projection range over the canvas corners.
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, p := range [4][2]float64{{0, 0}, {float64(W), 0}, {0, float64(H)}, {float64(W), float64(H)}} {
			v := p[0]*c + p[1]*s
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		for y := 0; y < H; y++ {
			for x := 0; x < W; x++ {
				v := (float64(x)+0.5)*c + (float64(y)+0.5)*s
				put(x, y, (v-lo)/(hi-lo))
			}
		}
	case "noise":
		gw := int(math.Ceil(float64(W)/b.Cell)) + 2
		gh := int(math.Ceil(float64(H)/b.Cell)) + 2
		rng := manifest.RNG(b.NoiseSeed)
		lat := make([]float64, gw*gh)
		for i := range lat {
			lat[i] = rng.Float64()
		}
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
				top := t00 + u*(t10-t00)
				bot := t01 + u*(t11-t01)
				put(x, y, top+v*(bot-top))
			}
		}
	}
}

func smooth(u float64) float64 { return u * u * (3 - 2*u) }
