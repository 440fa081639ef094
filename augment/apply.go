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
// manifest.RNG(seed, src, k, try): try counts the redraws the redraw policy
// makes when a crop or turn cuts an object below cuts.least_shown (bounded
// by cuts.tries; after that the cut objects are dropped). Labels are then
// measured again from the warped instance mask, and targets recomputed from
// defs; targets without a definition are carried over unchanged.
func (p *Plan) Copy(in *Input, seed uint64, src, k int, defs []manifest.TargetDef) (*Output, error) {
	W, H := in.Image.W, in.Image.H
	cuts := &p.Geometry.Cuts
	var d *Drawn
	var frac map[int]float64
	var inst *image.Gray16
	min := *cuts.LeastShown
	tries := 1
	if cuts.Policy == "redraw" {
		tries = cuts.Tries
	}
	ok := false
	for try := 0; try < tries && !ok; try++ {
		var err error
		d, err = p.Draw(manifest.RNG(seed, uint64(src), uint64(k), uint64(try)), W, H)
		if err != nil {
			return nil, fmt.Errorf("%s copy %d: %w", in.Record.ID, k, err)
		}
		d.Redraws = try
		inst = WarpInstances(in.Inst, d.M, d.W, d.H)
		frac = keptFractions(in.Record.Objects, inst, d.M)
		ok = true
		if cuts.Policy == "redraw" {
			for _, f := range frac {
				if f < min {
					ok = false
					break
				}
			}
		}
	}
	// The last try's warped instance mask and kept fractions are what render
	// would compute again from the same matrix; it takes them over.
	return p.render(in, d, defs, inst, frac)
}

// Rebuild makes a copy again from its lineage alone (the composed matrix and
// every pixel step's parameters, noise seeds included) and the plan's
// geometry settings (sampling, outside, cuts). It gives the same bytes as
// the Copy that wrote the lineage.
func (p *Plan) Rebuild(in *Input, lin *manifest.Lineage, w, h int, defs []manifest.TargetDef) (*Output, error) {
	d := &Drawn{M: Mat(lin.Matrix), W: w, H: h, Geometry: cloneOps(lin.Geometry), Pixels: cloneOps(lin.Pixels)}
	if lin.Cuts != nil {
		d.Redraws = lin.Cuts.Redraws
	}
	return p.render(in, d, defs, nil, nil)
}

// cloneOps copies lineage steps so that render's notes (skipped_gray) do
// not write into the caller's lineage.
func cloneOps(ops []manifest.LineageOp) []manifest.LineageOp {
	out := make([]manifest.LineageOp, len(ops))
	for i, op := range ops {
		out[i] = op
		out[i].Params = append([]manifest.LineageParam(nil), op.Params...)
	}
	return out
}

// render warps and relabels a drawn copy: image by the plan's sampling and
// outside, masks by nearest neighbour with the same matrix; objects cut
// below cuts.least_shown are erased (to "ignore") unless the policy is keep
// (under redraw, only a copy that ran out of tries still has such objects);
// then the pixel steps run in order. inst and frac, when not nil, are the
// instance mask already warped by d.M and its keptFractions (render owns
// inst from then on).
func (p *Plan) render(in *Input, d *Drawn, defs []manifest.TargetDef, inst *image.Gray16, frac map[int]float64) (*Output, error) {
	if inst == nil {
		inst = WarpInstances(in.Inst, d.M, d.W, d.H)
		frac = keptFractions(in.Record.Objects, inst, d.M)
	}
	g := &p.Geometry
	min := *g.Cuts.LeastShown
	fillID := uint8(0)
	if g.Outside.Classes == "ignore" {
		fillID = manifest.IgnoreID
	}
	mask := WarpMask(in.Mask, d.M, d.W, d.H, fillID)
	fill := Fill{Mode: g.Outside.Image}
	if t := g.Outside.Tone; t.RGB != nil {
		for c := 0; c < 3; c++ {
			fill.Value[c] = float32(t.RGB[c])
		}
	} else {
		fill.Value = [3]float32{float32(t.Level), float32(t.Level), float32(t.Level)}
	}
	interp := Bilinear
	if g.Sampling == "bicubic" {
		interp = Bicubic
	}
	img := WarpImage(in.Image, d.M, d.W, d.H, interp, fill)
	dropped := 0
	if g.Cuts.Policy != "keep" {
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
		dropped = len(ids)
	}
	for i := range d.Pixels {
		op := &d.Pixels[i]
		if (op.Do == "hue" || op.Do == "saturation") && img.C == 1 {
			// Color steps do nothing to a gray image; the lineage says so.
			op.Set("skipped_gray", true)
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
	// Planted noise, held-out marks and bait cues belong to the source's
	// record: the copy's labels are measured from its own masks, and moves
	// and pixel steps change a cue (manifest/verify_planted.go).
	rec.Mislabel, rec.HeldOut, rec.Bait = nil, "", nil
	rec.Lineage = &manifest.Lineage{Source: in.Record.ID, Geometry: d.Geometry, Pixels: d.Pixels, Matrix: d.M}
	if rec.Lineage.Geometry == nil {
		rec.Lineage.Geometry = []manifest.LineageOp{}
	}
	if rec.Lineage.Pixels == nil {
		rec.Lineage.Pixels = []manifest.LineageOp{}
	}
	if d.Redraws > 0 || dropped > 0 {
		rec.Lineage.Cuts = &manifest.LineageCuts{Redraws: d.Redraws, Dropped: dropped}
	}
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
	moments := manifest.MeasureMoments(inst)
	kept := map[int]bool{}
	out := []manifest.Object{} // [] in the record, not null, when none is left
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
		// The plan's factors, where a plan set them, are mapped by m;
		// objects read from a plain folder have none and get none.
		if o.Center != nil {
			cx, cy := m.Apply(o.Center[0], o.Center[1])
			n.Center = &[2]float64{manifest.Round(cx, 3), manifest.Round(cy, 3)}
		}
		if o.Size != nil {
			n.Size = manifest.Factor(manifest.Round(*o.Size*s, 3))
		}
		if o.Angle != nil {
			sn, cs := math.Sincos(*o.Angle * math.Pi / 180)
			dx, dy := m[0]*cs+m[1]*sn, m[3]*cs+m[4]*sn
			n.Angle = manifest.Factor(manifest.Round(math.Atan2(dy, dx)*180/math.Pi, 3))
		}
		n.Measured(moments[o.Instance])
		out = append(out, n)
	}
	for i := range out {
		if out[i].Parent != 0 && !kept[out[i].Parent] {
			out[i].Parent = 0
		}
	}
	return out
}

func applyPhoto(img *Image, mask *image.Paletted, inst *image.Gray16, op *manifest.LineageOp) error {
	rng := manifest.RNG(uint64(op.Num("seed")))
	switch op.Do {
	case "gaussian-noise":
		GaussianNoise(img, rng, op.Num("sigma"))
	case "salt-and-pepper":
		SaltPepper(img, rng, op.Num("fraction"))
	case "shot-noise":
		ShotNoise(img, rng, op.Num("photons"))
	case "speckle":
		Speckle(img, rng, op.Num("sigma"))
	case "blur":
		GaussianBlur(img, op.Num("sigma"))
	case "brightness":
		Brightness(img, op.Num("delta"))
	case "contrast":
		Contrast(img, op.Num("factor"))
	case "gamma":
		Gamma(img, op.Num("gamma"))
	case "hue":
		return HueShift(img, op.Num("angle"))
	case "saturation":
		return Saturation(img, op.Num("factor"))
	case "jpeg":
		return JPEGRoundTrip(img, int(op.Num("quality")))
	case "cutout":
		rects, err := CutoutRects(op)
		if err != nil {
			return err
		}
		cutout(img, mask, inst, float32(op.Num("tone")), op.Str("classes") == "ignore", rects)
	default:
		return fmt.Errorf("internal: no pixel step %q", op.Do)
	}
	return nil
}

// Rect is one cutout rectangle as its lineage records it: center as shares
// of the canvas width and height, sides in pixels.
type Rect struct{ U, V, W, H float64 }

// CutoutRects reads a cutout step's rectangles from its lineage entry.
func CutoutRects(op *manifest.LineageOp) ([]Rect, error) {
	raw, _ := op.Get("rects")
	list, ok := raw.([]any)
	if !ok && raw != nil {
		return nil, fmt.Errorf("cutout: rects is not a list")
	}
	out := make([]Rect, 0, len(list))
	for i, e := range list {
		m, ok := e.(map[string]any)
		c, ok2 := m["center"].([]any)
		if !ok || !ok2 || len(c) != 2 {
			return nil, fmt.Errorf("cutout: rects[%d] is not {center: [u, v], width, height}", i)
		}
		u, _ := c[0].(float64)
		v, _ := c[1].(float64)
		w, _ := m["width"].(float64)
		h, _ := m["height"].(float64)
		out = append(out, Rect{u, v, w, h})
	}
	return out, nil
}

// cutout fills rectangles of the image with a constant; with ignore their
// mask pixels become the ignore id and lose their instance.
func cutout(img *Image, mask *image.Paletted, inst *image.Gray16, v float32, ignore bool, rects []Rect) {
	for _, r := range rects {
		w, h := r.W, r.H
		cx, cy := r.U*float64(img.W), r.V*float64(img.H)
		x0, y0 := int(math.Round(cx-w/2)), int(math.Round(cy-h/2))
		x1, y1 := int(math.Round(cx+w/2)), int(math.Round(cy+h/2))
		x0, y0 = max(x0, 0), max(y0, 0)
		x1, y1 = min(x1, img.W), min(y1, img.H)
		for y := y0; y < y1; y++ {
			for x := x0; x < x1; x++ {
				for c := 0; c < img.C; c++ {
					img.Pix[(y*img.W+x)*img.C+c] = v
				}
				if ignore {
					mask.Pix[y*mask.Stride+x] = manifest.IgnoreID
					o := y*inst.Stride + 2*x
					inst.Pix[o], inst.Pix[o+1] = 0, 0
				}
			}
		}
	}
}
