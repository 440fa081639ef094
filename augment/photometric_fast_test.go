package augment

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// gaussianBlurRef is the reference of GaussianBlur: every tap's index
// clamped, each output value summed on its own, i = −r..r.
func gaussianBlurRef(m *Image, sigma float64) {
	if !(sigma > 0) || math.IsInf(sigma, 1) || m.W == 0 || m.H == 0 {
		return
	}
	w := gaussKernel(sigma)
	r := (len(w) - 1) / 2
	W, H, C := m.W, m.H, m.C
	tmp := make([]float64, len(m.Pix))
	for y := 0; y < H; y++ {
		row := y * W
		for x := 0; x < W; x++ {
			for c := 0; c < C; c++ {
				s := 0.0
				for i := -r; i <= r; i++ {
					xx := min(max(x+i, 0), W-1)
					s += w[i+r] * float64(m.Pix[(row+xx)*C+c])
				}
				tmp[(row+x)*C+c] = s
			}
		}
	}
	for y := 0; y < H; y++ {
		for x := 0; x < W; x++ {
			for c := 0; c < C; c++ {
				s := 0.0
				for i := -r; i <= r; i++ {
					yy := min(max(y+i, 0), H-1)
					s += w[i+r] * tmp[(yy*W+x)*C+c]
				}
				m.Pix[(y*W+x)*C+c] = float32(s)
			}
		}
	}
}

// TestGaussianBlurMatchesReference holds GaussianBlur to gaussianBlurRef bit
// for bit: gray and RGB, integer and fractional values (with −0), kernels of
// radius 1 to 8, canvases narrower and lower than the kernel.
func TestGaussianBlurMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 1))
	for _, sz := range [][2]int{{1, 1}, {2, 9}, {5, 3}, {17, 16}, {40, 31}, {130, 70}} {
		for _, c := range []int{1, 3} {
			for _, integers := range []bool{true, false} {
				src := fastTestImage(sz[0], sz[1], c, rng, integers)
				for _, sigma := range []float64{0, math.NaN(), math.Inf(1), 0.3, 0.8, 1.7, 2.6} {
					got, want := src.Clone(), src.Clone()
					GaussianBlur(got, sigma)
					gaussianBlurRef(want, sigma)
					fastSameImage(t, fmt.Sprintf("%dx%d, %d channel(s), sigma %v", sz[0], sz[1], c, sigma), got, want)
				}
			}
		}
	}
}

// BenchmarkBlur times GaussianBlur against its reference on a 512×512 gray
// image, sigma 0.8 (radius 3, the example plan's largest).
//
//	go test -run '^$' -bench 'Blur$' ./augment/
func BenchmarkBlur(b *testing.B) {
	img := fastTestImage(512, 512, 1, rand.New(rand.NewPCG(1, 1)), true)
	for _, f := range []struct {
		name string
		fn   func(*Image, float64)
	}{{"fast", GaussianBlur}, {"reference", gaussianBlurRef}} {
		b.Run(f.name, func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				f.fn(img, 0.8)
			}
		})
	}
}
