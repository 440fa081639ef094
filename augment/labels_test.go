package augment

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"image"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// Labels after augmentation, checked against the dataset contract of
// DESIGN.md ("labels are derived from the masks"; boxes [x0, y0, x1, y1] with
// exclusive max; class 0 background, 255 ignore; counts equal the distinct
// instances) and against manifest.Verify, the project's independent checker
// of that contract. The inputs are drawn by hand here: package augment must
// not import gen.

// labClasses is the class table of the synthetic inputs.
var labClasses = []manifest.Class{
	{ID: 0, Name: "background", Color: [3]uint8{0, 0, 0}},
	{ID: 1, Name: "disc", Color: [3]uint8{220, 60, 60}},
	{ID: 2, Name: "block", Color: [3]uint8{60, 160, 220}},
}

// labDefs are the count targets passed to Copy and written to dataset.json:
// a total count and a per-class count.
var labDefs = []manifest.TargetDef{
	{Name: "objects", Kind: "count"},
	{Name: "discs", Kind: "count", Classes: []string{"disc"}},
}

// labShape is a disc (class 1) of radius r or an axis-aligned block
// (class 2) of half-sides r × s, centered at (x, y).
type labShape struct {
	disc       bool
	x, y, r, s float64
	col        [3]float32
}

func (s labShape) covers(px, py float64) bool {
	dx, dy := px-s.x, py-s.y
	if s.disc {
		return dx*dx+dy*dy <= s.r*s.r
	}
	return math.Abs(dx) < s.r && math.Abs(dy) < s.s
}

// labInput draws shapes, in order (later on top), into a w×h image with c
// channels over a textured background, its semantic mask and its instance
// mask (instance i+1 for shape i), a pixel belonging to a shape when its
// center lies inside. Objects are measured with manifest.MeasureInstances;
// Visible is the area over the pixels the shape covers alone.
func labInput(id string, w, h, c int, shapes []labShape) *Input {
	img := NewImage(w, h, c)
	mask := image.NewPaletted(image.Rect(0, 0, w, h), manifest.Palette(labClasses))
	inst := image.NewGray16(image.Rect(0, 0, w, h))
	alone := make([]int, len(shapes))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			for k := 0; k < c; k++ {
				img.Pix[(y*w+x)*c+k] = float32(60 + 3*((x+2*y+5*k)%17) + x)
			}
			px, py := float64(x)+0.5, float64(y)+0.5
			for i, s := range shapes {
				if !s.covers(px, py) {
					continue
				}
				alone[i]++
				for k := 0; k < c; k++ {
					img.Pix[(y*w+x)*c+k] = s.col[k]
				}
				cls := uint8(2)
				if s.disc {
					cls = 1
				}
				mask.Pix[y*mask.Stride+x] = cls
				inst.Pix[y*inst.Stride+2*x], inst.Pix[y*inst.Stride+2*x+1] = uint8((i+1)>>8), uint8(i+1)
			}
		}
	}
	stats := manifest.MeasureInstances(inst)
	rec := manifest.Record{ID: id, Group: id, Width: w, Height: h, Targets: map[string]manifest.Value{}}
	discs := 0
	for i, s := range shapes {
		st := stats[i+1]
		if st == nil {
			panic(fmt.Sprintf("%s: shape %d is hidden", id, i))
		}
		o := manifest.Object{Instance: i + 1, Box: st.BBox, Area: st.Area, Shown: manifest.Round(float64(st.Area)/float64(alone[i]), 4),
			Center: &[2]float64{s.x, s.y}, Aspect: manifest.Factor(1)}
		if s.disc {
			o.Class, o.ClassName, o.Shape, o.Size = 1, "disc", "disc", manifest.Factor(2*s.r)
			discs++
		} else {
			o.Class, o.ClassName, o.Shape, o.Size, o.Aspect = 2, "block", "block", manifest.Factor(2*s.s), manifest.Factor(s.r/s.s)
		}
		rec.Objects = append(rec.Objects, o)
	}
	manifest.SetMeasured(rec.Objects, inst)
	// Counted by hand here, not by the package's own target code.
	rec.Targets["objects"] = manifest.Number(float64(len(shapes)))
	rec.Targets["discs"] = manifest.Number(float64(discs))
	return &Input{Record: rec, Image: img, Mask: mask, Inst: inst}
}

// labSources are a few small inputs, gray and RGB, with objects in the
// middle, overlapping, and touching the border (so crops and turns cut them
// and the redraw policy has work to do).
func labSources() []*Input {
	red, blue, green, gray := [3]float32{230, 40, 40}, [3]float32{30, 90, 240}, [3]float32{40, 200, 70}, [3]float32{200, 200, 200}
	return []*Input{
		labInput("s-rgb-a", 48, 40, 3, []labShape{
			{disc: true, x: 14, y: 13, r: 6, col: red},
			{x: 30, y: 22, r: 7, s: 5, col: blue},
			{disc: true, x: 34, y: 26, r: 4, col: green}, // on top of the block
		}),
		labInput("s-gray-b", 40, 48, 1, []labShape{
			{disc: true, x: 20, y: 12, r: 5, col: gray},
			{x: 18, y: 34, r: 9, s: 4, col: [3]float32{90}},
		}),
		labInput("s-rgb-edge", 44, 44, 3, []labShape{
			{disc: true, x: 5, y: 22, r: 5, col: red},      // touches the left edge
			{x: 38, y: 8, r: 5, s: 5, col: blue},           // near the top-right corner
			{disc: true, x: 22, y: 24, r: 7, col: green},   // middle
			{disc: true, x: 30, y: 38, r: 3.5, col: green}, // near the bottom
		}),
		labInput("s-gray-tiny", 32, 32, 1, []labShape{
			{disc: true, x: 16, y: 16, r: 8, col: gray},
		}),
	}
}

func labEveryStep(t *testing.T) *Plan {
	t.Helper()
	p, err := LoadPlan("../testdata/plans/every-step.yaml")
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func labParsePlan(t *testing.T, yaml string) *Plan {
	t.Helper()
	p, err := ParsePlan("test.yaml", []byte(yaml))
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// labPix returns an 8-bit image's pixel bytes (*image.Gray or *image.RGBA,
// as ToImage makes them).
func labPix(t *testing.T, m image.Image) []byte {
	t.Helper()
	switch m := m.(type) {
	case *image.Gray:
		return m.Pix
	case *image.RGBA:
		return m.Pix
	}
	t.Fatalf("output image is %T", m)
	return nil
}

// labCheckRecord checks an output against its masks as manifest.Verify's
// verifyRecord does: every record object is in the instance mask with the
// same bbox and area, every instance id present is in the record, every
// pixel's class is its instance's class (0 or 255 where there is no
// instance), and every count target equals the number of distinct
// instances (of its classes).
func labCheckRecord(t *testing.T, what string, out *Output, defs []manifest.TargetDef) {
	t.Helper()
	r := &out.Record
	want := image.Rect(0, 0, r.Width, r.Height)
	if out.Image.Bounds() != want || out.Mask.Rect != want || out.Inst.Rect != want {
		t.Fatalf("%s: image %v, mask %v, instances %v, record %d×%d", what, out.Image.Bounds(), out.Mask.Rect, out.Inst.Rect, r.Width, r.Height)
	}
	stats := manifest.MeasureInstances(out.Inst)
	byID := map[int]*manifest.Object{}
	className := map[int]string{}
	for _, c := range labClasses {
		className[c.ID] = c.Name
	}
	for i := range r.Objects {
		o := &r.Objects[i]
		if byID[o.Instance] != nil {
			t.Errorf("%s: instance %d twice in the record", what, o.Instance)
		}
		byID[o.Instance] = o
		if className[o.Class] != o.ClassName {
			t.Errorf("%s: object %d is class %d named %q", what, o.Instance, o.Class, o.ClassName)
		}
		st := stats[o.Instance]
		if st == nil {
			t.Errorf("%s: object %d is in the record but not in the instance mask", what, o.Instance)
			continue
		}
		if st.BBox != o.Box || st.Area != o.Area {
			t.Errorf("%s: object %d: bbox %v area %d in the record, %v %d in the mask", what, o.Instance, o.Box, o.Area, st.BBox, st.Area)
		}
		if o.Shown <= 0 || o.Shown > 1 {
			t.Errorf("%s: object %d visible %g", what, o.Instance, o.Shown)
		}
	}
	for id := range stats {
		if byID[id] == nil {
			t.Errorf("%s: instance %d is in the instance mask but not in the record", what, id)
		}
	}
	bad := 0
	for y := 0; y < r.Height; y++ {
		for x := 0; x < r.Width; x++ {
			o := y*out.Inst.Stride + 2*x
			id := int(out.Inst.Pix[o])<<8 | int(out.Inst.Pix[o+1])
			cls := int(out.Mask.Pix[y*out.Mask.Stride+x])
			ok := false
			if id == 0 {
				ok = cls == 0 || cls == manifest.IgnoreID
			} else if ob := byID[id]; ob != nil {
				ok = cls == ob.Class
			}
			if !ok {
				if bad == 0 {
					t.Errorf("%s: pixel (%d, %d) class %d, instance %d", what, x, y, cls, id)
				}
				bad++
			}
		}
	}
	if bad > 1 {
		t.Errorf("%s: %d pixels disagree with the instance mask", what, bad)
	}
	for _, d := range defs {
		n := 0
		for id := range stats {
			if o := byID[id]; o != nil && (len(d.Classes) == 0 || o.ClassName == d.Classes[0]) {
				n++
			}
		}
		if v, ok := r.Targets[d.Name]; !ok || v.IsStr || v.Num != float64(n) {
			t.Errorf("%s: target %s = %v, the instance mask holds %d such objects", what, d.Name, v, n)
		}
	}
}

// labLineageMatrix rebuilds the composed matrix from the lineage's geometric
// steps and their recorded parameters, with the matrices of affine.go: the
// lineage must say what was done.
func labLineageMatrix(t *testing.T, lin *manifest.Lineage, w, h int) Mat {
	t.Helper()
	m := Identity
	W, H := float64(w), float64(h)
	for _, op := range lin.Geometry {
		to := labNums(t, op, "to")
		switch op.Do {
		case "flip":
			switch op.Str("axis") {
			case "horizontal":
				m = m.Then(FlipH(W))
			case "vertical":
				m = m.Then(FlipV(H))
			default:
				t.Fatalf("flip with axis %q", op.Str("axis"))
			}
		case "rotate":
			grow, ok := op.Get("grow_canvas")
			if _, isBool := grow.(bool); !ok || !isBool {
				t.Fatalf("rotate: grow_canvas is %#v, want a JSON boolean", grow)
			}
			r, ow, oh := RotateCanvas(W, H, op.Num("angle"), op.Bool("grow_canvas"))
			m = m.Then(r)
			W, H = float64(ow), float64(oh)
		case "warp":
			z, shift := op.Num("zoom"), labNums(t, op, "shift")
			m = m.Then(About(ShearX(op.Num("slant")).Then(Scale(z, z)), W/2, H/2, W/2+shift[0], H/2+shift[1]))
		case "crop":
			m = m.Then(CropResize(op.Num("x"), op.Num("y"), op.Num("width"), op.Num("height"), int(to[0]), int(to[1])))
			W, H = to[0], to[1]
		case "resize":
			m = m.Then(Scale(to[0]/W, to[1]/H))
			W, H = to[0], to[1]
		default:
			t.Fatalf("lineage geometry holds %q, which is no move", op.Do)
		}
	}
	return m
}

// labNums reads a lineage parameter that is a list of two numbers (nil when
// absent).
func labNums(t *testing.T, op manifest.LineageOp, name string) []float64 {
	t.Helper()
	v, ok := op.Get(name)
	if !ok {
		return nil
	}
	l, ok := v.([]any)
	if !ok || len(l) != 2 {
		t.Fatalf("%s: %s is %#v, want two numbers", op.Do, name, v)
	}
	out := make([]float64, 2)
	for i, e := range l {
		f, ok := e.(float64)
		if !ok {
			t.Fatalf("%s: %s is %#v, want two numbers", op.Do, name, v)
		}
		out[i] = f
	}
	return out
}

// labCutCheck checks the cut policy of a copy. Under redraw, unless the
// lineage's cuts say objects were dropped, every source object kept at least
// cuts.least_shown of its pixels through the warp: warped area ≥
// least_shown · source area · |det M|. The warped area is measured before
// any cutout (cutout hides pixels on purpose, after the policy), and the only
// tolerance is float rounding (1e-9 of the area): the policy's share is
// this very ratio, so no sampling slack is owed. When objects were dropped
// (the redraws ran out), the objects below the share, exactly as many as
// cuts.dropped says, are gone from the record and their warped pixels are 255
// in the mask and 0 in the instances. It returns whether the copy dropped
// objects.
func labCutCheck(t *testing.T, what string, p *Plan, in *Input, out *Output) bool {
	t.Helper()
	r := &out.Record
	lin := r.Lineage
	m := Mat(lin.Matrix)
	pre := WarpInstances(in.Inst, m, r.Width, r.Height)
	preStats := manifest.MeasureInstances(pre)
	det := math.Abs(m.Det())
	min := *p.Geometry.Cuts.LeastShown
	dropped, cutout := lin.Cuts != nil && lin.Cuts.Dropped > 0, false
	if lin.Cuts != nil && (lin.Cuts.Redraws < 0 || lin.Cuts.Redraws >= p.Geometry.Cuts.Tries || (lin.Cuts.Redraws == 0 && lin.Cuts.Dropped == 0)) {
		t.Errorf("%s: lineage cuts %+v with %d tries", what, *lin.Cuts, p.Geometry.Cuts.Tries)
	}
	if dropped && lin.Cuts.Redraws != p.Geometry.Cuts.Tries-1 {
		t.Errorf("%s: objects dropped after %d redraws, want every one of the %d tries used", what, lin.Cuts.Redraws, p.Geometry.Cuts.Tries)
	}
	for _, op := range lin.Pixels {
		if op.Do == "cutout" && op.Str("classes") == "ignore" {
			cutout = true
		}
	}
	below := 0
	kept := map[int]*manifest.Object{}
	for i := range r.Objects {
		kept[r.Objects[i].Instance] = &r.Objects[i]
	}
	for _, o := range in.Record.Objects {
		a := 0
		if st := preStats[o.Instance]; st != nil {
			a = st.Area
		}
		need := min * float64(o.Area) * det
		if !dropped {
			if float64(a) < need-1e-9*float64(o.Area) {
				t.Errorf("%s: object %d keeps %d px of %d·|det %.4f|, below least_shown %g (no objects dropped in the lineage)", what, o.Instance, a, o.Area, det, min)
			}
			if ko := kept[o.Instance]; ko == nil {
				if !cutout {
					t.Errorf("%s: object %d vanished without a cutout or a drop", what, o.Instance)
				}
			} else if !cutout && ko.Shown < min*o.Shown-0.5e-4 {
				// Visible is rounded to 4 decimals, hence 0.5e-4.
				t.Errorf("%s: object %d visible %g < %g · %g", what, o.Instance, ko.Shown, min, o.Shown)
			}
			continue
		}
		if float64(a) >= need {
			if kept[o.Instance] == nil && !cutout {
				t.Errorf("%s: object %d keeps %d px (≥ least_shown %g of %d·%.4f) but was dropped", what, o.Instance, a, min, o.Area, det)
			}
		} else {
			below++
			if kept[o.Instance] != nil {
				t.Errorf("%s: object %d keeps %d px (< least_shown %g of %d·%.4f) but is still in the record after the drop", what, o.Instance, a, min, o.Area, det)
			}
			for i := 0; i+1 < len(pre.Pix); i += 2 {
				if int(pre.Pix[i])<<8|int(pre.Pix[i+1]) == o.Instance {
					if out.Mask.Pix[i/2] != manifest.IgnoreID || out.Inst.Pix[i] != 0 || out.Inst.Pix[i+1] != 0 {
						t.Errorf("%s: dropped object %d: a pixel of it is class %d instance %d, want 255 and 0", what, o.Instance, out.Mask.Pix[i/2], int(out.Inst.Pix[i])<<8|int(out.Inst.Pix[i+1]))
						break
					}
				}
			}
		}
	}
	if dropped && below != lin.Cuts.Dropped {
		t.Errorf("%s: lineage cuts.dropped %d, but %d objects fell below least_shown", what, lin.Cuts.Dropped, below)
	}
	return dropped
}

// labDigest summarizes an input's pixels and record, to see that copies
// leave their source alone.
func labDigest(in *Input) string {
	var b strings.Builder
	for _, v := range in.Image.Pix {
		fmt.Fprintf(&b, "%g,", v)
	}
	rb, _ := manifest.MarshalRecord(&in.Record)
	return fmt.Sprintf("%s|%x|%x|%s", b.String(), in.Mask.Pix, in.Inst.Pix, rb)
}

// TestEveryStepLabelsAgree runs 300 copies of the every-step plan over the
// synthetic sources and checks each one's record against its masks, its
// count targets, its cut policy and its lineage; then 120 copies with
// cuts.tries = 1, so the redraw policy runs out and the drop path
// (cuts.dropped in the lineage) is exercised too.
func TestEveryStepLabelsAgree(t *testing.T) {
	srcs := labSources()
	before := make([]string, len(srcs))
	for i, in := range srcs {
		before[i] = labDigest(in)
	}
	run := func(p *Plan, copies int, seed uint64) (ops map[string]int, drops int) {
		ops = map[string]int{}
		for k := 1; k <= copies; k++ {
			s := k % len(srcs)
			in := srcs[s]
			out, err := p.Copy(in, seed, s, k, labDefs)
			if err != nil {
				t.Fatal(err)
			}
			what := fmt.Sprintf("seed %d source %s copy %d", seed, in.Record.ID, k)
			labCheckRecord(t, what, out, labDefs)
			if labCutCheck(t, what, p, in, out) {
				drops++
			}
			lin := out.Record.Lineage
			if lin == nil || lin.Source != in.Record.ID {
				t.Fatalf("%s: lineage %+v", what, lin)
			}
			m := labLineageMatrix(t, lin, in.Image.W, in.Image.H)
			for i := range m {
				if math.Abs(m[i]-lin.Matrix[i]) > 1e-9*math.Max(1, math.Abs(m[i])) {
					t.Errorf("%s: the lineage's moves compose to %v, its matrix is %v", what, m, lin.Matrix)
					break
				}
			}
			for _, op := range lin.Geometry {
				if op.Do == "flip" {
					ops["flip "+op.Str("axis")]++
				} else {
					ops[op.Do]++
				}
			}
			for _, op := range lin.Pixels {
				ops[op.Do]++
				if op.Pick != nil {
					ops["picked"]++
				}
			}
			if t.Failed() {
				t.FailNow()
			}
		}
		return ops, drops
	}
	p := labEveryStep(t)
	ops, drops := run(p, 300, 2024)
	t.Logf("300 copies, every-step plan: steps applied %v; %d copies dropped objects", ops, drops)
	// Every step of the plan must have been drawn at least once.
	for _, op := range []string{"flip horizontal", "flip vertical", "rotate", "warp", "crop", "resize", "gaussian-noise", "speckle", "shot-noise", "picked", "salt-and-pepper", "blur", "brightness", "contrast", "gamma", "hue", "saturation", "jpeg", "cutout"} {
		if ops[op] == 0 {
			t.Errorf("step %s never applied in 300 copies", op)
		}
	}
	q := labEveryStep(t)
	q.Geometry.Cuts.Tries = 1
	_, drops = run(q, 120, 77)
	t.Logf("120 copies with cuts.tries 1: %d copies dropped objects", drops)
	if drops == 0 {
		t.Errorf("cuts.tries 1: no copy ran out of tries; the drop path went untested")
	}
	for i, in := range srcs {
		if labDigest(in) != before[i] {
			t.Errorf("source %s changed while copies were made", in.Record.ID)
		}
	}
}

// labSameOutput compares two outputs byte for byte: image, mask and
// instance pixels, and the record as written to manifest.jsonl.
func labSameOutput(t *testing.T, what string, a, b *Output) bool {
	t.Helper()
	same := true
	if !bytes.Equal(labPix(t, a.Image), labPix(t, b.Image)) || a.Image.Bounds() != b.Image.Bounds() {
		t.Errorf("%s: images differ", what)
		same = false
	}
	if !bytes.Equal(a.Mask.Pix, b.Mask.Pix) || a.Mask.Rect != b.Mask.Rect {
		t.Errorf("%s: masks differ", what)
		same = false
	}
	if !bytes.Equal(a.Inst.Pix, b.Inst.Pix) || a.Inst.Rect != b.Inst.Rect {
		t.Errorf("%s: instance masks differ", what)
		same = false
	}
	ra, err1 := manifest.MarshalRecord(&a.Record)
	rb, err2 := manifest.MarshalRecord(&b.Record)
	if err1 != nil || err2 != nil || !bytes.Equal(ra, rb) {
		t.Errorf("%s: records differ:\n%s\n%s", what, ra, rb)
		same = false
	}
	return same
}

// TestReplayFromLineage replays 50 copies from their lineage alone, read back
// from JSON as a later run would read it from manifest.jsonl, and wants
// byte-identical pixels and an identical record. Then 50 more with
// cuts.tries = 1, so copies whose lineage says objects were dropped are
// replayed too; and 50 of the upright plan (bicubic, extend, redraws).
func TestReplayFromLineage(t *testing.T) {
	p := labEveryStep(t)
	labReplay(t, p, 99)
	q := labEveryStep(t)
	q.Geometry.Cuts.Tries = 1
	if n := labReplay(t, q, 77); n == 0 {
		t.Errorf("cuts.tries 1: no replayed copy had dropped objects")
	}
	u, err := LoadPlan("../testdata/plans/upright.yaml")
	if err != nil {
		t.Fatal(err)
	}
	labReplay(t, u, 5)
}

// labReplay replays 50 copies of plan p and returns how many had dropped
// objects.
func labReplay(t *testing.T, p *Plan, seed uint64) (drops int) {
	t.Helper()
	srcs := labSources()
	for k := 1; k <= 50; k++ {
		s := k % len(srcs)
		in := srcs[s]
		out, err := p.Copy(in, seed, s, k, labDefs)
		if err != nil {
			t.Fatal(err)
		}
		if c := out.Record.Lineage.Cuts; c != nil && c.Dropped > 0 {
			drops++
		}
		b, err := json.Marshal(out.Record.Lineage)
		if err != nil {
			t.Fatal(err)
		}
		var lin manifest.Lineage
		if err := json.Unmarshal(b, &lin); err != nil {
			t.Fatal(err)
		}
		rep, err := p.Rebuild(in, &lin, out.Record.Width, out.Record.Height, labDefs)
		if err != nil {
			t.Fatal(err)
		}
		if !labSameOutput(t, fmt.Sprintf("copy %d of %s replayed", k, in.Record.ID), out, rep) {
			t.FailNow()
		}
	}
	return drops
}

// TestCopyDeterminism: the same (seed, source, copy) gives the same bytes;
// another copy number, source or seed gives another copy.
func TestCopyDeterminism(t *testing.T) {
	srcs := labSources()
	p := labEveryStep(t)
	in := srcs[0]
	for k := 1; k <= 10; k++ {
		a, err := p.Copy(in, 5, 0, k, labDefs)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := p.Copy(in, 5, 0, k, labDefs)
		labSameOutput(t, fmt.Sprintf("copy %d made twice", k), a, b)
		for _, o := range []struct {
			seed   uint64
			src, k int
		}{{5, 0, k + 1}, {6, 0, k}, {5, 1, k}} {
			c, _ := p.Copy(in, o.seed, o.src, o.k, labDefs)
			ra, _ := manifest.MarshalRecord(&a.Record)
			rc, _ := manifest.MarshalRecord(&c.Record)
			if bytes.Equal(labPix(t, a.Image), labPix(t, c.Image)) && bytes.Equal(ra, rc) {
				t.Errorf("copy (seed 5, source 0, copy %d) equals (seed %d, source %d, copy %d)", k, o.seed, o.src, o.k)
			}
		}
	}
}

// TestPhotometricLeavesMasks: a plan of every photometric step except
// cutout, each always applied, changes the image but leaves both masks and
// every box and area as they were (DESIGN.md: photometric steps never touch
// masks).
func TestPhotometricLeavesMasks(t *testing.T) {
	p := labParsePlan(t, `
name: photometric-only
pixels:
  - {do: gaussian-noise, sigma: [2, 8]}
  - {do: salt-and-pepper, fraction: [0.01, 0.05]}
  - {do: shot-noise, photons: [50, 200]}
  - {do: speckle, sigma: [0.02, 0.08]}
  - {do: blur, sigma: [0.3, 1.5]}
  - {do: brightness, delta: [-30, 30]}
  - {do: contrast, factor: [0.5, 1.5]}
  - {do: gamma, gamma: [0.5, 2]}
  - {do: hue, angle: [-90, 90]}
  - {do: saturation, factor: [0.2, 2]}
  - {do: jpeg, quality: [20, 90]}
`)
	for s, in := range labSources() {
		for k := 1; k <= 8; k++ {
			out, err := p.Copy(in, 3, s, k, labDefs)
			if err != nil {
				t.Fatal(err)
			}
			what := fmt.Sprintf("%s copy %d", in.Record.ID, k)
			if !bytes.Equal(out.Mask.Pix, in.Mask.Pix) || !bytes.Equal(out.Inst.Pix, in.Inst.Pix) {
				t.Errorf("%s: photometric steps changed the masks", what)
			}
			if Mat(out.Record.Lineage.Matrix) != Identity {
				t.Errorf("%s: matrix %v, want identity", what, out.Record.Lineage.Matrix)
			}
			if n, g := len(out.Record.Lineage.Pixels), len(out.Record.Lineage.Geometry); n != 11 || g != 0 {
				t.Errorf("%s: %d pixel steps and %d moves in the lineage, want 11 and 0", what, n, g)
			}
			if !reflect.DeepEqual(labBoxes(out.Record.Objects), labBoxes(in.Record.Objects)) {
				t.Errorf("%s: boxes and areas %v, source %v", what, labBoxes(out.Record.Objects), labBoxes(in.Record.Objects))
			}
			if bytes.Equal(labPix(t, out.Image), labPix(t, in.Image.ToImage())) {
				t.Errorf("%s: the image did not change", what)
			}
			labCheckRecord(t, what, out, labDefs)
		}
	}
}

func labBoxes(objs []manifest.Object) []string {
	var out []string
	for _, o := range objs {
		out = append(out, fmt.Sprintf("%d:%v:%d", o.Instance, o.Box, o.Area))
	}
	return out
}

// labCutRects returns, per pixel of a w×h canvas, whether a cutout rectangle
// of the lineage covers it. The rule is the pixel convention of DESIGN.md: a
// pixel is in a rectangle when its center is, rectangle k being centered at
// (u_k·w, v_k·h) with sides width_k × height_k (its recorded parameters,
// read here from the lineage's JSON).
func labCutRects(t *testing.T, op manifest.LineageOp, w, h int) []bool {
	t.Helper()
	b, err := json.Marshal(op)
	if err != nil {
		t.Fatal(err)
	}
	var p struct {
		Do    string
		Count int
		Rects []struct {
			Center        [2]float64
			Width, Height float64
		}
	}
	if err := json.Unmarshal(b, &p); err != nil || p.Do != "cutout" || len(p.Rects) != p.Count {
		t.Fatalf("cutout lineage %s: %v", b, err)
	}
	in := make([]bool, w*h)
	for _, r := range p.Rects {
		cw, ch := r.Width, r.Height
		cx, cy := r.Center[0]*float64(w), r.Center[1]*float64(h)
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				px, py := float64(x)+0.5, float64(y)+0.5
				if px >= cx-cw/2 && px < cx+cw/2 && py >= cy-ch/2 && py < cy+ch/2 {
					in[y*w+x] = true
				}
			}
		}
	}
	return in
}

// TestCutoutMasks: cutout with classes: ignore makes its pixels class 255 and
// instance 0, and labels follow (areas fall, fully hidden objects leave the
// counts); with classes: keep the masks are unchanged. Either way the pixels
// show the cutout value.
func TestCutoutMasks(t *testing.T) {
	for _, mode := range []string{"ignore", "keep"} {
		p := labParsePlan(t, `
name: cutout-`+mode+`
pixels:
  - {do: cutout, count: [2, 4], size: [5, 16], tone: 77, classes: `+mode+`}
`)
		cut, hidden := 0, 0
		for s, in := range labSources() {
			for k := 1; k <= 10; k++ {
				out, err := p.Copy(in, 8, s, k, labDefs)
				if err != nil {
					t.Fatal(err)
				}
				what := fmt.Sprintf("classes %s, %s copy %d", mode, in.Record.ID, k)
				labCheckRecord(t, what, out, labDefs)
				w, h := in.Image.W, in.Image.H
				rect := labCutRects(t, out.Record.Lineage.Pixels[0], w, h)
				pix := labPix(t, out.Image)
				step := len(pix) / (w * h)
				lost := map[int]int{}
				for i, r := range rect {
					id := int(in.Inst.Pix[2*i])<<8 | int(in.Inst.Pix[2*i+1])
					gotCls, gotID := out.Mask.Pix[i], int(out.Inst.Pix[2*i])<<8|int(out.Inst.Pix[2*i+1])
					wantCls, wantID := in.Mask.Pix[i], id
					if r {
						cut++
						for c := 0; c < min(step, 3); c++ {
							if pix[i*step+c] != 77 {
								t.Fatalf("%s: pixel %d in a cutout is %d, want 77", what, i, pix[i*step+c])
							}
						}
						if mode == "ignore" {
							wantCls, wantID = manifest.IgnoreID, 0
							if id != 0 {
								lost[id]++
							}
						}
					}
					if gotCls != wantCls || gotID != wantID {
						t.Fatalf("%s: pixel (%d, %d) class %d instance %d, want %d and %d", what, i%w, i/w, gotCls, gotID, wantCls, wantID)
					}
				}
				// Areas: the source's minus the pixels cut (ignore), or the
				// source's (keep); an object cut whole is gone.
				got := map[int]int{}
				for _, o := range out.Record.Objects {
					got[o.Instance] = o.Area
				}
				for _, o := range in.Record.Objects {
					want := o.Area - lost[o.Instance]
					if want == 0 {
						hidden++
					}
					if got[o.Instance] != want {
						t.Errorf("%s: object %d area %d, want %d − %d cut", what, o.Instance, got[o.Instance], o.Area, lost[o.Instance])
					}
				}
			}
		}
		t.Logf("classes %s: %d pixels cut over 40 copies, %d objects cut whole", mode, cut, hidden)
		if cut == 0 {
			t.Errorf("classes %s: no pixel was cut", mode)
		}
	}
}

// labWriteDataset writes the inputs as a trueset dataset into dir with the
// manifest package's writer (Create, WriteFiles, Append, Finish), dealing
// groups to train/val/test with manifest.AllocateStrata stratified by the
// "discs" target, as generate would. It returns the records written.
func labWriteDataset(t *testing.T, dir string, classes []manifest.Class, ins []*Input) []manifest.Record {
	t.Helper()
	const seed = 11
	sp, err := manifest.ParseSplits("train=0.6,val=0.2,test=0.2")
	if err != nil {
		t.Fatal(err)
	}
	recs := make([]manifest.Record, len(ins))
	keys := make([]string, len(ins))
	for i, in := range ins {
		r := in.Record
		r.ID, r.Group, r.Index = manifest.SampleID(i), manifest.SampleID(i), i
		k, err := manifest.StratumOf(&r, "discs")
		if err != nil {
			t.Fatal(err)
		}
		r.Stratum, keys[i] = k, k
		recs[i] = r
	}
	a, err := manifest.AllocateStrata(seed, keys, sp)
	if err != nil {
		t.Fatal(err)
	}
	w, err := manifest.Create(dir, false)
	if err != nil {
		t.Fatal(err)
	}
	enc := manifest.NewEncoder()
	counts := map[string]int{}
	for i, in := range ins {
		recs[i].Split = sp.Names[a.Split[i]]
		counts[recs[i].Split]++
		if _, err := w.WriteFiles(&recs[i], enc, in.Image.ToImage(), in.Mask, in.Inst); err != nil {
			t.Fatal(err)
		}
		if err := w.Append(&recs[i]); err != nil {
			t.Fatal(err)
		}
	}
	ratios := map[string]float64{}
	for i, n := range sp.Names {
		ratios[n] = sp.Ratios[i]
	}
	d := &manifest.Dataset{
		ToolVersion: "test", Recipe: json.RawMessage("null"), Seed: seed, Count: len(ins),
		Width: ins[0].Image.W, Height: ins[0].Image.H, Mode: "rgb", Classes: classes,
		Targets: []string{"discs", "objects"}, TargetDefs: labDefs,
		Splits: manifest.SplitTable{Names: sp.Names, Spec: sp.String(), Ratios: ratios, Counts: counts, Stratify: "discs", Strata: a.Table, Thin: a.Thin},
	}
	if _, err := w.Finish(d); err != nil {
		t.Fatal(err)
	}
	return recs
}

// labE2ESources are 12 RGB 40×36 inputs with 1–3 discs and a block.
func labE2ESources() []*Input {
	var out []*Input
	cols := [][3]float32{{230, 40, 40}, {40, 200, 70}, {250, 220, 30}}
	for i := 0; i < 12; i++ {
		f := float64(i)
		shapes := []labShape{{x: 10 + f, y: 26, r: 6, s: 4, col: [3]float32{30, 90, 240}}}
		for j := 0; j <= i%3; j++ {
			g := float64(j)
			shapes = append(shapes, labShape{disc: true, x: 9 + 10*g + 0.7*f, y: 10 + 0.5*f, r: 3.5 + 0.2*g, col: cols[j]})
		}
		out = append(out, labInput(fmt.Sprintf("e%d", i), 40, 36, 3, shapes))
	}
	return out
}

// labVerify runs manifest.Verify and fails on any problem.
func labVerify(t *testing.T, dir string) int {
	t.Helper()
	var probs []string
	n, err := manifest.Verify(dir, func(p manifest.Problem) { probs = append(probs, p.String()) })
	if err != nil {
		t.Fatal(err)
	}
	if len(probs) > 0 {
		t.Fatalf("verify %s: %d problems:\n%s", dir, len(probs), strings.Join(probs[:min(len(probs), 10)], "\n"))
	}
	return n
}

// labTree reads every file under dir, by relative path.
func labTree(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	out := map[string][]byte{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		rel, _ := filepath.Rel(dir, p)
		out[rel] = b
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// TestRunEndToEnd writes a tiny trueset dataset by hand, augments it with
// the every-step plan (3 copies), and checks: manifest.Verify finds no
// problem in input or output; only train sources got copies, each exactly
// 3, keeping its source's split, group and stratum; originals are carried
// over byte for byte; and 1 and 3 workers write byte-identical folders.
func TestRunEndToEnd(t *testing.T) {
	tmp := t.TempDir()
	in := filepath.Join(tmp, "in")
	recs := labWriteDataset(t, in, labClasses, labE2ESources())
	labVerify(t, in)
	bySrc := map[string]manifest.Record{}
	splits := map[string]int{}
	for _, r := range recs {
		bySrc[r.ID] = r
		splits[r.Split]++
	}
	if splits["train"] == 0 || splits["val"] == 0 || splits["test"] == 0 {
		t.Fatalf("fixture splits %v; want all three", splits)
	}
	p := labEveryStep(t)
	outs := map[int]string{}
	for _, workers := range []int{1, 3} {
		out := filepath.Join(tmp, fmt.Sprintf("out-w%d", workers))
		sum, err := Run(context.Background(), RunOptions{In: in, Out: out, Plan: p, Copies: 3, Seed: 21, Workers: workers, Version: "test"})
		if err != nil {
			t.Fatal(err)
		}
		if sum.Sources != len(recs) || sum.Copies != 3*splits["train"] {
			t.Errorf("workers %d: summary %+v, want %d sources and %d copies", workers, sum, len(recs), 3*splits["train"])
		}
		outs[workers] = out
	}
	out := outs[1]
	if n := labVerify(t, out); n != len(recs)+3*splits["train"] {
		t.Errorf("output has %d records, want %d", n, len(recs)+3*splits["train"])
	}
	copies := map[string]int{}
	inTree, outTree := labTree(t, in), labTree(t, out)
	err := manifest.ReadManifest(out, func(r *manifest.Record) error {
		if r.Lineage == nil {
			src, ok := bySrc[r.ID]
			if !ok {
				t.Errorf("original %s is not in the input", r.ID)
			}
			for _, f := range []string{src.Image, src.Mask, src.Instances} {
				if !bytes.Equal(inTree[f], outTree[f]) {
					t.Errorf("original file %s not carried over byte for byte", f)
				}
			}
			return nil
		}
		src, ok := bySrc[r.Lineage.Source]
		if !ok {
			t.Errorf("copy %s of unknown source %q", r.ID, r.Lineage.Source)
			return nil
		}
		copies[src.ID]++
		if src.Split != "train" {
			t.Errorf("copy %s of %s source %s", r.ID, src.Split, src.ID)
		}
		if r.Split != src.Split || r.Group != src.Group || r.Stratum != src.Stratum {
			t.Errorf("copy %s: split/group/stratum %s/%s/%s, source %s/%s/%s", r.ID, r.Split, r.Group, r.Stratum, src.Split, src.Group, src.Stratum)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range recs {
		want := 0
		if r.Split == "train" {
			want = 3
		}
		if copies[r.ID] != want {
			t.Errorf("source %s (%s) has %d copies, want %d", r.ID, r.Split, copies[r.ID], want)
		}
	}
	a, b := labTree(t, outs[1]), labTree(t, outs[3])
	var names []string
	for k := range a {
		names = append(names, k)
	}
	for k := range b {
		if _, ok := a[k]; !ok {
			names = append(names, k)
		}
	}
	sort.Strings(names)
	for _, k := range names {
		if !bytes.Equal(a[k], b[k]) {
			t.Errorf("%s differs between 1 and 3 workers", k)
		}
	}
	if len(a) != len(b) || len(a) < 3*(len(recs)+3*splits["train"])+2 {
		t.Errorf("%d and %d files written", len(a), len(b))
	}
}
