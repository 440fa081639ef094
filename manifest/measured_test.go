package manifest

import (
	"image"
	"math"
	"testing"
)

// TestMeasuredRectangle: a w×h block of pixels has its centroid at the
// block's middle and, as a uniform rectangle, variances w²/12 and h²/12
// (moment of a uniform distribution on an interval of length w: w²/12,
// standard), so the equal-moment ellipse's axes are 4·w/√12 and 4·h/√12.
func TestMeasuredRectangle(t *testing.T) {
	m := image.NewGray16(image.Rect(0, 0, 40, 30))
	x0, y0, w, h := 5, 7, 20, 9
	for y := y0; y < y0+h; y++ {
		for x := x0; x < x0+w; x++ {
			m.Pix[y*m.Stride+2*x+1] = 3
		}
	}
	mm := &MeasureInstances(m)[3].M
	c, s := mm.Center(), mm.Size()
	if want := [2]float64{float64(x0) + float64(w)/2, float64(y0) + float64(h)/2}; math.Abs(c[0]-want[0]) > 1e-9 || math.Abs(c[1]-want[1]) > 1e-9 {
		t.Errorf("center %v, want %v", c, want)
	}
	if a, b := 4*float64(w)/math.Sqrt(12), 4*float64(h)/math.Sqrt(12); math.Abs(s[0]-a) > 1e-9 || math.Abs(s[1]-b) > 1e-9 {
		t.Errorf("size %v, want [%v %v]", s, a, b)
	}
}

// TestMeasuredDiscAndTilt: a disc of radius r (pixels whose center lies
// inside) has variance r²/4 on every axis (polar moment of a uniform disc
// πr⁴/2 split over two axes, divided by the area πr²; standard), so its
// equal-moment ellipse is a circle of diameter ≈ 2r; an ellipse of semi-axes
// a, b turned by 30° measures ≈ [2a, 2b], its centroid at its center. The
// tolerance is the pixelation of such small shapes (common practice: a few
// tenths of a pixel).
func TestMeasuredDiscAndTilt(t *testing.T) {
	m := image.NewGray16(image.Rect(0, 0, 100, 100))
	put := func(id int, inside func(x, y float64) bool) {
		for y := 0; y < 100; y++ {
			for x := 0; x < 100; x++ {
				if inside(float64(x)+0.5, float64(y)+0.5) {
					m.Pix[y*m.Stride+2*x+1] = uint8(id)
				}
			}
		}
	}
	put(1, func(x, y float64) bool { return (x-30.3)*(x-30.3)+(y-25.6)*(y-25.6) <= 12*12 })
	sn, cs := math.Sincos(30 * math.Pi / 180)
	put(2, func(x, y float64) bool {
		dx, dy := x-65.2, y-70.1
		u, v := dx*cs+dy*sn, -dx*sn+dy*cs
		return u*u/(18*18)+v*v/(7*7) <= 1
	})
	st := MeasureInstances(m)
	mm := map[int]*Moments{1: &st[1].M, 2: &st[2].M}
	near := func(what string, got, want, tol float64) {
		if math.Abs(got-want) > tol {
			t.Errorf("%s = %.4f, want %.4f ± %g", what, got, want, tol)
		}
	}
	c, s := mm[1].Center(), mm[1].Size()
	near("disc center x", c[0], 30.3, 0.15)
	near("disc center y", c[1], 25.6, 0.15)
	near("disc major", s[0], 24, 0.3)
	near("disc minor", s[1], 24, 0.3)
	c, s = mm[2].Center(), mm[2].Size()
	near("ellipse center x", c[0], 65.2, 0.15)
	near("ellipse center y", c[1], 70.1, 0.15)
	near("ellipse major", s[0], 36, 0.3)
	near("ellipse minor", s[1], 14, 0.3)

	var o Object
	o.Measured(mm[1])
	if msg := CheckMeasured(&o, mm[1]); msg != "" {
		t.Errorf("CheckMeasured of its own values: %s", msg)
	}
	o.MeasuredCenter[0] += 0.01
	if CheckMeasured(&o, mm[1]) == "" {
		t.Errorf("CheckMeasured accepts a center moved by 0.01")
	}
}
