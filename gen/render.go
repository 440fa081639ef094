package gen

import (
	"fmt"
	"image"
	"image/draw"
	"math"

	"golang.org/x/image/vector"

	"github.com/trueset/trueset/manifest"
)

// Sample is one rendered scene: pixels, masks and the record that describes
// them (paths and checksums are filled in when it is written).
type Sample struct {
	Image     image.Image     // *image.Gray or *image.RGBA
	Mask      *image.Paletted // class ids, palette = class colors
	Instances *image.Gray16   // instance ids, 0 = none
	Record    manifest.Record
}

// Renderer turns plans into samples. It keeps its buffers between samples; use
// one per goroutine.
type Renderer struct {
	r       *Recipe
	palette []manifest.Class
	ras     vector.Rasterizer
	cov     image.Alpha
	local   Path
	world   Path
	alone   []int
	bg      bgPainter
	splitOf func(index int) string // the split a sample was dealt to, for the instruments; nil = unknown

	// reuse: Render draws into the same four images every time (kept in
	// out), so a sample is valid only until the next Render; set by
	// ReuseSamples for callers that encode each sample before the next.
	reuse bool
	out   struct {
		gray *image.Gray
		rgba *image.RGBA
		mask *image.Paletted
		inst *image.Gray16
	}
}

// ReuseSamples makes Render (and Generate) draw into the same images on
// every call instead of new ones, so a run allocates nothing per sample
// that grows with the canvas: each Sample returned is valid only until the
// next call. gen.Run's workers, which encode a sample before drawing the
// next, use it.
func (rd *Renderer) ReuseSamples() { rd.reuse = true }

// images returns the sample's four images: new ones, or the kept ones
// cleared to zero.
func (rd *Renderer) images(rect image.Rectangle, rgb bool) (*image.Gray, *image.RGBA, *image.Paletted, *image.Gray16) {
	if !rd.reuse {
		mask := image.NewPaletted(rect, manifest.MaskPalette(rd.palette))
		if rgb {
			return nil, image.NewRGBA(rect), mask, image.NewGray16(rect)
		}
		return image.NewGray(rect), nil, mask, image.NewGray16(rect)
	}
	o := &rd.out
	if o.mask == nil || o.mask.Rect != rect {
		o.mask = image.NewPaletted(rect, manifest.MaskPalette(rd.palette))
		o.inst = image.NewGray16(rect)
		o.gray, o.rgba = nil, nil
	} else {
		clear(o.mask.Pix)
		clear(o.inst.Pix)
	}
	if rgb {
		if o.rgba == nil {
			o.rgba = image.NewRGBA(rect)
		} else {
			clear(o.rgba.Pix)
		}
		return nil, o.rgba, o.mask, o.inst
	}
	if o.gray == nil {
		o.gray = image.NewGray(rect)
	} else {
		clear(o.gray.Pix)
	}
	return o.gray, nil, o.mask, o.inst
}

// NewRenderer returns a Renderer for a validated recipe.
func NewRenderer(r *Recipe) *Renderer {
	return &Renderer{r: r, palette: r.ClassTable()}
}

// GlyphMaxRotate is the largest turn, in degrees, that keeps a glyph's
// label by default (common practice for character data; not a standard).
const GlyphMaxRotate = 15.0

// ClassTable returns the recipe's classes with background as id 0.
func (r *Recipe) ClassTable() []manifest.Class {
	out := []manifest.Class{{ID: 0, Name: "background", Color: [3]uint8{0, 0, 0}}}
	for i, c := range r.Classes {
		out = append(out, manifest.Class{ID: i + 1, Name: c.Name, Color: [3]uint8{uint8(c.Color[0]), uint8(c.Color[1]), uint8(c.Color[2])}})
	}
	// Glyph classes keep their label under small turns only and never under
	// a flip: a mirrored glyph is another glyph, a 6 turned over reads 9.
	for _, o := range r.allSpecs() {
		if o.Glyph != nil {
			no, small := false, GlyphMaxRotate
			out[o.classID].Flip, out[o.classID].MaxRotate = &no, &small
		}
	}
	return out
}

// VisibilityError is a plan whose rendered masks break a visibility minimum;
// the sample is re-planned.
type VisibilityError struct {
	Layer       int
	Instance    int
	Class       string
	Area        int
	Shown       float64
	LeastPixels int
	LeastShown  float64
}

func (e *VisibilityError) Error() string {
	return fmt.Sprintf("object %d (class %q) kept %d pixels, %.0f%% shown; the layout asks for least_pixels %d and least_shown %.0f%%",
		e.Instance, e.Class, e.Area, 100*e.Shown, e.LeastPixels, 100*e.LeastShown)
}

// Field is the layout field the object failed: least_pixels or least_shown.
func (e *VisibilityError) Field() string {
	if e.Area < e.LeastPixels {
		return "least_pixels"
	}
	return "least_shown"
}

// Generate plans and renders sample index, redrawing its geometry (bounded by
// MaxAttempts) until every object meets its layout's visibility minimum.
func (rd *Renderer) Generate(seed uint64, index int) (*Sample, error) {
	content, err := rd.r.Content(seed, index)
	if err != nil {
		return nil, err
	}
	objs := make([]ObjectPlan, len(content))
	cue := rd.cue(seed, index, content)
	var last error
	for attempt := 0; attempt < MaxAttempts; attempt++ {
		copy(objs, content) // each attempt places the same content afresh
		p, err := rd.r.placeContent(seed, index, attempt, objs)
		if err != nil {
			if _, ok := err.(*LayoutError); !ok {
				return nil, err
			}
			last = err
			continue
		}
		p.Cue = cue
		s, err := rd.Render(p)
		if err == nil {
			return s, rd.plant(seed, index, p, content, s)
		}
		if _, ok := err.(*VisibilityError); !ok {
			return nil, err
		}
		last = err
	}
	if le, ok := last.(*LayoutError); ok {
		return nil, le
	}
	if ve, ok := last.(*VisibilityError); ok {
		return nil, &LayoutError{Index: index, Layer: ve.Layer, Field: ve.Field(), Constraint: ve.Error()}
	}
	return nil, fmt.Errorf("sample %d: %v (gave up after %d attempts)", index, last, MaxAttempts)
}

// Render draws a plan. Each object is rasterized once; that coverage is both
// the alpha it is composited with and, where coverage ≥ 0.5, its mask pixels
// (topmost object wins). Labels are then measured from the instance mask.
func (rd *Renderer) Render(p *Plan) (*Sample, error) {
	r := rd.r
	W, H := r.Canvas.Width, r.Canvas.Height
	rect := image.Rect(0, 0, W, H)
	rgb := r.Canvas.Mode == "rgb"
	gray, rgba, mask, inst := rd.images(rect, rgb)
	var pix []uint8
	var stride, bpp int
	var img image.Image
	if rgb {
		pix, stride, bpp, img = rgba.Pix, rgba.Stride, 4, rgba
	} else {
		pix, stride, bpp, img = gray.Pix, gray.Stride, 1, gray
	}
	rd.bg.paint(&p.Background, pix, stride, bpp, W, H)
	if p.Cue {
		rd.paintCue(0, pix, stride, bpp, W, H)
	}
	aa := *r.Canvas.Antialias
	if cap(rd.alone) < len(p.Objects) {
		rd.alone = make([]int, len(p.Objects))
	}
	alone := rd.alone[:len(p.Objects)]

	for i := range p.Objects {
		o := &p.Objects[i]
		id := i + 1
		rd.local = o.localPath(rd.local)
		rd.world = rd.local.Transform(o.transform(), rd.world)
		x0f, y0f, x1f, y1f := rd.world.Bounds()
		x0, y0 := int(math.Floor(x0f)), int(math.Floor(y0f))
		x1, y1 := int(math.Ceil(x1f)), int(math.Ceil(y1f))
		bw, bh := x1-x0, y1-y0
		if bw <= 0 || bh <= 0 {
			alone[i] = 0
			continue
		}
		rd.rasterize(x0, y0, bw, bh)
		tone := o.Tone
		n := 0
		for y := 0; y < bh; y++ {
			cy := y0 + y
			row := rd.cov.Pix[y*rd.cov.Stride : y*rd.cov.Stride+bw]
			for x, a := range row {
				if a >= 128 {
					n++
				}
				cx := x0 + x
				if a == 0 || cx < 0 || cy < 0 || cx >= W || cy >= H {
					continue
				}
				if !aa {
					if a < 128 {
						continue
					}
					a = 255
				}
				off := cy*stride + cx*bpp
				if a == 255 {
					pix[off] = tone[0]
					if rgb {
						pix[off+1], pix[off+2] = tone[1], tone[2]
					}
				} else {
					pix[off] = blend(pix[off], tone[0], a)
					if rgb {
						pix[off+1] = blend(pix[off+1], tone[1], a)
						pix[off+2] = blend(pix[off+2], tone[2], a)
					}
				}
				if a >= 128 {
					io := cy*inst.Stride + 2*cx
					inst.Pix[io], inst.Pix[io+1] = uint8(id>>8), uint8(id)
					mask.Pix[cy*mask.Stride+cx] = uint8(o.Class)
				}
			}
		}
		alone[i] = n
	}
	if p.Cue {
		rd.paintCue(1, pix, stride, bpp, W, H)
	}
	if rgb {
		m := img.(*image.RGBA)
		for i := 3; i < len(m.Pix); i += 4 {
			m.Pix[i] = 255
		}
	}

	s := &Sample{Image: img, Mask: mask, Instances: inst}
	if err := rd.label(p, s, alone); err != nil {
		return nil, err
	}
	return s, nil
}

// rasterize fills rd.cov (bw×bh) with the coverage of rd.world, offset so
// that pixel (x0, y0) of the canvas is (0, 0) of the buffer.
func (rd *Renderer) rasterize(x0, y0, bw, bh int) {
	rd.ras.Reset(bw, bh)
	rd.ras.DrawOp = draw.Src
	fx, fy := float64(x0), float64(y0)
	pt := func(p Pt) (float32, float32) { return float32(p.X - fx), float32(p.Y - fy) }
	open := false
	var px, py float32
	for _, s := range rd.world {
		switch s.Op {
		case OpMove:
			if open {
				rd.ras.ClosePath()
			}
			rd.ras.MoveTo(pt(s.P[0]))
			open = true
		case OpLine:
			rd.ras.LineTo(pt(s.P[0]))
		case OpQuad, OpCube:
			p0 := Pt{float64(px) + fx, float64(py) + fy}
			flatten(p0, s, func(q Pt) { rd.ras.LineTo(pt(q)) })
		}
		px, py = rd.ras.Pen()
	}
	if open {
		rd.ras.ClosePath()
	}
	if cap(rd.cov.Pix) < bw*bh {
		rd.cov.Pix = make([]uint8, bw*bh)
	}
	rd.cov.Pix = rd.cov.Pix[:bw*bh]
	rd.cov.Stride = bw
	rd.cov.Rect = image.Rect(0, 0, bw, bh)
	rd.ras.Draw(&rd.cov, rd.cov.Rect, image.Opaque, image.Point{})
}

// flatTolerance is the largest distance, in pixels, between a curve and the
// line segments that replace it. x/image/vector's own flattening leaves a
// circle of radius 30 about 0.14 px inside its true outline; this keeps
// every curve within 0.01 px.
const flatTolerance = 0.01

// flatten replaces a quadratic or cubic Bézier segment from p0 by n equal
// parameter steps. For a curve B of degree d on t ∈ [0, 1], the chord over a
// step h deviates from the curve by at most h²·max|B″|/8, and |B″| is bounded
// by d(d−1)·max‖second difference of the control points‖ (the de Casteljau
// bounds for Bézier derivatives), so n = ⌈√(d(d−1)·M / (8·tol))⌉ steps suffice.
func flatten(p0 Pt, s Seg, line func(Pt)) {
	var ctrl [4]Pt
	ctrl[0] = p0
	deg := 2
	if s.Op == OpCube {
		deg = 3
	}
	copy(ctrl[1:], s.P[:deg])
	m := 0.0
	for i := 0; i+2 <= deg; i++ {
		dx := ctrl[i].X - 2*ctrl[i+1].X + ctrl[i+2].X
		dy := ctrl[i].Y - 2*ctrl[i+1].Y + ctrl[i+2].Y
		m = math.Max(m, math.Hypot(dx, dy))
	}
	n := int(math.Ceil(math.Sqrt(float64(deg*(deg-1)) * m / (8 * flatTolerance))))
	n = max(1, min(n, 1000))
	for k := 1; k <= n; k++ {
		t := float64(k) / float64(n)
		u := 1 - t
		var q Pt
		if deg == 2 {
			q = Pt{u*u*ctrl[0].X + 2*u*t*ctrl[1].X + t*t*ctrl[2].X, u*u*ctrl[0].Y + 2*u*t*ctrl[1].Y + t*t*ctrl[2].Y}
		} else {
			a, b, c, d := u*u*u, 3*u*u*t, 3*u*t*t, t*t*t
			q = Pt{a*ctrl[0].X + b*ctrl[1].X + c*ctrl[2].X + d*ctrl[3].X, a*ctrl[0].Y + b*ctrl[1].Y + c*ctrl[2].Y + d*ctrl[3].Y}
		}
		if k == n {
			q = ctrl[deg] // end exactly on the segment's end point
		}
		line(q)
	}
}

// blend composites src over dst with 8-bit alpha a, rounding to nearest:
// (dst·(255−a) + src·a) / 255.
func blend(dst, src, a uint8) uint8 {
	v := uint32(dst)*uint32(255-a) + uint32(src)*uint32(a)
	return uint8((v + 127) / 255)
}

// label fills the record's objects from the instance mask and checks every
// object's visibility against its layout's minimum.
func (rd *Renderer) label(p *Plan, s *Sample, alone []int) error {
	r := rd.r
	stats := manifest.MeasureInstances(s.Instances)
	rec := &s.Record
	rec.Index = p.Index
	rec.ID = manifest.SampleID(p.Index)
	rec.Group = rec.ID
	rec.Width, rec.Height = r.Canvas.Width, r.Canvas.Height
	rec.Objects = make([]manifest.Object, len(p.Objects))
	for i := range p.Objects {
		o := &p.Objects[i]
		id := i + 1
		st := stats[id]
		area := 0
		var bb [4]int
		if st != nil {
			area, bb = st.Area, st.BBox
		}
		vis := 0.0
		if alone[i] > 0 {
			vis = float64(area) / float64(alone[i])
		}
		if area < o.LeastPixels || vis < o.LeastShown {
			return &VisibilityError{Layer: o.Layer, Instance: id, Class: rd.palette[o.Class].Name, Area: area, Shown: vis, LeastPixels: o.LeastPixels, LeastShown: o.LeastShown}
		}
		ob := manifest.Object{
			Instance: id, Class: o.Class, ClassName: rd.palette[o.Class].Name, Parent: o.Parent,
			Box: bb, Area: area, Shown: manifest.Round(vis, 4),
			Shape:  o.Kind,
			Center: &[2]float64{manifest.Round(o.CX, 3), manifest.Round(o.CY, 3)},
			Size:   manifest.Factor(manifest.Round(o.Size, 3)), Aspect: manifest.Factor(manifest.Round(o.Aspect, 4)),
			Angle: manifest.Factor(manifest.Round(o.Angle, 3)),
			Value: o.Value,
		}
		if st != nil {
			ob.Measured(&st.M)
		}
		if o.Kind == "glyph" {
			ob.Glyph = string(o.Glyph)
			ob.Font = o.Spec.font.Name
		}
		if r.Canvas.Mode == "rgb" {
			c := o.Tone
			ob.Color = &c
		} else {
			v := float64(o.Tone[0])
			ob.Intensity = &v
		}
		rec.Objects[i] = ob
	}
	t, err := r.targets(p, rec.Objects, r.Targets)
	if err != nil {
		return fmt.Errorf("sample %d: %w", p.Index, err)
	}
	rec.Targets = t
	return nil
}
