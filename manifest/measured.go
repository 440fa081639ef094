package manifest

import (
	"fmt"
	"image"
	"math"
)

// Moments (filled by MeasureInstances) is what an instance mask says about one object's position and
// extent: the first and second moments of its pixels, each pixel taken as
// the unit square [x, x+1) × [y, y+1) (DESIGN, Conventions).
type Moments struct {
	N             int64 // pixels
	SX, SY        int64 // Σx, Σy over pixel indices
	SXX, SYY, SXY int64 // Σx², Σy², Σxy over pixel indices
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
	stats := MeasureInstances(inst)
	for i := range objs {
		if st := stats[objs[i].Instance]; st != nil {
			objs[i].Measured(&st.M)
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
