package augment

import "math"

// Mat is a 2×3 affine matrix [a b c; d e f] acting on continuous pixel
// coordinates: (x, y) ↦ (a·x + b·y + c, d·x + e·y + f). Pixel (x, y) covers
// [x, x+1) × [y, y+1), so its center is (x+0.5, y+0.5).
type Mat [6]float64

// Identity is the identity map.
var Identity = Mat{1, 0, 0, 0, 1, 0}

// Apply maps a point. Every product is rounded before it is added: the
// float64 conversions forbid fusing a multiply and an add into one FMA, which
// the compiler does where it may (a GOAMD64=v3 build does; the default v1
// does not), so every build computes what the default one does, and the warp
// kernels (warp_fast.go) can compute the same sums from precomputed terms.
func (m Mat) Apply(x, y float64) (float64, float64) {
	return float64(m[0]*x) + float64(m[1]*y) + m[2], float64(m[3]*x) + float64(m[4]*y) + m[5]
}

// Then returns the map "m, then n" (n·m as 3×3 matrices with last row 0 0 1).
// Like Apply, Then, Det and Invert round every product before adding it, so
// no build fuses them into FMAs (the matrices go into the lineage).
func (m Mat) Then(n Mat) Mat {
	return Mat{
		float64(n[0]*m[0]) + float64(n[1]*m[3]), float64(n[0]*m[1]) + float64(n[1]*m[4]), float64(n[0]*m[2]) + float64(n[1]*m[5]) + n[2],
		float64(n[3]*m[0]) + float64(n[4]*m[3]), float64(n[3]*m[1]) + float64(n[4]*m[4]), float64(n[3]*m[2]) + float64(n[4]*m[5]) + n[5],
	}
}

// Det is the determinant of the linear part: the factor areas scale by (its
// sign is negative for a flip).
func (m Mat) Det() float64 { return float64(m[0]*m[4]) - float64(m[1]*m[3]) }

// Invert returns the inverse map; ok is false for a singular matrix.
func (m Mat) Invert() (Mat, bool) {
	d := m.Det()
	if d == 0 || math.IsNaN(d) || math.IsInf(d, 0) {
		return Mat{}, false
	}
	a, b, e, f := m[4]/d, -m[1]/d, -m[3]/d, m[0]/d
	return Mat{a, b, -(float64(a*m[2]) + float64(b*m[5])), e, f, -(float64(e*m[2]) + float64(f*m[5]))}, true
}

// Translate moves by (tx, ty).
func Translate(tx, ty float64) Mat { return Mat{1, 0, tx, 0, 1, ty} }

// Scale scales about the origin.
func Scale(sx, sy float64) Mat { return Mat{sx, 0, 0, 0, sy, 0} }

// sincos returns exact values at multiples of 90°, so quarter turns move
// pixel centers onto pixel centers with no rounding error.
func sincos(deg float64) (s, c float64) {
	if q := deg / 90; q == math.Trunc(q) {
		switch ((int(q) % 4) + 4) % 4 {
		case 0:
			return 0, 1
		case 1:
			return 1, 0
		case 2:
			return 0, -1
		default:
			return -1, 0
		}
	}
	return math.Sincos(deg * math.Pi / 180)
}

// Rotate turns by deg degrees about the origin, clockwise on screen (y points
// down): the rotation matrix [cos θ −sin θ; sin θ cos θ].
func Rotate(deg float64) Mat {
	s, c := sincos(deg)
	return Mat{c, -s, 0, s, c, 0}
}

// ShearX shears horizontally by deg degrees: x' = x + tan(deg)·y.
func ShearX(deg float64) Mat { return Mat{1, math.Tan(deg * math.Pi / 180), 0, 0, 1, 0} }

// About conjugates m so it acts about the point (cx, cy): move (cx, cy) to the
// origin, apply m, move back to (ox, oy).
func About(m Mat, cx, cy, ox, oy float64) Mat {
	return Translate(-cx, -cy).Then(m).Then(Translate(ox, oy))
}

// FlipH mirrors an image of width w: x' = w − x.
func FlipH(w float64) Mat { return Mat{-1, 0, w, 0, 1, 0} }

// FlipV mirrors an image of height h: y' = h − y.
func FlipV(h float64) Mat { return Mat{1, 0, 0, 0, -1, h} }

// RotateCanvas returns the map that turns a w×h image by deg about its
// center. With expand, the output canvas grows to hold the whole turned image
// (its size is the turned box rounded to whole pixels, exact for quarter
// turns); otherwise it keeps w×h.
func RotateCanvas(w, h, deg float64, expand bool) (m Mat, ow, oh int) {
	ow, oh = int(w), int(h)
	if expand {
		s, c := sincos(deg)
		bw := math.Abs(c)*w + math.Abs(s)*h
		bh := math.Abs(s)*w + math.Abs(c)*h
		ow, oh = int(math.Round(bw)), int(math.Round(bh))
		if ow < 1 {
			ow = 1
		}
		if oh < 1 {
			oh = 1
		}
	}
	return About(Rotate(deg), w/2, h/2, float64(ow)/2, float64(oh)/2), ow, oh
}

// CropResize maps the rectangle [x0, x0+cw) × [y0, y0+ch) onto an ow×oh
// canvas.
func CropResize(x0, y0, cw, ch float64, ow, oh int) Mat {
	return Translate(-x0, -y0).Then(Scale(float64(ow)/cw, float64(oh)/ch))
}

// Angle returns the rotation angle of m's linear part in degrees (the
// direction the x axis is mapped to).
func (m Mat) Angle() float64 { return math.Atan2(m[3], m[0]) * 180 / math.Pi }
