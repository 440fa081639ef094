package manifest

import (
	"encoding/binary"
	"image"
)

// InstanceStats is what an instance mask says about one instance id.
type InstanceStats struct {
	Area int
	BBox [4]int  // [x0, y0, x1, y1], exclusive max
	M    Moments // first and second moments of its pixels (measured.go)
}

// MeasureInstances scans a 16-bit instance mask and returns, for every id
// present (id 0 excluded), its pixel count, bounding box and moments, in one
// scan. Boxes follow the
// pixel convention: a single pixel at (x, y) has box [x, y, x+1, y+1].
func MeasureInstances(m *image.Gray16) map[int]*InstanceStats {
	out := map[int]*InstanceStats{}
	b := m.Bounds()
	// Pixels of one instance come in runs along a row: the map is looked up
	// only where the id changes.
	last, s := 0, (*InstanceStats)(nil)
	for y := b.Min.Y; y < b.Max.Y; y++ {
		row := m.Pix[(y-b.Min.Y)*m.Stride:]
		for x := b.Min.X; x < b.Max.X; x++ {
			i := 2 * (x - b.Min.X)
			// Most of a mask is background: skip it four pixels (8 zero
			// bytes) at a time.
			if x+4 <= b.Max.X && binary.LittleEndian.Uint64(row[i:]) == 0 {
				x += 3
				continue
			}
			id := int(row[i])<<8 | int(row[i+1])
			if id == 0 {
				continue
			}
			if id != last {
				last, s = id, out[id]
				if s == nil {
					s = &InstanceStats{BBox: [4]int{x, y, x + 1, y + 1}}
					out[id] = s
				}
			}
			s.Area++
			X, Y := int64(x), int64(y)
			s.M.N++
			s.M.SX += X
			s.M.SY += Y
			s.M.SXX += X * X
			s.M.SYY += Y * Y
			s.M.SXY += X * Y
			if x < s.BBox[0] {
				s.BBox[0] = x
			}
			if y < s.BBox[1] {
				s.BBox[1] = y
			}
			if x+1 > s.BBox[2] {
				s.BBox[2] = x + 1
			}
			if y+1 > s.BBox[3] {
				s.BBox[3] = y + 1
			}
		}
	}
	return out
}
