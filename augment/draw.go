package augment

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/trueset/trueset/manifest"
)

// Drawn is one copy's steps with their parameters drawn: the composed matrix
// and output size of the geometric steps, and the photometric steps in plan
// order.
type Drawn struct {
	M     Mat
	W, H  int
	Ops   []manifest.LineageOp // every applied step, in plan order, with its parameters
	photo []photoOp
}

type photoOp struct {
	op  string
	p   map[string]float64
	lin int // its entry in Drawn.Ops
}

func uni(rng *rand.Rand, r *Range) float64 {
	if r.Max == r.Min {
		return r.Min
	}
	return r.Min + rng.Float64()*(r.Max-r.Min)
}

func uniInt(rng *rand.Rand, r *IntRange) int {
	if r.Max <= r.Min {
		return r.Min
	}
	return r.Min + rng.IntN(r.Max-r.Min+1)
}

// Draw decides one copy of a w×h source: for every step in order, whether it
// applies (its chance) and its parameters, all from rng.
func (p *Plan) Draw(rng *rand.Rand, w, h int) (*Drawn, error) {
	d := &Drawn{M: Identity, W: w, H: h}
	if err := d.steps(rng, p.Steps); err != nil {
		return nil, err
	}
	return d, nil
}

func (d *Drawn) steps(rng *rand.Rand, steps []Step) error {
	for i := range steps {
		s := &steps[i]
		if rng.Float64() >= *s.Chance {
			continue
		}
		if s.Op == "one-of" {
			total := 0.0
			for _, w := range s.Weights {
				total += w
			}
			u := rng.Float64() * total
			pick := len(s.Steps) - 1
			for j, w := range s.Weights {
				if u < w {
					pick = j
					break
				}
				u -= w
			}
			if err := d.steps(rng, s.Steps[pick:pick+1]); err != nil {
				return err
			}
			continue
		}
		if err := d.step(rng, s); err != nil {
			return err
		}
	}
	return nil
}

func (d *Drawn) add(op string, m Mat, params map[string]float64) {
	d.M = d.M.Then(m)
	d.Ops = append(d.Ops, manifest.LineageOp{Op: op, Params: params})
}

func (d *Drawn) step(rng *rand.Rand, s *Step) error {
	w, h := float64(d.W), float64(d.H)
	switch s.Op {
	case "flip":
		if s.Axis == "horizontal" {
			d.add("flip-horizontal", FlipH(w), nil)
		} else {
			d.add("flip-vertical", FlipV(h), nil)
		}
	case "rotate":
		deg := uni(rng, s.Degrees)
		m, ow, oh := RotateCanvas(w, h, deg, s.Expand)
		if ow > MaxSide || oh > MaxSide {
			return fmt.Errorf("rotate with expand makes a %d×%d canvas; at most %d a side", ow, oh, MaxSide)
		}
		exp := 0.0
		if s.Expand {
			exp = 1
		}
		d.add("rotate", m, map[string]float64{"degrees": deg, "expand": exp})
		d.W, d.H = ow, oh
	case "affine":
		sc, tx, ty, sh := uni(rng, s.Scale), uni(rng, s.Translate), uni(rng, s.Translate), uni(rng, s.Shear)
		m := About(ShearX(sh).Then(Scale(sc, sc)), w/2, h/2, w/2+tx, h/2+ty)
		d.add("affine", m, map[string]float64{"scale": sc, "translate_x": tx, "translate_y": ty, "shear": sh})
	case "crop":
		aspect := w / h
		if s.Aspect != nil {
			aspect = uni(rng, s.Aspect)
		}
		var cw float64
		if s.Area != nil {
			cw = math.Sqrt(uni(rng, s.Area) * w * h * aspect)
		} else {
			cw = uni(rng, s.Size)
		}
		ch := cw / aspect
		cw, ch = math.Min(cw, w), math.Min(ch, h)
		x0 := rng.Float64() * (w - cw)
		y0 := rng.Float64() * (h - ch)
		ow, oh := d.W, d.H
		if s.Output != nil {
			ow, oh = s.Output[0], s.Output[1]
		}
		d.add("crop", CropResize(x0, y0, cw, ch, ow, oh), map[string]float64{"x": x0, "y": y0, "width": cw, "height": ch, "output_width": float64(ow), "output_height": float64(oh)})
		d.W, d.H = ow, oh
	case "resize":
		ow, oh := s.Output[0], s.Output[1]
		d.add("resize", Scale(float64(ow)/w, float64(oh)/h), map[string]float64{"output_width": float64(ow), "output_height": float64(oh)})
		d.W, d.H = ow, oh
	default:
		params := map[string]float64{}
		switch s.Op {
		case "gaussian-noise", "speckle", "blur":
			params["sigma"] = uni(rng, s.Sigma)
		case "salt-and-pepper":
			params["fraction"] = uni(rng, s.Fraction)
		case "shot-noise":
			params["photons"] = uni(rng, s.Photons)
		case "brightness":
			params["delta"] = uni(rng, s.Delta)
		case "contrast", "saturation":
			params["factor"] = uni(rng, s.Factor)
		case "gamma":
			params["gamma"] = uni(rng, s.Gamma)
		case "hue":
			params["degrees"] = uni(rng, s.Degrees)
		case "jpeg":
			params["quality"] = float64(uniInt(rng, s.Quality))
		case "cutout":
			n := uniInt(rng, s.Count)
			params["count"] = float64(n)
			params["value"] = uni(rng, s.Value)
			if s.Masks == "ignore" {
				params["ignore"] = 1
			}
			for k := 0; k < n; k++ {
				// Positions as fractions of the final canvas, known only
				// once every geometric step is drawn.
				params[fmt.Sprintf("w%d", k)] = uni(rng, s.Size)
				params[fmt.Sprintf("h%d", k)] = uni(rng, s.Size)
				params[fmt.Sprintf("u%d", k)] = rng.Float64()
				params[fmt.Sprintf("v%d", k)] = rng.Float64()
			}
		}
		// Noise steps get a seed of their own so the copy can be replayed
		// from its lineage alone.
		switch s.Op {
		case "gaussian-noise", "salt-and-pepper", "shot-noise", "speckle":
			params["seed"] = float64(rng.Uint64() >> 11) // 53 bits: exact in a float64
		}
		d.photo = append(d.photo, photoOp{s.Op, params, len(d.Ops)})
		d.Ops = append(d.Ops, manifest.LineageOp{Op: s.Op, Params: params})
	}
	return nil
}
