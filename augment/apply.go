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
	// NotWritten, when not "", says why no draw of the copy could be
	// written (CopyWith); the other fields are then empty.
	NotWritten string
	Redraws    int  // draws thrown away before the one used
	Lost       bool // an object of the source was lost, cut or dropped
}

// Copy makes copy k (k ≥ 1) of source number src under the plan's rules
// alone (CopyWith with no further rules).
func (p *Plan) Copy(in *Input, seed uint64, src, k int, defs []manifest.TargetDef) (*Output, error) {
	return p.CopyWith(in, seed, src, k, defs, CopyRules{})
}

// CopyRules are what a copy must respect beyond the plan's cuts policy.
type CopyRules struct {
	// Whole: no object may be lost, cut or dropped, because the sample
	// carries targets without a definition (undeclared labels.csv columns)
	// that such a copy could make false.
	Whole bool
}

// Fates of an object under a copy's matrix.
const (
	fateWhole = iota // every pixel center maps inside the frame, and the object shows
	fateOut          // no pixel center maps inside and nothing of it shows
	fateCut          // neither: the frame cuts it
	fateLost         // inside the frame, but the warp left no pixel of it
)

// CopyWith makes copy k (k ≥ 1) of source number src. Every draw comes from
// manifest.RNG(seed, src, k, try). A draw is taken again (up to cuts.tries)
// when the redraw policy finds an object cut below cuts.least_shown; when
// the frame cuts an object that a text or number target reads (whatever the
// policy: a reading is never shortened); and, with rules.Whole, when any
// object is lost, cut or dropped. When no draw keeps the readings (and,
// with Whole, every object) whole, the copy is not written: Output.NotWritten
// says why. Otherwise the last draw that keeps them is used, cut objects
// are dropped or kept by the policy, labels are measured again from the
// warped instance mask and targets recomputed from defs; targets without a
// definition are carried over unchanged.
func (p *Plan) CopyWith(in *Input, seed uint64, src, k int, defs []manifest.TargetDef, rules CopyRules) (*Output, error) {
	W, H := in.Image.W, in.Image.H
	cuts := &p.Geometry.Cuts
	min := *cuts.LeastShown
	read, reading := readObjects(in.Record.Objects, defs)
	tries := 1
	if cuts.Policy == "redraw" || len(read) > 0 || rules.Whole {
		tries = cuts.Tries
	}
	type drawn struct {
		d    *Drawn
		inst *image.Gray16
		mask *image.Paletted // warped with inst when only one draw can be taken, else nil
		frac map[int]float64
		st   map[int]*manifest.InstanceStats // inst's
		lost bool                            // some object lost, cut or dropped
	}
	var chosen, best *drawn
	why := ""
	for try := 0; try < tries; try++ {
		d, err := p.Draw(manifest.RNG(seed, uint64(src), uint64(k), uint64(try)), W, H)
		if err != nil {
			return nil, fmt.Errorf("%s copy %d: %w", in.Record.ID, k, err)
		}
		d.Redraws = try
		var inst *image.Gray16
		var mask *image.Paletted
		if tries == 1 {
			// This draw is the copy: warp the class mask with it.
			mask, inst = WarpMasks(in.Mask, in.Inst, d.M, d.W, d.H, p.fillID())
		} else {
			inst = WarpInstances(in.Inst, d.M, d.W, d.H)
		}
		stats := manifest.MeasureInstances(inst)
		frac := keptFractions(in.Record.Objects, stats, d.M)
		fates := frameFates(in.Record.Objects, in.Inst, stats, d.M, d.W, d.H)
		short := false // below least_shown somewhere
		for _, f := range frac {
			short = short || f < min
		}
		lost := short && cuts.Policy != "keep"
		for _, f := range fates {
			lost = lost || f != fateWhole
		}
		hard := ""
		for id := range read {
			if fates[id] == fateCut {
				hard = fmt.Sprintf("every one of its %d draws cut an object that target %q reads", tries, reading)
				break
			}
		}
		if hard == "" && rules.Whole && (lost || cutoutHides(d, inst)) {
			hard = fmt.Sprintf("every one of its %d draws lost, cut or dropped an object, and labels.csv columns without a declaration in %s would be carried", tries, folderColumnsFile)
			lost = true
		}
		if hard != "" {
			why = hard
			continue
		}
		best = &drawn{d, inst, mask, frac, stats, lost}
		if !(cuts.Policy == "redraw" && short) {
			chosen = best
			break
		}
	}
	if chosen == nil {
		chosen = best // the redraw policy ran out of tries: cut objects are dropped
	}
	if chosen == nil {
		return &Output{NotWritten: why, Redraws: tries - 1}, nil
	}
	// The chosen draw's warped instance mask, its measures and the kept
	// fractions are what render would compute again from the same matrix;
	// it takes them over.
	out, err := p.render(in, chosen.d, defs, chosen.inst, chosen.mask, chosen.st, chosen.frac)
	if err != nil {
		return nil, err
	}
	out.Lost = chosen.lost || len(out.Record.Objects) < len(in.Record.Objects)
	out.Redraws = chosen.d.Redraws
	return out, nil
}

// readObjects returns the instances that a text or number target of defs
// reads (glyphs of its classes) and the name of one such target.
func readObjects(objs []manifest.Object, defs []manifest.TargetDef) (map[int]bool, string) {
	out := map[int]bool{}
	name := ""
	for _, t := range defs {
		if t.Kind != "text" && t.Kind != "number" {
			continue
		}
		want := map[string]bool{}
		for _, c := range t.Classes {
			want[c] = true
		}
		for _, o := range objs {
			if o.Area > 0 && o.Glyph != "" && (len(t.Classes) == 0 || want[o.ClassName]) {
				out[o.Instance] = true
				if name == "" {
					name = t.Name
				}
			}
		}
	}
	return out, name
}

// frameFates says, for each object of the source, what the copy's matrix
// does to it: whole when the centers of all its pixels map inside the w×h
// frame ("fully inside": all of the object's pixels) and some of it shows,
// lost when they do but the warp shows none of it, out when none maps inside
// and none shows, cut otherwise. stats are the warped instance mask's.
//
// Each pixel center is mapped by m with Mat.Apply's own expression, its
// terms m[0]·(x+½), m[3]·(x+½) taken from a table per column and m[1]·(y+½),
// m[4]·(y+½) once per row, so every sum is the one Apply rounds; pixels are
// counted in slices indexed by the objects' instance ids (ids no object has
// are not counted). frameFatesRef (apply_fast_test.go) is the per-pixel
// reference it is held to.
func frameFates(objs []manifest.Object, src *image.Gray16, stats map[int]*manifest.InstanceStats, m Mat, w, h int) map[int]int {
	maxID := 0
	for _, o := range objs {
		if o.Area != 0 && o.Instance > maxID && o.Instance <= 0xffff {
			maxID = o.Instance
		}
	}
	counts := make([]int32, 2*(maxID+1))
	inside, total := counts[:maxID+1], counts[maxID+1:]
	b := src.Bounds()
	bw := b.Dx()
	if maxID > 0 && bw > 0 {
		cx, cy := make([]float64, bw), make([]float64, bw)
		for i := range cx {
			xc := float64(b.Min.X+i) + 0.5
			cx[i], cy[i] = m[0]*xc, m[3]*xc
		}
		fw, fh := float64(w), float64(h)
		for y := b.Min.Y; y < b.Max.Y; y++ {
			row := src.Pix[(y-b.Min.Y)*src.Stride:]
			row = row[:2*bw]
			yc := float64(y) + 0.5
			tx, ty := float64(m[1]*yc), float64(m[4]*yc)
			for i := range cx {
				id := int(row[2*i])<<8 | int(row[2*i+1])
				if id == 0 || id > maxID {
					continue
				}
				total[id]++
				X := cx[i] + tx + m[2]
				Y := cy[i] + ty + m[5]
				if X >= 0 && X < fw && Y >= 0 && Y < fh {
					inside[id]++
				}
			}
		}
	}
	out := make(map[int]int, len(objs))
	for _, o := range objs {
		if o.Area == 0 {
			continue
		}
		in, tot := int32(0), int32(0)
		if o.Instance > 0 && o.Instance <= maxID {
			in, tot = inside[o.Instance], total[o.Instance]
		}
		out[o.Instance] = fate(int(in), int(tot), stats[o.Instance] != nil)
	}
	return out
}

// fate is an object's fate from how many of its pixel centers map inside
// the frame, how many it has and whether the warp shows any of it.
func fate(inside, total int, shows bool) int {
	switch {
	case inside == total && shows:
		return fateWhole
	case inside == total:
		return fateLost
	case inside == 0 && !shows:
		return fateOut
	}
	return fateCut
}

// cutoutHides reports whether a cutout step of d that marks its pixels
// "ignore" would hide pixels of an object in the warped instance mask.
func cutoutHides(d *Drawn, inst *image.Gray16) bool {
	for i := range d.Pixels {
		op := &d.Pixels[i]
		if op.Do != "cutout" || op.Str("classes") != "ignore" {
			continue
		}
		rects, err := CutoutRects(op)
		if err != nil {
			return true
		}
		for _, r := range rects {
			x0, y0, x1, y1 := cutoutBounds(r, d.W, d.H)
			for y := y0; y < y1; y++ {
				for x := x0; x < x1; x++ {
					o := y*inst.Stride + 2*x
					if inst.Pix[o] != 0 || inst.Pix[o+1] != 0 {
						return true
					}
				}
			}
		}
	}
	return false
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
	return p.render(in, d, defs, nil, nil, nil, nil)
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
// then the pixel steps run in order. inst, stats and frac, when inst is not
// nil, are the instance mask already warped by d.M, its
// manifest.MeasureInstances and its keptFractions, and mask, when not nil,
// the class mask warped by d.M (render owns them from then on). The labels are measured from inst as the pixel steps leave it:
// stats serve as they are unless an object was erased or a cutout ran.
func (p *Plan) render(in *Input, d *Drawn, defs []manifest.TargetDef, inst *image.Gray16, mask *image.Paletted, stats map[int]*manifest.InstanceStats, frac map[int]float64) (*Output, error) {
	if inst == nil {
		inst = WarpInstances(in.Inst, d.M, d.W, d.H)
		stats = manifest.MeasureInstances(inst)
		frac = keptFractions(in.Record.Objects, stats, d.M)
	}
	g := &p.Geometry
	min := *g.Cuts.LeastShown
	if mask == nil {
		mask = WarpMask(in.Mask, d.M, d.W, d.H, p.fillID())
	}
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
		if dropped > 0 {
			stats = nil
		}
	}
	for i := range d.Pixels {
		op := &d.Pixels[i]
		if (op.Do == "hue" || op.Do == "saturation") && img.C == 1 {
			// Color steps do nothing to a gray image; the lineage says so.
			op.Set("skipped_gray", true)
			continue
		}
		if op.Do == "cutout" {
			stats = nil // it may hide instance pixels
		}
		if err := applyPhoto(img, mask, inst, op); err != nil {
			return nil, fmt.Errorf("%s: %w", in.Record.ID, err)
		}
	}
	out := &Output{Image: img.ToImage(), Mask: mask, Inst: inst}
	rec := &out.Record
	*rec = in.Record
	rec.Width, rec.Height = d.W, d.H
	if stats == nil {
		stats = manifest.MeasureInstances(inst)
	}
	rec.Objects = relabel(in.Record.Objects, stats, d.M, frac)
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

// fillID is the class id of mask pixels whose preimage leaves the source.
func (p *Plan) fillID() uint8 {
	if p.Geometry.Outside.Classes == "ignore" {
		return manifest.IgnoreID
	}
	return 0
}

// keptFractions returns, for each object of the source, the share of its
// pixels that survive the warp: warped area / (source area · |det M|);
// stats are the warped instance mask's.
func keptFractions(objs []manifest.Object, stats map[int]*manifest.InstanceStats, m Mat) map[int]float64 {
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

// relabel reads the measures of the warped instance mask (stats): objects that left the frame (or
// were dropped) disappear, the rest get their new box, area and visible
// share, and their factors mapped by m: center through m, size by √|det m|,
// angle as the direction m gives the object's own x axis. A part whose parent
// is gone loses its parent reference.
func relabel(objs []manifest.Object, stats map[int]*manifest.InstanceStats, m Mat, frac map[int]float64) []manifest.Object {
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
		n.Measured(&st.M)
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
		gaussianNoise(img, manifest.PCG(uint64(op.Num("seed"))), op.Num("sigma"))
	case "salt-and-pepper":
		SaltPepper(img, rng, op.Num("fraction"))
	case "shot-noise":
		ShotNoise(img, rng, op.Num("photons"))
	case "speckle":
		speckle(img, manifest.PCG(uint64(op.Num("seed"))), op.Num("sigma"))
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
		x0, y0, x1, y1 := cutoutBounds(r, img.W, img.H)
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

// cutoutBounds is the pixel rectangle [x0, x1) × [y0, y1) a cutout
// rectangle covers on a W×H canvas.
func cutoutBounds(r Rect, W, H int) (x0, y0, x1, y1 int) {
	cx, cy := r.U*float64(W), r.V*float64(H)
	x0, y0 = int(math.Round(cx-r.W/2)), int(math.Round(cy-r.H/2))
	x1, y1 = int(math.Round(cx+r.W/2)), int(math.Round(cy+r.H/2))
	return max(x0, 0), max(y0, 0), min(x1, W), min(y1, H)
}
