package gen

import "math"

// kappa is the cubic Bézier handle length that approximates a quarter circle
// of radius 1 with the least radial error (4/3·(√2−1) ≈ 0.5523; the curve
// stays within 0.03% of the radius).
const kappa = 0.5522847498307936

// localPath returns the object's outline in its own frame: centered on the
// origin, before rotation. Shapes fill [-hw, hw] × [-hh, hh]; glyphs are in
// font units with the ink center at the origin.
func (o *ObjectPlan) localPath(dst Path) Path {
	hw, hh := o.Size*o.Aspect/2, o.Size/2
	dst = dst[:0]
	switch o.Kind {
	case "circle", "ellipse":
		dst = ellipse(dst, hw, hh, false)
	case "rectangle":
		dst = poly(dst, []Pt{{-hw, -hh}, {hw, -hh}, {hw, hh}, {-hw, hh}})
	case "rounded-rectangle":
		dst = roundRect(dst, hw, hh, o.Corner*2*math.Min(hw, hh))
	case "bar":
		dst = roundRect(dst, hw, hh, math.Min(hw, hh))
	case "triangle":
		dst = poly(dst, []Pt{{0, -hh}, {hw, hh}, {-hw, hh}})
	case "polygon":
		dst = regular(dst, o.Sides, hw, hh, 1, 1)
	case "star":
		dst = regular(dst, 2*o.Sides, hw, hh, 1, o.Inner)
	case "ring":
		dst = ellipse(dst, hw, hh, false)
		dst = ellipse(dst, hw*o.Inner, hh*o.Inner, true)
	case "cross":
		tw, th := hw*o.Thickness, hh*o.Thickness
		dst = poly(dst, []Pt{
			{-tw, -hh}, {tw, -hh}, {tw, -th}, {hw, -th}, {hw, th}, {tw, th},
			{tw, hh}, {-tw, hh}, {-tw, th}, {-hw, th}, {-hw, -th}, {-tw, -th},
		})
	case "glyph":
		g := o.Spec.font.glyphs[o.Glyph]
		icx, icy := (g.Bounds[0]+g.Bounds[2])/2, (g.Bounds[1]+g.Bounds[3])/2
		dst = g.Path.Transform(Affine{1, 0, -icx, 0, 1, -icy}, dst)
	}
	return dst
}

// transform returns the map from the object's local frame to the canvas.
func (o *ObjectPlan) transform() Affine {
	if o.Kind == "glyph" {
		s := o.Size / o.Spec.font.UPEM
		return Place(o.CX, o.CY, s*o.Aspect, s, o.Angle)
	}
	return Place(o.CX, o.CY, 1, 1, o.Angle)
}

func poly(dst Path, pts []Pt) Path {
	dst = append(dst, Seg{Op: OpMove, P: [3]Pt{pts[0]}})
	for _, p := range pts[1:] {
		dst = append(dst, Seg{Op: OpLine, P: [3]Pt{p}})
	}
	return dst
}

// ellipse appends an axis-aligned ellipse of four cubic arcs, clockwise on
// screen, or anticlockwise when reverse (to cut a hole).
func ellipse(dst Path, rx, ry float64, reverse bool) Path {
	k := kappa
	// Quarter arcs: right → bottom → left → top (clockwise with y down).
	pts := []Pt{
		{rx, 0}, {rx, k * ry}, {k * rx, ry}, {0, ry},
		{-k * rx, ry}, {-rx, k * ry}, {-rx, 0},
		{-rx, -k * ry}, {-k * rx, -ry}, {0, -ry},
		{k * rx, -ry}, {rx, -k * ry}, {rx, 0},
	}
	if reverse {
		for i, j := 0, len(pts)-1; i < j; i, j = i+1, j-1 {
			pts[i], pts[j] = pts[j], pts[i]
		}
	}
	dst = append(dst, Seg{Op: OpMove, P: [3]Pt{pts[0]}})
	for i := 1; i+2 < len(pts); i += 3 {
		dst = append(dst, Seg{Op: OpCube, P: [3]Pt{pts[i], pts[i+1], pts[i+2]}})
	}
	return dst
}

func roundRect(dst Path, hw, hh, rad float64) Path {
	if rad <= 0 {
		return poly(dst, []Pt{{-hw, -hh}, {hw, -hh}, {hw, hh}, {-hw, hh}})
	}
	k := kappa * rad
	dst = append(dst, Seg{Op: OpMove, P: [3]Pt{{-hw + rad, -hh}}})
	dst = append(dst,
		Seg{Op: OpLine, P: [3]Pt{{hw - rad, -hh}}},
		Seg{Op: OpCube, P: [3]Pt{{hw - rad + k, -hh}, {hw, -hh + rad - k}, {hw, -hh + rad}}},
		Seg{Op: OpLine, P: [3]Pt{{hw, hh - rad}}},
		Seg{Op: OpCube, P: [3]Pt{{hw, hh - rad + k}, {hw - rad + k, hh}, {hw - rad, hh}}},
		Seg{Op: OpLine, P: [3]Pt{{-hw + rad, hh}}},
		Seg{Op: OpCube, P: [3]Pt{{-hw + rad - k, hh}, {-hw, hh - rad + k}, {-hw, hh - rad}}},
		Seg{Op: OpLine, P: [3]Pt{{-hw, -hh + rad}}},
		Seg{Op: OpCube, P: [3]Pt{{-hw, -hh + rad - k}, {-hw + rad - k, -hh}, {-hw + rad, -hh}}},
	)
	return dst
}

// regular appends n vertices on the ellipse of radii (hw, hh), starting at the
// top; odd vertices use radius factor odd (1 for polygons, inner for stars).
func regular(dst Path, n int, hw, hh, even, odd float64) Path {
	pts := make([]Pt, n)
	for i := range pts {
		f := even
		if i%2 == 1 {
			f = odd
		}
		a := -math.Pi/2 + 2*math.Pi*float64(i)/float64(n)
		pts[i] = Pt{hw * f * math.Cos(a), hh * f * math.Sin(a)}
	}
	return poly(dst, pts)
}
