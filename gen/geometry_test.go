package gen

import (
	"fmt"
	"math"
	"testing"
)

// oneShapeRecipe parses a recipe with a single object of the given shape on a
// w×h canvas, antialiasing off, so tests can build plans for it by hand.
func oneShapeRecipe(t *testing.T, shape string, w, h int) *Recipe {
	t.Helper()
	src := fmt.Sprintf(`name: geometry-probe
canvas:
  width: %d
  height: %d
  mode: gray
  antialias: false
classes:
  - name: thing
    color: [255, 0, 0]
layers:
  - layout:
      kind: scatter
      least_pixels: 1
      least_shown: 0
    objects:
      - class: thing
        shape: %s
        count: 1
        size: 6
        intensity: 200
`, w, h, shape)
	r, err := ParseRecipe("geometry-probe.yaml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// renderOne renders a plan holding one object of the recipe's only spec with
// the given center, size (height), aspect (width / height) and angle, and
// returns the object's mask area and box as the test counts them from the
// rendered instance mask, after checking the record agrees.
func renderOne(t *testing.T, r *Recipe, cx, cy, size, aspect, angle float64) (area int, bbox [4]int) {
	t.Helper()
	spec := &r.Layers[0].Objects[0]
	p := &Plan{
		Background: BackgroundPlan{Kind: "solid"},
		Objects: []ObjectPlan{{
			Spec: spec, Class: 1, Kind: spec.Shape, Tone: [3]uint8{200, 200, 200},
			CX: cx, CY: cy, Size: size, Aspect: aspect, Angle: angle,
			LeastPixels: 1,
		}},
	}
	s, err := NewRenderer(r).Render(p)
	if err != nil {
		t.Fatal(err)
	}
	st := measureGray16(s.Instances)
	if len(st) != 1 || st[1] == nil {
		t.Fatalf("want exactly instance 1 in the mask, found %d ids", len(st))
	}
	o := s.Record.Objects[0]
	if o.Area != st[1].area || o.Box != st[1].bbox {
		t.Fatalf("record area %d bbox %v, mask gives %d %v", o.Area, o.Box, st[1].area, st[1].bbox)
	}
	return st[1].area, st[1].bbox
}

// TestDiscAreaGaussBound checks the mask area of rendered discs against the
// bound of Gauss's argument for the circle problem (Gauss circle problem, as
// given in Hardy & Wright, An Introduction to the Theory of Numbers; quoted
// here from memory).
//
// Gauss counts lattice points N(r) in a disc of radius r by giving each point
// its unit square: the squares are disjoint, each has diameter √2, so the
// squares of the counted points lie inside the disc of radius r+√2 and cover
// the disc of radius r−√2. Comparing areas gives
//
//	π(r−√2)² ≤ N(r) ≤ π(r+√2)²,  i.e.  |N(r) − πr²| ≤ 2√2·πr + 2π.
//
// The same argument holds for mask pixels (pixel (x, y) is the square
// [x, x+1) × [y, y+1), counted when the disc covers at least half of it):
//   - upper: a counted pixel meets the disc, so all of its square is within
//     r+√2 of the center; disjoint unit squares inside that disc number at
//     most π(r+√2)².
//   - lower: every point q of the disc of radius r−√2 lies in some pixel
//     whose every point is within √2 of q, hence inside the disc of radius r;
//     that pixel is fully covered and counted. So the counted squares cover
//     the disc of radius r−√2 and number at least π(r−√2)².
//
// The renderer draws circles as four cubic Béziers (radial error below 0.03%
// of r, outward) that golang.org/x/image/vector flattens to chords (at
// r = 30 eight per quarter, sagitta about 0.14 px, inward); both are far
// below the √2 margin. The chords are why areas come out a little under
// πr² (about 0.3–1% at r = 30).
func TestDiscAreaGaussBound(t *testing.T) {
	r := oneShapeRecipe(t, "circle", 80, 80)
	centers := [][2]float64{{40, 40}, {40.5, 40.5}, {40.25, 39.7}, {39.13, 40.91}, {40.999, 40.001}}
	for _, rad := range []float64{3, 5.5, 10, 17.25, 30} {
		for _, c := range centers {
			n, bb := renderOne(t, r, c[0], c[1], 2*rad, 1, 0)
			lo := math.Pi * (rad - math.Sqrt2) * (rad - math.Sqrt2)
			hi := math.Pi * (rad + math.Sqrt2) * (rad + math.Sqrt2)
			t.Logf("r=%g center %v: area %d, πr² = %.2f, bound [%.1f, %.1f]", rad, c, n, math.Pi*rad*rad, lo, hi)
			if float64(n) < lo || float64(n) > hi {
				t.Errorf("r=%g center %v: mask area %d outside Gauss bound [%.1f, %.1f] (πr² = %.1f)", rad, c, n, lo, hi, math.Pi*rad*rad)
			}
			// The box: no pixel beyond the disc is counted, so each side is
			// within 1 pixel outside c ± r; and the point at distance r−√2
			// along each axis lies in a fully covered pixel (the lower-bound
			// argument above), so each side is within √2 inside c ± r.
			want := [4]float64{c[0] - rad, c[1] - rad, c[0] + rad, c[1] + rad}
			for i := range bb {
				if math.Abs(float64(bb[i])-want[i]) > math.Sqrt2 {
					t.Errorf("r=%g center %v: bbox %v, the disc spans %v", rad, c, bb, want)
					break
				}
			}
		}
	}
}

// TestRotateRectangle90 rotates a w×h rectangle by 90° about a pixel corner.
// With the rotation matrix [cos θ −sin θ; sin θ cos θ] at θ = 90° =
// [0 −1; 1 0], the corner (±w/2, ±h/2) maps to (∓h/2, ±w/2): the w×h box
// becomes h×w. With whole-pixel sides and the center on a pixel corner (even
// sides) or a pixel center (odd sides) every edge falls on a pixel boundary,
// so the mask is exactly the box's pixels: w·h of them, at either angle.
func TestRotateRectangle90(t *testing.T) {
	r := oneShapeRecipe(t, "rectangle", 64, 64)
	// Sides of equal parity, so one center puts the edges on pixel
	// boundaries at both angles: a pixel corner for even sides, a pixel
	// center for odd ones.
	for _, wh := range [][2]float64{{20, 8}, {8, 20}, {13, 7}, {1, 5}, {30, 2}} {
		w, h := wh[0], wh[1]
		cx, cy := 30.0, 30.0
		if int(w)%2 == 1 {
			cx, cy = 30.5, 30.5
		}
		a0, b0 := renderOne(t, r, cx, cy, h, w/h, 0)
		a90, b90 := renderOne(t, r, cx, cy, h, w/h, 90)
		w0, h0 := b0[2]-b0[0], b0[3]-b0[1]
		w90, h90 := b90[2]-b90[0], b90[3]-b90[1]
		if w0 != int(w) || h0 != int(h) {
			t.Errorf("%gx%g at 0°: bbox %v is %dx%d", w, h, b0, w0, h0)
		}
		if w90 != h0 || h90 != w0 {
			t.Errorf("%gx%g: bbox %dx%d at 0° but %dx%d at 90°; want the sides swapped", w, h, w0, h0, w90, h90)
		}
		if a0 != a90 || a0 != int(w*h) {
			t.Errorf("%gx%g: area %d at 0°, %d at 90°; want both %d", w, h, a0, a90, int(w*h))
		}
		// The boxes themselves, from the matrix: x ∈ cx ± h/2, y ∈ cy ± w/2.
		want90 := [4]int{int(cx - h/2), int(cy - w/2), int(cx + h/2), int(cy + w/2)}
		if b90 != want90 {
			t.Errorf("%gx%g at 90°: bbox %v, rotation matrix gives %v", w, h, b90, want90)
		}
	}
}

// TestPlaceRotationMatrix checks Place against the textbook rotation matrix
// R(θ) = [cos θ −sin θ; sin θ cos θ] (y down, so positive θ turns clockwise
// on screen) applied after the scale diag(sx, sy) and followed by the move to
// (cx, cy). The cosines and sines are the exact values of the standard
// angles, not computed by math.
func TestPlaceRotationMatrix(t *testing.T) {
	cases := []struct {
		deg, cos, sin float64
	}{
		{0, 1, 0},
		{30, math.Sqrt(3) / 2, 0.5},
		{90, 0, 1},
		{180, -1, 0},
	}
	pts := []Pt{{0, 0}, {1, 0}, {0, 1}, {3, -2}, {-7.5, 4.25}}
	cx, cy, sx, sy := 12.5, -3.25, 2.0, 0.5
	for _, c := range cases {
		m := Place(cx, cy, sx, sy, c.deg)
		want := Affine{c.cos * sx, -c.sin * sy, cx, c.sin * sx, c.cos * sy, cy}
		for i := range m {
			if math.Abs(m[i]-want[i]) > 1e-12 {
				t.Errorf("Place(…, %g°)[%d] = %.17g, rotation matrix gives %.17g", c.deg, i, m[i], want[i])
			}
		}
		for _, p := range pts {
			got := m.Apply(p)
			x, y := sx*p.X, sy*p.Y
			wx, wy := c.cos*x-c.sin*y+cx, c.sin*x+c.cos*y+cy
			if math.Abs(got.X-wx) > 1e-12 || math.Abs(got.Y-wy) > 1e-12 {
				t.Errorf("Place(…, %g°) maps %v to %v; rotation matrix gives (%.15g, %.15g)", c.deg, p, got, wx, wy)
			}
		}
	}
}
