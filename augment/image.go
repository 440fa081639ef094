package augment

import (
	"image"
	"image/color"
	"image/draw"
)

// Image is a working image: C channels (1 = gray, 3 = RGB) of float32
// intensities in 0..255, row-major and interleaved. Steps work in floating
// point and the result is rounded to 8 bits once, at the end.
type Image struct {
	W, H, C int
	Pix     []float32 // len W*H*C; pixel (x, y) channel c at (y*W+x)*C+c
}

// NewImage returns a black image.
func NewImage(w, h, c int) *Image {
	return &Image{W: w, H: h, C: c, Pix: make([]float32, w*h*c)}
}

// FromImage converts any decoded image to a working image: gray images (and
// gray JPEGs) give C = 1, everything else C = 3. Alpha is dropped.
func FromImage(m image.Image) *Image {
	b := m.Bounds()
	switch src := m.(type) {
	case *image.Gray:
		out := NewImage(b.Dx(), b.Dy(), 1)
		for y := 0; y < b.Dy(); y++ {
			row := src.Pix[y*src.Stride : y*src.Stride+b.Dx()]
			for x, v := range row {
				out.Pix[y*b.Dx()+x] = float32(v)
			}
		}
		return out
	case *image.Gray16:
		out := NewImage(b.Dx(), b.Dy(), 1)
		for y := 0; y < b.Dy(); y++ {
			for x := 0; x < b.Dx(); x++ {
				out.Pix[y*b.Dx()+x] = float32(src.Gray16At(b.Min.X+x, b.Min.Y+y).Y) / 257
			}
		}
		return out
	case *image.RGBA:
		out := NewImage(b.Dx(), b.Dy(), 3)
		for y := 0; y < b.Dy(); y++ {
			row := src.Pix[y*src.Stride:]
			for x := 0; x < b.Dx(); x++ {
				o := (y*b.Dx() + x) * 3
				out.Pix[o], out.Pix[o+1], out.Pix[o+2] = float32(row[4*x]), float32(row[4*x+1]), float32(row[4*x+2])
			}
		}
		return out
	}
	if isGray(m) {
		out := NewImage(b.Dx(), b.Dy(), 1)
		for y := 0; y < b.Dy(); y++ {
			for x := 0; x < b.Dx(); x++ {
				g := color.GrayModel.Convert(m.At(b.Min.X+x, b.Min.Y+y)).(color.Gray)
				out.Pix[y*b.Dx()+x] = float32(g.Y)
			}
		}
		return out
	}
	rgba := image.NewRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	draw.Draw(rgba, rgba.Rect, m, b.Min, draw.Src)
	return FromImage(rgba)
}

func isGray(m image.Image) bool {
	switch m.ColorModel() {
	case color.GrayModel, color.Gray16Model:
		return true
	}
	return false
}

// u8 rounds to nearest and clamps to 0..255: floor(v + ½), computed as the
// integer truncation of v + ½, which is the floor for the positive values
// that reach it (TestU8 checks it against the definition).
func u8(v float32) uint8 {
	if !(v > 0) { // also NaN
		return 0
	}
	if v >= 255 {
		return 255
	}
	return uint8(float64(v) + 0.5)
}

// ToImage rounds to 8 bits: *image.Gray for C = 1, opaque *image.RGBA for C = 3.
func (m *Image) ToImage() image.Image {
	r := image.Rect(0, 0, m.W, m.H)
	if m.C == 1 {
		g := image.NewGray(r)
		for i, v := range m.Pix {
			g.Pix[i] = u8(v)
		}
		return g
	}
	out := image.NewRGBA(r)
	src, dst := m.Pix[:3*m.W*m.H], out.Pix[:4*m.W*m.H]
	for len(src) >= 3 && len(dst) >= 4 {
		dst[0], dst[1], dst[2], dst[3] = u8(src[0]), u8(src[1]), u8(src[2]), 255
		src, dst = src[3:], dst[4:]
	}
	return out
}

// Clone returns a deep copy.
func (m *Image) Clone() *Image {
	c := *m
	c.Pix = append([]float32(nil), m.Pix...)
	return &c
}
