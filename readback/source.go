package readback

import (
	"fmt"
	"image"
	"sync"

	"github.com/trueset/trueset/manifest"
)

// MaxSourcePixels bounds one source image readback decodes (width × height):
// the budget manifest.SampleFile.Header applies.
const MaxSourcePixels = manifest.MaxVerifyPixels

// source is one record's truth, decoded: the image as planar float32 in
// 0..255 (C0 channels; an RGB image also gets a fourth, its BT.601 luma,
// for loaders that convert to gray), the semantic mask and, when asked, the
// instance mask.
type source struct {
	rec   *manifest.Record
	w, h  int
	ch    [][]float32 // C0 (+ luma) planes of w*h
	gray  bool        // the image is 1-channel
	mask  []uint8
	inst  []uint16
	nchan int // real channels: 1 or 3

	instOnce sync.Once
	instErr  error
}

// readPNG reads one record file through manifest.OpenSample (a file of the
// folder or a member of a pack) and decodes it, checking its size against
// the record, and the pixel budget, before decoding in full.
func readPNG(dir, rel string, w, h int) (image.Image, error) {
	f, err := manifest.OpenSample(dir, rel)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	if _, err := f.Header(w, h); err != nil {
		return nil, err
	}
	return f.Decode()
}

func loadSource(dir string, r *manifest.Record, withInst bool) (*source, error) {
	s := &source{rec: r, w: r.Width, h: r.Height}
	img, err := readPNG(dir, r.Image, r.Width, r.Height)
	if err != nil {
		return nil, err
	}
	n := s.w * s.h
	switch m := img.(type) {
	case *image.Gray:
		s.gray, s.nchan = true, 1
		p := make([]float32, n)
		for y := 0; y < s.h; y++ {
			row := m.Pix[y*m.Stride : y*m.Stride+s.w]
			for x, v := range row {
				p[y*s.w+x] = float32(v)
			}
		}
		s.ch = [][]float32{p}
	case *image.RGBA:
		s.ch = rgbPlanes(m.Pix, m.Stride, 4, s.w, s.h)
		s.nchan = 3
	case *image.NRGBA:
		s.ch = rgbPlanes(m.Pix, m.Stride, 4, s.w, s.h)
		s.nchan = 3
	default:
		b := img.Bounds()
		r, g, bl := make([]float32, n), make([]float32, n), make([]float32, n)
		for y := 0; y < s.h; y++ {
			for x := 0; x < s.w; x++ {
				cr, cg, cb, _ := img.At(b.Min.X+x, b.Min.Y+y).RGBA()
				r[y*s.w+x], g[y*s.w+x], bl[y*s.w+x] = float32(cr>>8), float32(cg>>8), float32(cb>>8)
			}
		}
		s.ch = withLuma([][]float32{r, g, bl})
		s.nchan = 3
	}
	mk, err := readPNG(dir, r.Mask, r.Width, r.Height)
	if err != nil {
		return nil, err
	}
	s.mask = make([]uint8, n)
	switch m := mk.(type) {
	case *image.Paletted:
		copyRows(s.mask, m.Pix, m.Stride, s.w, s.h)
	case *image.Gray:
		copyRows(s.mask, m.Pix, m.Stride, s.w, s.h)
	default:
		return nil, fmt.Errorf("%s: semantic mask is not an 8-bit indexed or gray PNG", r.Mask)
	}
	if withInst {
		if err := s.loadInstances(dir); err != nil {
			return nil, err
		}
	}
	return s, nil
}

func copyRows(dst, pix []uint8, stride, w, h int) {
	for y := 0; y < h; y++ {
		copy(dst[y*w:(y+1)*w], pix[y*stride:y*stride+w])
	}
}

func rgbPlanes(pix []uint8, stride, bpp, w, h int) [][]float32 {
	n := w * h
	r, g, b := make([]float32, n), make([]float32, n), make([]float32, n)
	for y := 0; y < h; y++ {
		row := pix[y*stride:]
		for x := 0; x < w; x++ {
			i := y*w + x
			r[i], g[i], b[i] = float32(row[bpp*x]), float32(row[bpp*x+1]), float32(row[bpp*x+2])
		}
	}
	return withLuma([][]float32{r, g, b})
}

// withLuma appends the ITU-R BT.601 luma plane 0.299 R + 0.587 G + 0.114 B
// (the weights of Go's color.GrayModel and of common gray conversions).
func withLuma(p [][]float32) [][]float32 {
	l := make([]float32, len(p[0]))
	for i := range l {
		l[i] = 0.299*p[0][i] + 0.587*p[1][i] + 0.114*p[2][i]
	}
	return append(p, l)
}

// channelName names source channel s of a source with nchan channels.
func channelName(s, nchan int) string {
	if nchan == 1 {
		return "gray"
	}
	return [...]string{"R", "G", "B", "luma"}[s]
}

// loadInstances decodes the record's instance mask (once; readback needs
// it only for counts under a crop).
func (s *source) loadInstances(dir string) error {
	s.instOnce.Do(func() { s.instErr = s.decodeInstances(dir) })
	return s.instErr
}

func (s *source) decodeInstances(dir string) error {
	r, n := s.rec, s.w*s.h
	if r.Instances != "" {
		im, err := readPNG(dir, r.Instances, r.Width, r.Height)
		if err != nil {
			return err
		}
		s.inst = make([]uint16, n)
		switch m := im.(type) {
		case *image.Gray16:
			for y := 0; y < s.h; y++ {
				for x := 0; x < s.w; x++ {
					i := y*m.Stride + 2*x
					s.inst[y*s.w+x] = uint16(m.Pix[i])<<8 | uint16(m.Pix[i+1])
				}
			}
		case *image.Gray:
			for y := 0; y < s.h; y++ {
				for x := 0; x < s.w; x++ {
					s.inst[y*s.w+x] = uint16(m.Pix[y*m.Stride+x])
				}
			}
		default:
			return fmt.Errorf("%s: instance mask is not a 16- or 8-bit gray PNG", r.Instances)
		}
	}
	return nil
}
