// Package kernels is figure 4 of the speed issue (issue 7): a plan of flip,
// rotate, crop-and-resize and Gaussian noise applied to an RGB image and its
// two masks, done our way (the geometric steps composed into one matrix, one
// warp per plane, then the noise) and composed in the straightforward way from
// reference libraries:
//
//   - image: github.com/disintegration/imaging FlipH, then
//     golang.org/x/image/draw BiLinear.Transform for the turn, then
//     BiLinear.Transform again for the crop-and-resize (Transform rather than
//     Scale because the drawn crop has fractional corners, which Scale's
//     integer source rectangle cannot express);
//   - masks (*image.Gray class ids, *image.Gray16 instance ids): the same
//     three maps with draw.NearestNeighbor.Transform (imaging.FlipH would turn
//     a Gray16 into 8-bit NRGBA, losing instance ids above 255);
//   - noise: a plain loop over the 8-bit result adding sigma·NormFloat64 from
//     math/rand/v2 (PCG) to every channel, rounded and clamped.
//
// Both sides take the source as it is held in memory by their pipeline (ours:
// the float32 working image augment.FromImage gives, which `trueset augment`
// converts once per source; the libraries': the decoded 8-bit image) and give
// 8-bit images and the two masks. augment/kernels_bench_test.go benchmarks
// them and checks that they agree; bench/cmd/kernels prints the ratio.
package kernels

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"math/rand/v2"

	"github.com/disintegration/imaging"
	"golang.org/x/image/draw"
	"golang.org/x/image/math/f64"

	"github.com/trueset/trueset/augment"
	"github.com/trueset/trueset/manifest"
)

// PlanYAML is the figure's plan for an n×n source: the steps of
// bench/plans/kernels.yaml with the crop resized back to n×n. Cuts policy
// "keep", so Plan.Copy draws once per copy (a redraw would draw again and
// measure the policy, not the kernels).
func PlanYAML(n int) string {
	return fmt.Sprintf(`name: kernels-%d
geometry:
  sampling: bilinear
  outside:
    image: tone
    tone: 0
    classes: background
  cuts:
    policy: keep
  moves:
    - do: flip
      axis: horizontal
    - do: rotate
      angle: [-15, 15]
    - do: crop
      area: [0.7, 1.0]
      aspect: [0.8, 1.25]
      to: [%d, %d]
pixels:
  - do: gaussian-noise
    sigma: [2, 6]
`, n, n, n)
}

// Seed is the seed the copies are drawn from.
const Seed = 42

// Copies is how many different copies a Case cycles through.
const Copies = 8

// Copy is one drawn copy and the parameters the library path needs.
type Copy struct {
	K     int // copy number, ≥ 1
	D     *augment.Drawn
	Deg   float64      // rotate: degrees
	Crop  [4]float64   // crop: x, y, width, height on the turned canvas
	OW    int          // crop output width
	OH    int          // crop output height
	Sigma float64      // gaussian-noise sigma
	Seed  uint64       // gaussian-noise seed
	Fill  augment.Fill // the plan's image fill
}

// Case is one source of side N with its masks, in both pipelines' forms, and
// Copies drawn copies of it.
type Case struct {
	N      int
	Plan   *augment.Plan
	In     *augment.Input // ours: float32 image, Paletted class mask, Gray16 instances, record
	RGBA   *image.RGBA    // the libraries': the same image in 8 bits
	Class  *image.Gray    // the libraries': the class mask
	Copies []Copy
}

// NewCase builds an n×n RGB scene (a smooth background and flat-colored
// overlapping discs, later discs on top) with its class and instance masks,
// and draws Copies copies of it from the plan.
func NewCase(n int) (*Case, error) {
	p, err := augment.ParsePlan("kernels.yaml", []byte(PlanYAML(n)))
	if err != nil {
		return nil, err
	}
	rgba := image.NewRGBA(image.Rect(0, 0, n, n))
	for y := 0; y < n; y++ {
		for x := 0; x < n; x++ {
			o := y*rgba.Stride + 4*x
			s := 64 / float64(n) // the same pattern at every size
			for k := 0; k < 3; k++ {
				fx, fy, fk := float64(x)*s, float64(y)*s, float64(k)
				v := 128 + 50*math.Sin(0.21*fx+0.5*fk) + 40*math.Cos(0.17*fy-0.3*fk) + 25*math.Sin(0.11*(fx+fy)+fk)
				rgba.Pix[o+k] = uint8(math.Round(v))
			}
			rgba.Pix[o+3] = 255
		}
	}
	class := image.NewGray(rgba.Rect)
	inst := image.NewGray16(rgba.Rect)
	rng := rand.New(rand.NewPCG(7, 11))
	rec := manifest.Record{ID: "kernels", Width: n, Height: n}
	colors := [][3]uint8{{230, 40, 40}, {40, 200, 60}, {40, 80, 230}, {240, 220, 40}, {200, 40, 220}}
	for id := 1; id <= 14; id++ {
		cx, cy := rng.Float64()*float64(n), rng.Float64()*float64(n)
		r := (3 + rng.Float64()*9) * float64(n) / 64
		c := 1 + rng.IntN(5)
		for y := 0; y < n; y++ {
			for x := 0; x < n; x++ {
				dx, dy := float64(x)+0.5-cx, float64(y)+0.5-cy
				if dx*dx+dy*dy <= r*r {
					class.Pix[y*class.Stride+x] = uint8(c)
					inst.Pix[y*inst.Stride+2*x], inst.Pix[y*inst.Stride+2*x+1] = uint8(id>>8), uint8(id)
					o := y*rgba.Stride + 4*x
					rgba.Pix[o], rgba.Pix[o+1], rgba.Pix[o+2] = colors[c-1][0], colors[c-1][1], colors[c-1][2]
				}
			}
		}
		rec.Objects = append(rec.Objects, manifest.Object{Instance: id, Class: c, Shape: "disc", Center: &[2]float64{cx, cy}, Size: manifest.Factor(2 * r), Aspect: manifest.Factor(1), Shown: 1})
	}
	stats := manifest.MeasureInstances(inst)
	kept := rec.Objects[:0]
	for _, o := range rec.Objects {
		if st := stats[o.Instance]; st != nil {
			o.Box, o.Area = st.BBox, st.Area
			kept = append(kept, o)
		}
	}
	rec.Objects = kept
	pal := make(color.Palette, 256)
	for i := range pal {
		pal[i] = color.Gray{uint8(i)}
	}
	mask := image.NewPaletted(class.Rect, pal)
	copy(mask.Pix, class.Pix)
	c := &Case{N: n, Plan: p, RGBA: rgba, Class: class,
		In: &augment.Input{Record: rec, Image: augment.FromImage(rgba), Mask: mask, Inst: inst}}
	for k := 1; k <= Copies; k++ {
		d, err := p.Draw(manifest.RNG(Seed, 0, uint64(k), 0), n, n)
		if err != nil {
			return nil, err
		}
		cp := Copy{K: k, D: d, Fill: augment.Fill{Mode: "tone"}}
		ops := append(append([]manifest.LineageOp(nil), d.Geometry...), d.Pixels...)
		for _, op := range ops {
			switch op.Do {
			case "flip":
				if op.Str("axis") != "horizontal" {
					return nil, fmt.Errorf("kernels: unexpected flip axis %q", op.Str("axis"))
				}
			case "rotate":
				cp.Deg = op.Num("angle")
			case "crop":
				cp.Crop = [4]float64{op.Num("x"), op.Num("y"), op.Num("width"), op.Num("height")}
				to, _ := op.Get("to")
				wh, _ := to.([]any)
				if len(wh) != 2 {
					return nil, fmt.Errorf("kernels: crop to %v", to)
				}
				ow, _ := wh[0].(float64)
				oh, _ := wh[1].(float64)
				cp.OW, cp.OH = int(ow), int(oh)
			case "gaussian-noise":
				cp.Sigma, cp.Seed = op.Num("sigma"), uint64(op.Num("seed"))
			default:
				return nil, fmt.Errorf("kernels: unexpected step %q", op.Do)
			}
		}
		if len(ops) != 4 {
			return nil, fmt.Errorf("kernels: copy %d applied %d steps, want 4", k, len(ops))
		}
		c.Copies = append(c.Copies, cp)
	}
	return c, nil
}

// Ours runs copy i (mod Copies) our way, as Plan.render does it minus the
// labels: one warp per plane with the composed matrix, the noise on the
// float32 image, one rounding to 8 bits.
func (c *Case) Ours(i int) (image.Image, *image.Paletted, *image.Gray16) {
	cp := &c.Copies[i%len(c.Copies)]
	d := cp.D
	inst := augment.WarpInstances(c.In.Inst, d.M, d.W, d.H)
	mask := augment.WarpMask(c.In.Mask, d.M, d.W, d.H, 0)
	img := augment.WarpImage(c.In.Image, d.M, d.W, d.H, augment.Bilinear, cp.Fill)
	augment.GaussianNoise(img, manifest.RNG(cp.Seed), cp.Sigma)
	return img.ToImage(), mask, inst
}

// Copy runs copy i (mod Copies) through Plan.Copy: the same work as Ours plus
// drawing the steps and measuring the labels again from the warped masks.
func (c *Case) Copy(i int) (*augment.Output, error) {
	return c.Plan.Copy(c.In, Seed, 0, c.Copies[i%len(c.Copies)].K, nil)
}

// Composed runs copy i (mod Copies) with the libraries, step by step.
// noise = false leaves the noise out (for comparing pixels).
func (c *Case) Composed(i int, noise bool) (*image.RGBA, *image.Gray, *image.Gray16) {
	cp := &c.Copies[i%len(c.Copies)]
	n := float64(c.N)
	rot, _, _ := augment.RotateCanvas(n, n, cp.Deg, false)
	crop := augment.CropResize(cp.Crop[0], cp.Crop[1], cp.Crop[2], cp.Crop[3], cp.OW, cp.OH)
	sq := image.Rect(0, 0, c.N, c.N)
	out := image.Rect(0, 0, cp.OW, cp.OH)

	flipped := imaging.FlipH(c.RGBA)
	turned := image.NewRGBA(sq)
	draw.BiLinear.Transform(turned, f64.Aff3(rot), flipped, flipped.Bounds(), draw.Src, nil)
	img := image.NewRGBA(out)
	draw.BiLinear.Transform(img, f64.Aff3(crop), turned, turned.Bounds(), draw.Src, nil)

	flip := f64.Aff3(augment.FlipH(n))
	m1 := image.NewGray(sq)
	draw.NearestNeighbor.Transform(m1, flip, c.Class, c.Class.Rect, draw.Src, nil)
	m2 := image.NewGray(sq)
	draw.NearestNeighbor.Transform(m2, f64.Aff3(rot), m1, m1.Rect, draw.Src, nil)
	mask := image.NewGray(out)
	draw.NearestNeighbor.Transform(mask, f64.Aff3(crop), m2, m2.Rect, draw.Src, nil)

	i1 := image.NewGray16(sq)
	draw.NearestNeighbor.Transform(i1, flip, c.In.Inst, c.In.Inst.Rect, draw.Src, nil)
	i2 := image.NewGray16(sq)
	draw.NearestNeighbor.Transform(i2, f64.Aff3(rot), i1, i1.Rect, draw.Src, nil)
	inst := image.NewGray16(out)
	draw.NearestNeighbor.Transform(inst, f64.Aff3(crop), i2, i2.Rect, draw.Src, nil)

	if noise {
		rng := manifest.RNG(cp.Seed)
		for p := 0; p < len(img.Pix); p += 4 {
			for k := 0; k < 3; k++ {
				v := math.Round(float64(img.Pix[p+k]) + cp.Sigma*rng.NormFloat64())
				img.Pix[p+k] = uint8(math.Max(0, math.Min(255, v)))
			}
			img.Pix[p+3] = 255 // x/image leaves pixels outside the source transparent
		}
	}
	return img, mask, inst
}

// Single runs copy i (mod Copies) with the libraries as one transform per
// plane by our composed matrix (draw.BiLinear for the image into an RGBA64,
// draw.NearestNeighbor for the masks), no noise: the form the augmentation
// tests (augment/geometry_test.go) compare our warps with.
func (c *Case) Single(i int) (*image.RGBA64, *image.Gray, *image.Gray16) {
	cp := &c.Copies[i%len(c.Copies)]
	m := f64.Aff3(cp.D.M)
	out := image.Rect(0, 0, cp.D.W, cp.D.H)
	img := image.NewRGBA64(out)
	draw.BiLinear.Transform(img, m, c.RGBA, c.RGBA.Rect, draw.Src, nil)
	mask := image.NewGray(out)
	draw.NearestNeighbor.Transform(mask, m, c.Class, c.Class.Rect, draw.Src, nil)
	inst := image.NewGray16(out)
	draw.NearestNeighbor.Transform(inst, m, c.In.Inst, c.In.Inst.Rect, draw.Src, nil)
	return img, mask, inst
}
