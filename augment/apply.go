package augment

import (
	"fmt"
	"image"
	"math"
	"sort"

	"github.com/trueset/trueset/manifest"
)

// Input is one source sample in memory: its record and its pixels.
type Input struct {
	Record manifest.Record
	Image  *Image
	Mask   *image.Paletted
	Inst   *image.Gray16
}

// Output is one augmented copy.
type Output struct {
	Image  image.Image
	Mask   *image.Paletted
	Inst   *image.Gray16
	Record manifest.Record
}

// Copy makes copy k (k ≥ 1) of source number src. Every draw comes from
// manifest.RNG(seed, src, k, try): try counts the redraws the resample
// policy makes when a crop or turn cuts an object below cut.least_shown
// (bounded by cut.tries; after that the cut objects are dropped). Labels are
// then measured again from the warped instance mask, and targets recomputed
// from defs; targets without a definition are carried over unchanged.
func (p *Plan) Copy(in *Input, seed uint64, src, k int, defs []manifest.TargetDef) (*Output, error) {
	W, H := in.Image.W, in.Image.H
	var d *Drawn
	var frac map[int]float64
	var inst *image.Gray16
	min := *p.Cut.LeastShown
	tries := 1
	if p.Cut.Policy == "resample" {
		tries = p.Cut.Tries
	}
	ok := false
	for try := 0; try < tries && !ok; try++ {
		var err error
		d, err = p.Draw(manifest.RNG(seed, uint64(src), uint64(k), uint64(try)), W, H)
		if err != nil {
			return nil, fmt.Errorf("%s copy %d: %w", in.Record.ID, k, err)
		}
		inst = WarpInstances(in.Inst, d.M, d.W, d.H)
		frac = keptFractions(in.Record.Objects, inst, d.M)
		ok = true
		if p.Cut.Policy == "resample" {
			for _, f := range frac {
				if f < min {
					ok = false
					break
				}
			}
		}
	}
	if !ok {
		d.Ops = append(d.Ops, manifest.LineageOp{Op: "cut-policy", Params: map[string]float64{"resample_tries": float64(tries), "then_drop": 1}})
	}
	// The last try's warped instance mask and kept fractions are what render
	// would compute again from the same matrix; it takes them over.
	return p.render(in, d, defs, inst, frac)
}

// lineageGeometric are the lineage names of geometric steps (their effect
// is in the composed matrix).
var lineageGeometric = map[string]bool{"flip-horizontal": true, "flip-vertical": true, "rotate": true, "affine": true, "crop": true, "resize": true}

// Rebuild makes a copy again from its lineage alone (the composed matrix and
// every photometric step's parameters, noise seeds included) and the plan's
// fill, interpolation and cut settings. It gives the same bytes as the Copy
// that wrote the lineage.
func (p *Plan) Rebuild(in *Input, lin *manifest.Lineage, w, h int, defs []manifest.TargetDef) (*Output, error) {
	d := &Drawn{M: Mat(lin.Affine), W: w, H: h, Ops: lin.Ops}
	for i, op := range lin.Ops {
		if !lineageGeometric[op.Op] && op.Op != "cut-policy" {
			d.photo = append(d.photo, photoOp{op.Op, op.Params, i})
		}
	}
	return p.render(in, d, defs, nil, nil)
}

// render warps and relabels a drawn copy: image by the plan's interpolation
// and fill, masks by nearest neighbour with the same matrix; objects cut below
// cut.least_shown are erased (to "ignore") under the drop policy, or when a
// resample ran out of tries; then the photometric steps run in order. inst
// and frac, when not nil, are the instance mask already warped by d.M and its
// keptFractions (render owns inst from then on).
func (p *Plan) render(in *Input, d *Drawn, defs []manifest.TargetDef, inst *image.Gray16, frac map[int]float64) (*Output, error) {
	if inst == nil {
		inst = WarpInstances(in.Inst, d.M, d.W, d.H)
		frac = keptFractions(in.Record.Objects, inst, d.M)
	}
	drop := p.Cut.Policy == "drop"
	for _, op := range d.Ops {
		if op.Op == "cut-policy" {
			drop = true
		}
	}
	min := *p.Cut.LeastShown
	fillID := uint8(0)
	if p.MaskFill == "ignore" {
		fillID = manifest.IgnoreID
	}
	mask := WarpMask(in.Mask, d.M, d.W, d.H, fillID)
	fill := Fill{Mode: p.Fill.Mode}
	if p.Fill.Color != nil {
		for c := 0; c < 3; c++ {
			fill.Value[c] = float32(p.Fill.Color[c])
		}
	} else {
		fill.Value = [3]float32{float32(p.Fill.Intensity), float32(p.Fill.Intensity), float32(p.Fill.Intensity)}
	}
	interp := Bilinear
	if p.Interpolation == "bicubic" {
		interp = Bicubic
	}
	img := WarpImage(in.Image, d.M, d.W, d.H, interp, fill)
	if drop {
		// A dropped object's pixels still show it, so they become "ignore"
		// rather than background. Erased in id order, for determinism.
		ids := make([]int, 0, len(frac))
		for id, f := range frac {
			if f < min {
				ids = append(ids, id)
			}
		}
		sort.Ints(ids)
		for _, id := range ids {
			erase(mask, inst, id)
		}
	}
	for _, op := range d.photo {
		if (op.op == "hue" || op.op == "saturation") && img.C == 1 {
			// Color steps do nothing to a gray image; the lineage says so.
			op.p["skipped_gray"] = 1
			continue
		}
		if err := applyPhoto(img, mask, inst, op); err != nil {
			return nil, fmt.Errorf("%s: %w", in.Record.ID, err)
		}
	}
	out := &Output{Image: img.ToImage(), Mask: mask, Inst: inst}
	rec := &out.Record
	*rec = in.Record
	rec.Width, rec.Height = d.W, d.H
	rec.Objects = relabel(in.Record.Objects, inst, d.M, frac)
	rec.Targets = recompute(defs, rec.Objects, in.Record.Targets)
	rec.Lineage = &manifest.Lineage{Source: in.Record.ID, Ops: d.Ops, Affine: d.M}
	return out, nil
}

// keptFractions returns, for each object of the source, the share of its
// pixels that survive the warp: warped area / (source area · |det M|).
func keptFractions(objs []manifest.Object, inst *image.Gray16, m Mat) map[int]float64 {
	stats := manifest.MeasureInstances(inst)
	scale := math.Abs(m.Det())
	out := make(map[int]float64, len(objs))
	for _, o := range objs {
		if o.Area == 0 {
			continue
		}
		a := 0
		if st := stats[o.Instance]; st != nil {
			a = st.Area
		}
		out[o.Instance] = math.Min(1, float64(a)/(float64(o.Area)*scale))
	}
	return out
}

func erase(mask *image.Paletted, inst *image.Gray16, id int) {
	hi, lo := uint8(id>>8), uint8(id)
	for i := 0; i+1 < len(inst.Pix); i += 2 {
		if inst.Pix[i] == hi && inst.Pix[i+1] == lo {
			inst.Pix[i], inst.Pix[i+1] = 0, 0
			mask.Pix[i/2] = manifest.IgnoreID
		}
	}
}

// relabel measures the warped instance mask: objects that left the frame (or
// were dropped) disappear, the rest get their new box, area and visible
// share, and their factors mapped by m: center through m, size by √|det m|,
// angle as the direction m gives the object's own x axis. A part whose parent
// is gone loses its parent reference.
func relabel(objs []manifest.Object, inst *image.Gray16, m Mat, frac map[int]float64) []manifest.Object {
	stats := manifest.MeasureInstances(inst)
	kept := map[int]bool{}
	var out []manifest.Object
	s := math.Sqrt(math.Abs(m.Det()))
	for _, o := range objs {
		st := stats[o.Instance]
		if st == nil {
			continue
		}
		kept[o.Instance] = true
		n := o
		n.Box, n.Area = st.BBox, st.Area
		f := frac[o.Instance]
		if o.Area > 0 {
			// Measured again, since cutouts may have hidden more pixels.
			f = math.Min(f, float64(st.Area)/(float64(o.Area)*math.Abs(m.Det())))
		}
		n.Shown = manifest.Round(math.Min(1, o.Shown*f), 4)
		// Objects read from a plain folder have no plan factors (size 0);
		// theirs stay unset rather than be made up from (0, 0) and 0°.
		if o.Size > 0 {
			cx, cy := m.Apply(o.Center[0], o.Center[1])
			n.Center = [2]float64{manifest.Round(cx, 3), manifest.Round(cy, 3)}
			n.Size = manifest.Round(o.Size*s, 3)
			sn, cs := math.Sincos(o.Angle * math.Pi / 180)
			dx, dy := m[0]*cs+m[1]*sn, m[3]*cs+m[4]*sn
			n.Angle = manifest.Round(math.Atan2(dy, dx)*180/math.Pi, 3)
		}
		out = append(out, n)
	}
	for i := range out {
		if out[i].Parent != 0 && !kept[out[i].Parent] {
			out[i].Parent = 0
		}
	}
	return out
}

func applyPhoto(img *Image, mask *image.Paletted, inst *image.Gray16, op photoOp) error {
	p := op.p
	rng := manifest.RNG(uint64(p["seed"]))
	switch op.op {
	case "gaussian-noise":
		GaussianNoise(img, rng, p["sigma"])
	case "salt-and-pepper":
		SaltPepper(img, rng, p["fraction"])
	case "shot-noise":
		ShotNoise(img, rng, p["photons"])
	case "speckle":
		Speckle(img, rng, p["sigma"])
	case "blur":
		GaussianBlur(img, p["sigma"])
	case "brightness":
		Brightness(img, p["delta"])
	case "contrast":
		Contrast(img, p["factor"])
	case "gamma":
		Gamma(img, p["gamma"])
	case "hue":
		return HueShift(img, p["degrees"])
	case "saturation":
		return Saturation(img, p["factor"])
	case "jpeg":
		return JPEGRoundTrip(img, int(p["quality"]))
	case "cutout":
		cutout(img, mask, inst, p)
	default:
		return fmt.Errorf("internal: no photometric step %q", op.op)
	}
	return nil
}

// cutout fills rectangles of the image with a constant; with "ignore" their
// mask pixels become the ignore id and lose their instance.
func cutout(img *Image, mask *image.Paletted, inst *image.Gray16, p map[string]float64) {
	n := int(p["count"])
	v := float32(p["value"])
	for k := 0; k < n; k++ {
		w, h := p[fmt.Sprintf("w%d", k)], p[fmt.Sprintf("h%d", k)]
		cx, cy := p[fmt.Sprintf("u%d", k)]*float64(img.W), p[fmt.Sprintf("v%d", k)]*float64(img.H)
		x0, y0 := int(math.Round(cx-w/2)), int(math.Round(cy-h/2))
		x1, y1 := int(math.Round(cx+w/2)), int(math.Round(cy+h/2))
		x0, y0 = max(x0, 0), max(y0, 0)
		x1, y1 = min(x1, img.W), min(y1, img.H)
		for y := y0; y < y1; y++ {
			for x := x0; x < x1; x++ {
				for c := 0; c < img.C; c++ {
					img.Pix[(y*img.W+x)*img.C+c] = v
				}
				if p["ignore"] == 1 {
					mask.Pix[y*mask.Stride+x] = manifest.IgnoreID
					o := y*inst.Stride + 2*x
					inst.Pix[o], inst.Pix[o+1] = 0, 0
				}
			}
		}
	}
}
