package augment_test

import (
	"fmt"
	"image"
	"math"
	"testing"

	"github.com/trueset/trueset/augment"
	"github.com/trueset/trueset/bench/kernels"
	"github.com/trueset/trueset/manifest"
)

// Figure 4 of the speed issue: flip + rotate + crop-and-resize + Gaussian
// noise on an RGB image and its two masks, ours against the same operations
// composed from github.com/disintegration/imaging and golang.org/x/image/draw
// (reference libraries); see bench/kernels for both paths. bench/cmd/kernels
// prints the ratio of one run.
//
//	go test -run '^$' -bench 'Kernels' ./augment/

var kernelSizes = []int{64, 512}

func kernelCase(tb testing.TB, n int) *kernels.Case {
	tb.Helper()
	c, err := kernels.NewCase(n)
	if err != nil {
		tb.Fatal(err)
	}
	return c
}

func BenchmarkKernels(b *testing.B) {
	for _, n := range kernelSizes {
		c := kernelCase(b, n)
		b.Run(fmt.Sprintf("%dx%d/ours", n, n), func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				c.Ours(i)
			}
		})
		b.Run(fmt.Sprintf("%dx%d/composed", n, n), func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				c.Composed(i, true)
			}
		})
		b.Run(fmt.Sprintf("%dx%d/plan-copy", n, n), func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				if _, err := c.Copy(i); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// kernelPartSizes are the canvases BenchmarkKernelParts times: the figure's
// two and the large one of the speed issue's large canvases.
var kernelPartSizes = []int{64, 512, 1024}

// grayInput is c's source with its image reduced to one channel (the red
// one), as the generated gray scenes are: the gray paths of the kernels.
func grayInput(c *kernels.Case) *augment.Input {
	in := *c.In
	rgb := c.In.Image
	g := augment.NewImage(rgb.W, rgb.H, 1)
	for i := range g.Pix {
		g.Pix[i] = rgb.Pix[3*i]
	}
	in.Image = g
	return &in
}

// BenchmarkKernelParts times each step of the ours path on its own, for
// profiling: the three warps, the noise and the rounding to 8 bits, for the
// RGB image and (suffix -gray) the gray one, and a whole Plan.Copy of the
// gray source (warps, cuts check, noise, labels measured again).
//
//	go test -run '^$' -bench 'KernelParts' -cpuprofile cpu.out ./augment/
func BenchmarkKernelParts(b *testing.B) {
	for _, n := range kernelPartSizes {
		c := kernelCase(b, n)
		d := c.Copies[0].D
		in := c.In
		gray := grayInput(c)
		for _, src := range []*augment.Input{in, gray} {
			sfx := ""
			if src.Image.C == 1 {
				sfx = "-gray"
			}
			b.Run(fmt.Sprintf("%dx%d/warp-image%s", n, n, sfx), func(b *testing.B) {
				for i := 0; i < b.N; i++ {
					augment.WarpImage(src.Image, d.M, d.W, d.H, augment.Bilinear, augment.Fill{})
				}
			})
			b.Run(fmt.Sprintf("%dx%d/warp-image-bicubic%s", n, n, sfx), func(b *testing.B) {
				for i := 0; i < b.N; i++ {
					augment.WarpImage(src.Image, d.M, d.W, d.H, augment.Bicubic, augment.Fill{})
				}
			})
			img := augment.WarpImage(src.Image, d.M, d.W, d.H, augment.Bilinear, augment.Fill{})
			b.Run(fmt.Sprintf("%dx%d/noise%s", n, n, sfx), func(b *testing.B) {
				for i := 0; i < b.N; i++ {
					augment.GaussianNoise(img, manifest.RNG(uint64(i)), 4)
				}
			})
			b.Run(fmt.Sprintf("%dx%d/to-image%s", n, n, sfx), func(b *testing.B) {
				for i := 0; i < b.N; i++ {
					img.ToImage()
				}
			})
		}
		b.Run(fmt.Sprintf("%dx%d/warp-mask", n, n), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				augment.WarpMask(in.Mask, d.M, d.W, d.H, 0)
			}
		})
		b.Run(fmt.Sprintf("%dx%d/warp-instances", n, n), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				augment.WarpInstances(in.Inst, d.M, d.W, d.H)
			}
		})
		b.Run(fmt.Sprintf("%dx%d/warp-masks", n, n), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				augment.WarpMasks(in.Mask, in.Inst, d.M, d.W, d.H, 0)
			}
		})
		quarter, qw, qh := augment.RotateCanvas(float64(n), float64(n), 90, true)
		quarter = augment.FlipH(float64(n)).Then(quarter)
		b.Run(fmt.Sprintf("%dx%d/warp-image-quarter-turn", n, n), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				augment.WarpImage(in.Image, quarter, qw, qh, augment.Bilinear, augment.Fill{})
			}
		})
		b.Run(fmt.Sprintf("%dx%d/plan-copy-gray", n, n), func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				if _, err := c.Plan.Copy(gray, kernels.Seed, 0, c.Copies[i%len(c.Copies)].K, nil); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// kernelEdgeDist is how far (in source pixels) a preimage coordinate lies
// from the nearest pixel edge.
func kernelEdgeDist(u float64) float64 { return math.Abs(u - math.Round(u)) }

// TestKernelsAgree holds the figure's two paths to the augmentation tests'
// standard (augment/geometry_test.go): against x/image/draw doing the same
// composed map in one transform per plane, our masks differ only at ties
// (preimage within 1e-9 px of a pixel edge, under 0.5 % of pixels) and our
// image has a PSNR ≥ 40 dB over the pixels whose preimage lies 2 px inside the
// source (PSNR with peak 255 is common practice). Against the step-by-step
// composition the benchmark times, which interpolates three times instead of
// once, agreement is necessarily looser; it is logged and bounded loosely.
func TestKernelsAgree(t *testing.T) {
	for _, n := range kernelSizes {
		c := kernelCase(t, n)
		for i := range c.Copies {
			d := c.Copies[i].D
			inv, _ := d.M.Invert()
			if math.Max(math.Abs(inv[0]), math.Abs(inv[1])) > 1 || math.Max(math.Abs(inv[3]), math.Abs(inv[4])) > 1 {
				t.Fatalf("copy %d: matrix %v shrinks; x/image/draw would widen its kernel", i, d.M)
			}
			ours := augment.WarpImage(c.In.Image, d.M, d.W, d.H, augment.Bilinear, c.Copies[i].Fill)
			mask := augment.WarpMask(c.In.Mask, d.M, d.W, d.H, 0)
			inst := augment.WarpInstances(c.In.Inst, d.M, d.W, d.H)

			refImg, refMask, refInst := c.Single(i)
			se, cnt := 0.0, 0
			ties := 0
			for y := 0; y < d.H; y++ {
				for x := 0; x < d.W; x++ {
					u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
					if mask.Pix[y*mask.Stride+x] != refMask.Pix[y*refMask.Stride+x] || inst.Gray16At(x, y) != refInst.Gray16At(x, y) {
						ties++
						if dd := math.Min(kernelEdgeDist(u), kernelEdgeDist(v)); dd > 1e-9 {
							t.Errorf("%d×%d copy %d: mask pixel (%d, %d) differs from x/image/draw and is %.3g px from an edge: not a tie", n, n, i, x, y, dd)
						}
					}
					if u < 2 || v < 2 || u > float64(n)-2 || v > float64(n)-2 {
						continue
					}
					o := y*refImg.Stride + 8*x
					for k := 0; k < 3; k++ {
						r := float64(uint16(refImg.Pix[o+2*k])<<8|uint16(refImg.Pix[o+2*k+1])) / 257
						e := float64(ours.Pix[(y*d.W+x)*3+k]) - r
						se += e * e
						cnt++
					}
				}
			}
			psnr := math.Inf(1)
			if se > 0 {
				psnr = 10 * math.Log10(255*255/(se/float64(cnt)))
			}
			if psnr < 40 || cnt < d.W*d.H*3/3 {
				t.Errorf("%d×%d copy %d: image vs draw.BiLinear (one transform): PSNR %.1f dB over %d samples, want ≥ 40 dB over ≥ a third", n, n, i, psnr, cnt)
			}
			if share := float64(ties) / float64(d.W*d.H); share >= 0.005 {
				t.Errorf("%d×%d copy %d: %d mask ties (%.3f %%) ≥ 0.5 %%", n, n, i, ties, 100*share)
			}

			// The step-by-step composition, noise left out.
			comp, cmask, cinst := c.Composed(i, false)
			out := ours.ToImage().(*image.RGBA)
			se, cnt = 0, 0
			diff := 0
			for y := 0; y < d.H; y++ {
				for x := 0; x < d.W; x++ {
					if mask.Pix[y*mask.Stride+x] != cmask.Pix[y*cmask.Stride+x] || inst.Gray16At(x, y) != cinst.Gray16At(x, y) {
						diff++
					}
					u, v := inv.Apply(float64(x)+0.5, float64(y)+0.5)
					if u < 4 || v < 4 || u > float64(n)-4 || v > float64(n)-4 {
						continue
					}
					o := y*out.Stride + 4*x
					for k := 0; k < 3; k++ {
						e := float64(out.Pix[o+k]) - float64(comp.Pix[o+k])
						se += e * e
						cnt++
					}
				}
			}
			psnr = 10 * math.Log10(255*255/(se/float64(cnt)))
			share := float64(diff) / float64(d.W*d.H)
			if i == 0 {
				t.Logf("%d×%d copy %d: against the step-by-step composition, image PSNR %.1f dB (4 px inside), masks differ at %.2f %% of pixels (double rounding at object edges)", n, n, i, psnr, 100*share)
			}
			if psnr < 25 || share > 0.05 {
				t.Errorf("%d×%d copy %d: step-by-step composition: PSNR %.1f dB (want ≥ 25), masks differ at %.2f %% (want ≤ 5 %%)", n, n, i, psnr, 100*share)
			}
		}
	}
}
