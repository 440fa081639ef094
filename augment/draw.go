package augment

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/trueset/trueset/manifest"
)

// Drawn is one copy's steps with their parameters drawn: the composed matrix
// and output size of the geometry moves, each phase's applied steps as the
// lineage records them, and how many times the cut policy drew it again.
type Drawn struct {
	M        Mat
	W, H     int
	Geometry []manifest.LineageOp // applied moves, in plan order, with their parameters
	Pixels   []manifest.LineageOp // applied pixel steps, in plan order, with their parameters
	Redraws  int                  // draws the redraw policy threw away before this one
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

// Draw decides one copy of a w×h source: for every move and then every
// pixel step in order, whether it applies (its chance) and its parameters,
// all from rng.
func (p *Plan) Draw(rng *rand.Rand, w, h int) (*Drawn, error) {
	d := &Drawn{M: Identity, W: w, H: h, Geometry: []manifest.LineageOp{}, Pixels: []manifest.LineageOp{}}
	if err := d.steps(rng, p.Geometry.Moves, nil); err != nil {
		return nil, err
	}
	if err := d.steps(rng, p.Pixels, nil); err != nil {
		return nil, err
	}
	return d, nil
}

// steps draws steps in order; pick, when not nil, is the index a pick chose
// steps (of one) by.
func (d *Drawn) steps(rng *rand.Rand, steps []Step, pick *int) error {
	for i := range steps {
		s := &steps[i]
		if rng.Float64() >= *s.Chance {
			continue
		}
		if s.Do == "pick" {
			total := 0.0
			for _, w := range s.Odds {
				total += w
			}
			u := rng.Float64() * total
			j := len(s.From) - 1
			for k, w := range s.Odds {
				if u < w {
					j = k
					break
				}
				u -= w
			}
			if err := d.steps(rng, s.From[j:j+1], &j); err != nil {
				return err
			}
			continue
		}
		if err := d.step(rng, s, pick); err != nil {
			return err
		}
	}
	return nil
}

// param is one drawn parameter of a lineage entry.
func param(name string, v any) manifest.LineageParam {
	return manifest.LineageParam{Name: name, Value: v}
}

func (d *Drawn) move(s *Step, pick *int, m Mat, params ...manifest.LineageParam) {
	d.M = d.M.Then(m)
	d.Geometry = append(d.Geometry, manifest.LineageOp{Do: s.Do, Pick: pickIndex(pick), Params: params})
}

func pickIndex(pick *int) *int {
	if pick == nil {
		return nil
	}
	i := *pick
	return &i
}

func (d *Drawn) step(rng *rand.Rand, s *Step, pick *int) error {
	w, h := float64(d.W), float64(d.H)
	switch s.Do {
	case "flip":
		if s.Axis == "horizontal" {
			d.move(s, pick, FlipH(w), param("axis", "horizontal"))
		} else {
			d.move(s, pick, FlipV(h), param("axis", "vertical"))
		}
	case "rotate":
		deg := uni(rng, s.Angle)
		m, ow, oh := RotateCanvas(w, h, deg, s.GrowCanvas)
		if ow > MaxSide || oh > MaxSide {
			return fmt.Errorf("rotate with grow_canvas makes a %d×%d canvas; at most %d a side", ow, oh, MaxSide)
		}
		d.move(s, pick, m, param("angle", deg), param("grow_canvas", s.GrowCanvas))
		d.W, d.H = ow, oh
	case "warp":
		sc, tx, ty, sh := uni(rng, s.Zoom), uni(rng, s.Shift), uni(rng, s.Shift), uni(rng, s.Slant)
		m := About(ShearX(sh).Then(Scale(sc, sc)), w/2, h/2, w/2+tx, h/2+ty)
		d.move(s, pick, m, param("zoom", sc), param("shift", []any{tx, ty}), param("slant", sh))
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
		if s.To != nil {
			ow, oh = s.To[0], s.To[1]
		}
		d.move(s, pick, CropResize(x0, y0, cw, ch, ow, oh),
			param("x", x0), param("y", y0), param("width", cw), param("height", ch), param("to", []any{float64(ow), float64(oh)}))
		d.W, d.H = ow, oh
	case "resize":
		ow, oh := s.To[0], s.To[1]
		d.move(s, pick, Scale(float64(ow)/w, float64(oh)/h), param("to", []any{float64(ow), float64(oh)}))
		d.W, d.H = ow, oh
	default:
		op := manifest.LineageOp{Do: s.Do, Pick: pickIndex(pick)}
		switch s.Do {
		case "gaussian-noise", "speckle", "blur":
			op.Set("sigma", uni(rng, s.Sigma))
		case "salt-and-pepper":
			op.Set("fraction", uni(rng, s.Fraction))
		case "shot-noise":
			op.Set("photons", uni(rng, s.Photons))
		case "brightness":
			op.Set("delta", uni(rng, s.Delta))
		case "contrast", "saturation":
			op.Set("factor", uni(rng, s.Factor))
		case "gamma":
			op.Set("gamma", uni(rng, s.Gamma))
		case "hue":
			op.Set("angle", uni(rng, s.Angle))
		case "jpeg":
			op.Set("quality", float64(uniInt(rng, s.Quality)))
		case "cutout":
			n := uniInt(rng, s.Count)
			op.Set("count", float64(n))
			op.Set("tone", uni(rng, s.Tone))
			op.Set("classes", s.Classes)
			rects := make([]any, 0, n)
			for k := 0; k < n; k++ {
				// Centers as shares of the final canvas, known only once
				// every move is drawn; sides in pixels.
				rw := uni(rng, s.Size)
				rh := uni(rng, s.Size)
				u := rng.Float64()
				v := rng.Float64()
				rects = append(rects, map[string]any{"center": []any{u, v}, "width": rw, "height": rh})
			}
			op.Set("rects", rects)
		}
		// Noise steps get a seed of their own so the copy can be rebuilt
		// from its lineage alone.
		switch s.Do {
		case "gaussian-noise", "salt-and-pepper", "shot-noise", "speckle":
			op.Set("seed", float64(rng.Uint64()>>11)) // 53 bits: exact in a float64
		}
		d.Pixels = append(d.Pixels, op)
	}
	return nil
}
