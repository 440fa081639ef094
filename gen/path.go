package gen

import "math"

// Pt is a point in continuous pixel coordinates, y down.
type Pt struct{ X, Y float64 }

// Op is a path segment operation.
type Op uint8

// Path operations; a contour starts with OpMove and is closed implicitly.
const (
	OpMove Op = iota
	OpLine
	OpQuad
	OpCube
)

// Seg is one path segment; P holds 1 (move, line), 2 (quad) or 3 (cube) points.
type Seg struct {
	Op Op
	P  [3]Pt
}

// Path is a list of closed contours. Filling uses the rasterizer's rule: a
// contour drawn the other way round cuts a hole.
type Path []Seg

func (s Seg) n() int {
	switch s.Op {
	case OpQuad:
		return 2
	case OpCube:
		return 3
	}
	return 1
}

// Affine is a 2×3 matrix [a b c; d e f] mapping (x, y) to
// (a·x + b·y + c, d·x + e·y + f).
type Affine [6]float64

// Apply maps p.
func (m Affine) Apply(p Pt) Pt {
	return Pt{m[0]*p.X + m[1]*p.Y + m[2], m[3]*p.X + m[4]*p.Y + m[5]}
}

// Place returns the map that scales local coordinates by (sx, sy), rotates
// them by deg degrees (clockwise on screen, since y points down), then
// moves the origin to (cx, cy):
//
//	[x']   [cos θ  −sin θ] [sx·x]   [cx]
//	[y'] = [sin θ   cos θ] [sy·y] + [cy]
func Place(cx, cy, sx, sy, deg float64) Affine {
	s, c := math.Sincos(deg * math.Pi / 180)
	return Affine{c * sx, -s * sy, cx, s * sx, c * sy, cy}
}

// Transform returns a copy of p mapped by m. Affine maps keep lines lines and
// map Bézier control points to the control points of the mapped curve.
func (p Path) Transform(m Affine, dst Path) Path {
	dst = dst[:0]
	for _, s := range p {
		t := Seg{Op: s.Op}
		for i := 0; i < s.n(); i++ {
			t.P[i] = m.Apply(s.P[i])
		}
		dst = append(dst, t)
	}
	return dst
}

// Bounds returns the box of all points and control points; it contains the
// filled shape because a Bézier curve lies in its control polygon's hull.
func (p Path) Bounds() (x0, y0, x1, y1 float64) {
	x0, y0 = math.Inf(1), math.Inf(1)
	x1, y1 = math.Inf(-1), math.Inf(-1)
	for _, s := range p {
		for i := 0; i < s.n(); i++ {
			q := s.P[i]
			x0, y0 = math.Min(x0, q.X), math.Min(y0, q.Y)
			x1, y1 = math.Max(x1, q.X), math.Max(y1, q.Y)
		}
	}
	return
}
