package manifest

import (
	"fmt"
	"image"
	"math"
)

// Moments is what an instance mask says about one object's position and
// extent: the first and second moments of its pixels, each pixel taken as
// the unit square [x, x+1) × [y, y+1) (DESIGN, Conventions).
type Moments struct {
	N             int64 // pixels
	SX, SY        int64 // Σx, Σy over pixel indices
	SXX, SYY, SXY int64 // Σx², Σy², Σxy over pixel indices
}

// MeasureMoments scans a 16-bit instance mask and returns the moments of
// every id present (id 0 excluded). Sums are integers, so the result does not
// depend on the order of the pixels.
func MeasureMoments(m *image.Gray16) map[int]*Moments {
	out := map[int]*Moments{}
	b := m.Bounds()
	last, s := 0, (*Moments)(nil)
	for y := b.Min.Y; y < b.Max.Y; y++ {
		row := m.Pix[(y-b.Min.Y)*m.Stride:]
		for x := b.Min.X; x < b.Max.X; x++ {
			i := 2 * (x - b.Min.X)
			id := int(row[i])<<8 | int(row[i+1])
			if id == 0 {
				continue
			}
			if id != last {
				last, s = id, out[id]
				if s == nil {
					s = &Moments{}
					out[id] = s
				}
			}
			X, Y := int64(x), int64(y)
			s.N++
			s.SX += X
			s.SY += Y
			s.SXX += X * X
			s.SYY += Y * Y
			s.SXY += X * Y
		}
	}
	return out
}

// Center is the centroid of the object's pixels in pixel coordinates: the
// mean of the pixel centers (x+0.5, y+0.5).
func (m *Moments) Center() [2]float64 {
	n := float64(m.N)
	return [2]float64{float64(m.SX)/n + 0.5, float64(m.SY)/n + 0.5}
}

// Size is [major, minor]: the full axes of the ellipse with the same second
// moments as the object's pixels (each pixel a unit square, so every
// variance gains 1/12): 4·√λ for the eigenvalues λ of the covariance matrix
// (image moments: an ellipse of semi-axes a, b has variances a²/4 and b²/4;
// Prokop & Reeves 1992, from memory). A disc of diameter d measures about
// [d, d]; a w×h rectangle measures 2/√3 · [w, h].
func (m *Moments) Size() [2]float64 {
	n := float64(m.N)
	mx, my := float64(m.SX)/n, float64(m.SY)/n
	vxx := float64(m.SXX)/n - mx*mx + 1.0/12
	vyy := float64(m.SYY)/n - my*my + 1.0/12
	vxy := float64(m.SXY)/n - mx*my
	tr, d := vxx+vyy, math.Hypot(vxx-vyy, 2*vxy)
	l1, l2 := (tr+d)/2, math.Max((tr-d)/2, 0)
	return [2]float64{4 * math.Sqrt(l1), 4 * math.Sqrt(l2)}
}

// Measured writes the measured center and size of m into o, rounded as
// records keep them (3 decimals).
func (o *Object) Measured(m *Moments) {
	c, s := m.Center(), m.Size()
	o.MeasuredCenter = [2]float64{Round(c[0], 3), Round(c[1], 3)}
	o.MeasuredSize = [2]float64{Round(s[0], 3), Round(s[1], 3)}
}

// SetMeasured fills the measured center and size of every object from the
// instance mask; objects absent from it keep zeros (they have Area 0 and
// are not written).
func SetMeasured(objs []Object, inst *image.Gray16) {
	mm := MeasureMoments(inst)
	for i := range objs {
		if m := mm[objs[i].Instance]; m != nil {
			objs[i].Measured(m)
		}
	}
}

// KindMeasured names a verify problem: an object's measured_center or
// measured_size differs from what its instance mask gives.
const KindMeasured = "measured"

func init() { ProblemKinds = append(ProblemKinds, KindMeasured) }

// CheckMeasured says how an object's measured center and size differ from
// the moments of its mask pixels ("" when they agree to the 3 decimals
// records keep).
func CheckMeasured(o *Object, m *Moments) string {
	var want Object
	want.Measured(m)
	if o.MeasuredCenter != want.MeasuredCenter || o.MeasuredSize != want.MeasuredSize {
		return fmt.Sprintf("object %d: measured_center %v and measured_size %v in the record, %v and %v in the instance mask",
			o.Instance, o.MeasuredCenter, o.MeasuredSize, want.MeasuredCenter, want.MeasuredSize)
	}
	return ""
}
