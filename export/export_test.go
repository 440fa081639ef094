package export

import (
	"image"
	"slices"
	"testing"
)

// gray16 builds an instance mask from rows of ids.
func gray16(rows ...[]int) *image.Gray16 {
	m := image.NewGray16(image.Rect(0, 0, len(rows[0]), len(rows)))
	for y, r := range rows {
		for x, v := range r {
			m.Pix[y*m.Stride+2*x] = uint8(v >> 8)
			m.Pix[y*m.Stride+2*x+1] = uint8(v)
		}
	}
	return m
}

// whole is a box over all of m.
func whole(m *image.Gray16) [4]int {
	b := m.Bounds()
	return [4]int{b.Min.X, b.Min.Y, b.Max.X, b.Max.Y}
}

// The run-length form the JSON interchange format describes for masks: the
// pixels taken column by column, counts alternating between runs outside
// and inside the object, the first run outside (0 when the first pixel is
// inside), summing to the pixel count. The two vectors below and their
// counts are the worked example of the format's reference mask API
// documentation (from memory): M = [0 0 1 1 1 0 1] gives [2 3 1 1] and
// M = [1 1 1 1 1 1 0] gives [0 6 1]. A one-column image is its own
// column-major vector.
func TestRLEPublishedExample(t *testing.T) {
	col := func(v ...int) *image.Gray16 {
		rows := make([][]int, len(v))
		for i, x := range v {
			rows[i] = []int{x}
		}
		return gray16(rows...)
	}
	for _, c := range []struct {
		m    []int
		want []int
	}{
		{[]int{0, 0, 1, 1, 1, 0, 1}, []int{2, 3, 1, 1}},
		{[]int{1, 1, 1, 1, 1, 1, 0}, []int{0, 6, 1}},
	} {
		m := col(c.m...)
		if got := RLE(m, 1, whole(m)); !slices.Equal(got, c.want) {
			t.Errorf("M = %v: counts %v, want %v", c.m, got, c.want)
		}
	}
}

// Tiny masks whose counts can be checked by eye: read each mask down its
// columns, left to right (the comment beside each case spells that order).
func TestRLETinyMasks(t *testing.T) {
	cases := []struct {
		name string
		m    *image.Gray16
		id   int
		want []int
	}{
		// columns: (0 1) (1 1) (1 0) → 0 1 1 1 1 0
		{"3x2", gray16([]int{0, 1, 1}, []int{1, 1, 0}), 1, []int{1, 4, 1}},
		// columns: (1 1) (0 0) → starts inside: a first count of 0
		{"starts inside", gray16([]int{1, 0}, []int{1, 0}), 1, []int{0, 2, 2}},
		// columns: (0 0) (1 1) → ends inside: no trailing 0
		{"ends inside", gray16([]int{0, 1}, []int{0, 1}), 1, []int{2, 2}},
		// columns: (1 2) (2 1) → id 1 at positions 0 and 3
		{"two ids, first", gray16([]int{1, 2}, []int{2, 1}), 1, []int{0, 1, 2, 1}},
		{"two ids, second", gray16([]int{1, 2}, []int{2, 1}), 2, []int{1, 2, 1}},
		// a run that carries on from the bottom of one column to the top
		// of the next: columns (0 7) (7 0) → 0 7 7 0
		{"run across columns", gray16([]int{0, 7}, []int{7, 0}), 7, []int{1, 2, 1}},
		{"everything", gray16([]int{5, 5}, []int{5, 5}), 5, []int{0, 4}},
		{"absent", gray16([]int{5, 5}, []int{5, 5}), 6, []int{4}},
		// a 16-bit id above 255
		{"id 300", gray16([]int{0, 300, 0}), 300, []int{1, 1, 1}},
	}
	for _, c := range cases {
		if got := RLE(c.m, c.id, whole(c.m)); !slices.Equal(got, c.want) {
			t.Errorf("%s: counts %v, want %v", c.name, got, c.want)
		}
	}
}

// RLE scans only the box it is given (the object's measured box), and must
// give the same counts as over the whole image.
func TestRLEBoxEqualsWhole(t *testing.T) {
	m := gray16(
		[]int{0, 0, 0, 0, 0},
		[]int{0, 3, 3, 0, 2},
		[]int{0, 3, 0, 0, 2},
		[]int{0, 0, 0, 0, 2},
	)
	// columns: (0 0 0 0) (0 3 3 0) (0 3 0 0) (0 0 0 0) (0 2 2 2)
	if got, want := RLE(m, 3, [4]int{1, 1, 3, 3}), []int{5, 2, 2, 1, 10}; !slices.Equal(got, want) {
		t.Errorf("id 3 in its box: %v, want %v", got, want)
	}
	if got, want := RLE(m, 2, [4]int{4, 1, 5, 4}), []int{17, 3}; !slices.Equal(got, want) {
		t.Errorf("id 2 in its box: %v, want %v", got, want)
	}
	for _, id := range []int{2, 3} {
		full := RLE(m, id, whole(m))
		box := map[int][4]int{2: {4, 1, 5, 4}, 3: {1, 1, 3, 3}}[id]
		if got := RLE(m, id, box); !slices.Equal(got, full) {
			t.Errorf("id %d: box scan %v, whole scan %v", id, got, full)
		}
	}
}

// Normalized center-size boxes: center = (x0 + x1) / 2 over the width,
// size = x1 − x0 over the width (likewise for y with the height), for boxes
// with exclusive x1, y1 (common practice; the values below by hand).
func TestCenterBox(t *testing.T) {
	for _, c := range []struct {
		box  [4]int
		w, h int
		want [4]float64
	}{
		{[4]int{0, 0, 64, 64}, 64, 64, [4]float64{0.5, 0.5, 1, 1}},
		{[4]int{1, 2, 3, 6}, 4, 8, [4]float64{0.5, 0.5, 0.5, 0.5}},
		{[4]int{0, 0, 1, 1}, 4, 2, [4]float64{0.125, 0.25, 0.25, 0.5}},
		{[4]int{21, 18, 46, 43}, 64, 64, [4]float64{0.5234375, 0.4765625, 0.390625, 0.390625}},
	} {
		if got := CenterBox(c.box, c.w, c.h); got != c.want {
			t.Errorf("box %v in %dx%d: %v, want %v", c.box, c.w, c.h, got, c.want)
		}
	}
	// The shortest decimal that reads back as the same number, no exponent.
	for f, want := range map[float64]string{0.5234375: "0.5234375", 1: "1", 0.1: "0.1", 1.0 / 3: "0.3333333333333333", 1e-7: "0.0000001"} {
		if got := Num(f); got != want {
			t.Errorf("Num(%v) = %q, want %q", f, got, want)
		}
	}
}
