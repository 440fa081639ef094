package readback

import (
	"image"
	"image/color"
	"math"
	"sort"

	"github.com/trueset/trueset/manifest"
)

// Panel is one flagged sample drawn three ways for the contact sheet: its
// source image, the loader's image mapped back to 0..255 with the fitted
// per-channel map (channels kept in the loader's order, so a swap shows),
// and the loader's mask over that image in the class colors (values
// outside the class table in magenta).
type Panel struct {
	ID      string
	Notes   []string // the kinds of the findings that flag it
	Source  image.Image
	Loader  image.Image
	Overlay image.Image
}

// OverlayAlpha is the opacity of the class colors over the image.
const OverlayAlpha = 0.45

func panels(rep *Report, work []*sampleWork, lay Layout, vm valueMap, classes []manifest.Class, maxN int) []Panel {
	notes := map[string][]string{}
	for _, f := range rep.Findings {
		if f.Severity == Info {
			continue
		}
		for _, id := range f.Samples {
			if n := notes[id]; len(n) == 0 || n[len(n)-1] != f.Kind {
				notes[id] = append(notes[id], f.Kind)
			}
		}
	}
	var out []Panel
	done := map[string]bool{}
	for _, w := range work {
		id := w.rec.ID
		if len(notes[id]) == 0 || done[id] || len(out) >= maxN {
			continue
		}
		done[id] = true
		p := Panel{ID: id, Notes: notes[id], Source: sourceImage(w.src)}
		p.Loader = loaderImage(w.L, lay, vm)
		if w.M != nil {
			p.Overlay = overlay(p.Loader.(*image.RGBA), w.M, classes)
		}
		out = append(out, p)
	}
	return out
}

func clamp8(v float64) uint8 {
	switch {
	case v != v || v < 0:
		return 0
	case v > 255:
		return 255
	}
	return uint8(math.Round(v))
}

func sourceImage(s *source) image.Image {
	m := image.NewRGBA(image.Rect(0, 0, s.w, s.h))
	for i := 0; i < s.w*s.h; i++ {
		r, g, b := s.ch[0][i], s.ch[0][i], s.ch[0][i]
		if s.nchan == 3 {
			g, b = s.ch[1][i], s.ch[2][i]
		}
		m.Pix[4*i], m.Pix[4*i+1], m.Pix[4*i+2], m.Pix[4*i+3] = uint8(r), uint8(g), uint8(b), 255
	}
	return m
}

// loaderImage maps the loader's values back to 0..255: with the fitted
// map when there is one, else by stretching each channel's 1st..99th
// percentile.
func loaderImage(L [][]float32, lay Layout, vm valueMap) *image.RGBA {
	w, h := lay.Width, lay.Height
	m := image.NewRGBA(image.Rect(0, 0, w, h))
	ch := make([][]uint8, len(L))
	for c, p := range L {
		out := make([]uint8, len(p))
		a, b := 1.0, 0.0
		if vm.ok && c < len(vm.A) && vm.A[c] != 0 {
			a, b = vm.A[c], vm.B[c]
		} else {
			s := append([]float32(nil), p...)
			sort.Slice(s, func(i, j int) bool { return s[i] < s[j] })
			lo, hi := float64(s[len(s)/100]), float64(s[len(s)*99/100])
			if hi > lo {
				a, b = (hi-lo)/255, lo
			}
		}
		for i, v := range p {
			out[i] = clamp8((float64(v) - b) / a)
		}
		ch[c] = out
	}
	for i := 0; i < w*h; i++ {
		r, g, b := ch[0][i], ch[0][i], ch[0][i]
		if len(ch) >= 3 {
			g, b = ch[1][i], ch[2][i]
		}
		m.Pix[4*i], m.Pix[4*i+1], m.Pix[4*i+2], m.Pix[4*i+3] = r, g, b, 255
	}
	return m
}

func overlay(img *image.RGBA, M []float32, classes []manifest.Class) image.Image {
	col := map[int]color.RGBA{}
	for _, c := range classes {
		col[c.ID] = color.RGBA{c.Color[0], c.Color[1], c.Color[2], 255}
	}
	b := img.Bounds()
	out := image.NewRGBA(b)
	copy(out.Pix, img.Pix)
	blend := func(x, y uint8) uint8 {
		return uint8(math.Round((1-OverlayAlpha)*float64(x) + OverlayAlpha*float64(y)))
	}
	for i, v := range M {
		id := int(math.Round(float64(v)))
		if id == 0 && float64(v) == 0 {
			continue
		}
		c, ok := col[id]
		if math.Abs(float64(v)-float64(id)) > 0.01 || (!ok && id != manifest.IgnoreID) {
			c = color.RGBA{255, 0, 255, 255} // not a class id
		} else if id == manifest.IgnoreID {
			c = color.RGBA{150, 150, 150, 255}
		}
		out.Pix[4*i] = blend(out.Pix[4*i], c.R)
		out.Pix[4*i+1] = blend(out.Pix[4*i+1], c.G)
		out.Pix[4*i+2] = blend(out.Pix[4*i+2], c.B)
	}
	return out
}
