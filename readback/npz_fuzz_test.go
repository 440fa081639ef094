package readback

import "testing"

// FuzzParseNPY: any bytes as a .npy entry return an array or an error, never
// a panic, and an accepted array holds exactly shape's product of values
// (NumPy's NPY format: magic, version, header length, header dictionary,
// data of shape × item size).
func FuzzParseNPY(f *testing.F) {
	f.Add(append(npyHeader("<f4", false, []int{2, 3}), f32s([]float32{1, 2, 3, 4, 5, 6})...))
	f.Add(append(npyHeader("<f4", true, []int{2, 3}), f32s([]float32{1, 4, 2, 5, 3, 6})...))
	f.Add(append(npyHeader("|u1", false, []int{4}), 1, 2, 3, 4))
	f.Add(append(npyHeader("<U3", false, []int{1}), make([]byte, 12)...))
	f.Add([]byte("\x93NUMPY\x01\x00\x00\x00"))
	f.Fuzz(func(t *testing.T, b []byte) {
		a, err := parseNPY(b)
		if err != nil {
			return
		}
		n := 1
		for _, d := range a.Shape {
			n *= d
		}
		if got := len(a.Num) + len(a.Str); got != n {
			t.Fatalf("shape %v holds %d values, want %d", a.Shape, got, n)
		}
	})
}
