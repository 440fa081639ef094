package manifest

import (
	"image"
	"math/rand/v2"
	"reflect"
	"testing"
)

// TestMeasureInstancesRuns checks MeasureInstances (which looks the map up
// only where the id changes along a row) against the plain per-pixel count
// (area, box and moment sums),
// on masks with long runs, single pixels, ids repeating after gaps and rows
// that end and start with the same id, including a sub-image with an offset.
func TestMeasureInstancesRuns(t *testing.T) {
	plain := func(m *image.Gray16) map[int]*InstanceStats {
		out := map[int]*InstanceStats{}
		b := m.Bounds()
		for y := b.Min.Y; y < b.Max.Y; y++ {
			for x := b.Min.X; x < b.Max.X; x++ {
				id := int(m.Gray16At(x, y).Y)
				if id == 0 {
					continue
				}
				s := out[id]
				if s == nil {
					s = &InstanceStats{BBox: [4]int{x, y, x + 1, y + 1}}
					out[id] = s
				}
				s.Area++
				s.BBox = [4]int{min(s.BBox[0], x), min(s.BBox[1], y), max(s.BBox[2], x+1), max(s.BBox[3], y+1)}
				X, Y := int64(x), int64(y)
				s.M = Moments{s.M.N + 1, s.M.SX + X, s.M.SY + Y, s.M.SXX + X*X, s.M.SYY + Y*Y, s.M.SXY + X*Y}
			}
		}
		return out
	}
	rng := rand.New(rand.NewPCG(5, 8))
	for k := 0; k < 50; k++ {
		w, h := 1+rng.IntN(40), 1+rng.IntN(40)
		m := image.NewGray16(image.Rect(0, 0, w, h))
		id := 0
		for i := 0; i < w*h; i++ {
			if rng.IntN(6) == 0 {
				id = rng.IntN(5) * (1 + rng.IntN(700))
			}
			m.Pix[2*i], m.Pix[2*i+1] = uint8(id>>8), uint8(id)
		}
		if got, want := MeasureInstances(m), plain(m); !reflect.DeepEqual(got, want) {
			t.Fatalf("%d×%d mask %d: got %v, want %v", w, h, k, got, want)
		}
		if w > 2 && h > 2 {
			sub := m.SubImage(image.Rect(1, 1, w-1, h)).(*image.Gray16)
			if got, want := MeasureInstances(sub), plain(sub); !reflect.DeepEqual(got, want) {
				t.Fatalf("%d×%d mask %d, sub-image: got %v, want %v", w, h, k, got, want)
			}
		}
	}
}
