package manifest_test

import (
	"fmt"
	"image"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/internal/benchcpu"
	"github.com/trueset/trueset/manifest"
)

// BenchmarkPNGChoice encodes the images of 8 generated samples, and noisy
// copies of them, at 64² (the default preset), 512² and 1024² (its scaled
// twins in bench/recipes), with the content-chosen filter and level
// ("chosen") and with fixed ones ("f<filter>-l<level>", level −2 =
// Huffman-only; "f4-l4" is the one setting used before the choice). The
// noisy copies add Gaussian noise of σ drawn from [2, 6] to every pixel, as
// the gaussian-noise step of bench/plans/kernels.yaml does, then round and
// clamp: what augmented images look like to a PNG encoder.
//
// Measured when the choice was made (5 interleaved rounds, medians of
// cpu-ns/op and B/file, against f4-l4): on noisy images Huffman-only with
// Average is 0.77× the bytes at 0.27× the CPU time at 512² and 0.74× at
// 0.15–0.3× at 1024² (Up or Sub are a little faster and 4–5% larger), 0.81× at
// 0.73× at 64²; on the generated 512² and 1024² scenes it is 1.5–2.3× the
// bytes, as their flat stretches need string matching, where level 6
// would save 10–12% for 1.25–1.3× the time and Up at level 1 cost 13–16%
// more bytes for half the time; on the default preset's 64² images
// Huffman-only with Paeth would be 0.91× the bytes at half the time, but
// their sampled zero share (≥ 0.41) keeps them at level 4 with the other
// generated images.
func BenchmarkPNGChoice(b *testing.B) {
	cands := []manifest.PNGChoice{
		{Filter: 4, Level: 4}, {Filter: 4, Level: -2}, {Filter: 3, Level: -2}, {Filter: 1, Level: -2},
		{Filter: 2, Level: -2}, {Filter: 2, Level: 1}, {Filter: 4, Level: 1}, {Filter: 4, Level: 6},
		{Filter: 3, Level: 4},
	}
	for _, side := range []int{64, 512, 1024} {
		gens := benchImages(b, side)
		noisy := make([]image.Image, len(gens))
		rng := rand.New(rand.NewPCG(uint64(side), 15))
		for i, m := range gens {
			noisy[i] = addNoise(m.(*image.Gray), 2+4*rng.Float64(), rng)
		}
		for _, set := range []struct {
			name string
			ims  []image.Image
		}{{"generated", gens}, {"noisy", noisy}} {
			run := func(name string, enc func(*manifest.Encoder, image.Image) ([]byte, error)) {
				b.Run(fmt.Sprintf("%s-%d/%s", set.name, side, name), func(b *testing.B) {
					e := manifest.NewEncoder()
					total := 0
					for _, m := range set.ims {
						out, err := enc(e, m)
						if err != nil {
							b.Fatal(err)
						}
						total += len(out)
					}
					defer benchcpu.PerOp(b)()
					for i := 0; b.Loop(); i++ {
						if _, err := enc(e, set.ims[i%len(set.ims)]); err != nil {
							b.Fatal(err)
						}
					}
					// After the loop: b.Loop's first call drops metrics reported before it.
					b.ReportMetric(float64(total)/float64(len(set.ims)), "B/file")
				})
			}
			run("chosen", (*manifest.Encoder).Encode)
			for _, c := range cands {
				run(fmt.Sprintf("f%d-l%d", c.Filter, c.Level), func(e *manifest.Encoder, m image.Image) ([]byte, error) { return e.EncodeWith(m, c) })
			}
		}
	}
}

// benchImages renders the images of 8 samples at the given side.
func benchImages(b *testing.B, side int) []image.Image {
	var r *gen.Recipe
	var err error
	if side == 64 {
		r, err = gen.Preset(gen.DefaultPreset)
	} else {
		r, err = gen.LoadRecipe(fmt.Sprintf("../bench/recipes/canvas-%d.yaml", side))
	}
	if err != nil {
		b.Fatal(err)
	}
	rd := gen.NewRenderer(r)
	out := make([]image.Image, 8)
	for i := range out {
		s, err := rd.Generate(1, i)
		if err != nil {
			b.Fatal(err)
		}
		out[i] = s.Image
	}
	return out
}

// addNoise returns m plus N(0, sigma²) noise per pixel, rounded and clamped
// to 0..255.
func addNoise(m *image.Gray, sigma float64, rng *rand.Rand) *image.Gray {
	out := image.NewGray(m.Rect)
	for i, v := range m.Pix {
		out.Pix[i] = uint8(min(255, max(0, math.Round(float64(v)+sigma*rng.NormFloat64()))))
	}
	return out
}
