package gen

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// bgCases returns background plans of every kind over gray and RGB canvases:
// tone ranges rising, falling, flat and at the extremes 0 and 255, noise
// cells below, at and above the canvas size (fractional too), gradients at
// every quarter turn and in between.
func bgCases() []struct {
	b    BackgroundPlan
	W, H int
	bpp  int
} {
	type c = struct {
		b    BackgroundPlan
		W, H int
		bpp  int
	}
	var out []c
	rng := rand.New(rand.NewPCG(15, 1))
	tone := func() [3]uint8 {
		var t [3]uint8
		for i := range t {
			switch rng.IntN(4) {
			case 0:
				t[i] = 0
			case 1:
				t[i] = 255
			default:
				t[i] = uint8(rng.IntN(256))
			}
		}
		return t
	}
	sizes := [][2]int{{1, 1}, {3, 7}, {64, 64}, {65, 31}, {200, 120}}
	for _, sz := range sizes {
		for _, bpp := range []int{1, 4} {
			for k := 0; k < 6; k++ {
				a, z := tone(), tone()
				out = append(out,
					c{BackgroundPlan{Kind: "solid", A: a, B: z}, sz[0], sz[1], bpp},
					c{BackgroundPlan{Kind: "gradient", A: a, B: z, Angle: float64(90 * k)}, sz[0], sz[1], bpp},
					c{BackgroundPlan{Kind: "gradient", A: a, B: z, Angle: rng.Float64()*720 - 360}, sz[0], sz[1], bpp},
					c{BackgroundPlan{Kind: "noise", A: a, B: z, Cell: []float64{0.5, 1, 2.5, 10, 64, 300}[k], NoiseSeed: rng.Uint64()}, sz[0], sz[1], bpp},
					c{BackgroundPlan{Kind: "noise", A: a, B: z, Cell: 1 + rng.Float64()*40, NoiseSeed: rng.Uint64()}, sz[0], sz[1], bpp},
				)
			}
		}
	}
	return out
}

// The fast painter gives byte for byte what the reference painter gives,
// with one painter reused across all cases (buffers carry no state from one
// canvas into the next).
func TestBackgroundFastMatchesReference(t *testing.T) {
	var bp bgPainter
	for i, tc := range bgCases() {
		stride := tc.W*tc.bpp + 3 // rows with padding, as a sub-image has
		want := make([]uint8, stride*tc.H)
		got := make([]uint8, stride*tc.H)
		for j := range want {
			want[j], got[j] = 0xa5, 0xa5 // padding and alpha must stay untouched
		}
		paintBackgroundReference(&tc.b, want, stride, tc.bpp, tc.W, tc.H)
		bp.paint(&tc.b, got, stride, tc.bpp, tc.W, tc.H)
		if !bytes.Equal(got, want) {
			t.Fatalf("case %d (%+v %dx%d bpp %d): fast and reference painters differ", i, tc.b, tc.W, tc.H, tc.bpp)
		}
	}
}

// round8 agrees with uint8(math.Round(v)) (the reference painter's rounding)
// at every half, just below and above it, and on random values of the
// range it is used on.
func TestRound8(t *testing.T) {
	check := func(v float64) {
		if got, want := round8(v), uint8(math.Round(v)); got != want {
			t.Fatalf("round8(%v) = %d, math.Round gives %d", v, got, want)
		}
	}
	for i := 0; i < 256; i++ {
		for _, v := range []float64{float64(i), float64(i) + 0.5, float64(i) - 0.5} {
			if v < 0 || v >= 256 {
				continue
			}
			check(v)
			check(math.Nextafter(v, -1))
			check(math.Nextafter(v, 300))
		}
	}
	check(-0.25)
	check(math.Nextafter(0, -1))
	rng := rand.New(rand.NewPCG(8, 8))
	for i := 0; i < 100000; i++ {
		check(rng.Float64() * 255.49)
	}
}

func benchBackground(b *testing.B, side int, fast bool) {
	bg := BackgroundPlan{Kind: "noise", A: [3]uint8{20}, B: [3]uint8{70}, Cell: float64(side) / 64 * 15, NoiseSeed: 7}
	pix := make([]uint8, side*side)
	var bp bgPainter
	for b.Loop() {
		if fast {
			bp.paint(&bg, pix, side, 1, side, side)
		} else {
			paintBackgroundReference(&bg, pix, side, 1, side, side)
		}
	}
}

// BenchmarkBackground: the noise background of the default preset (gray,
// cell 15 at 64²) and of its scaled twins, fast painter against reference.
func BenchmarkBackground(b *testing.B) {
	for _, side := range []int{64, 512, 1024} {
		b.Run(fmt.Sprintf("%d/fast", side), func(b *testing.B) { benchBackground(b, side, true) })
		b.Run(fmt.Sprintf("%d/reference", side), func(b *testing.B) { benchBackground(b, side, false) })
	}
}
