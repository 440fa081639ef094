package readback

import (
	"fmt"
	"strings"
)

// Layout is how the batch's arrays are laid out, as inferred.
type Layout struct {
	Order    string `json:"order"`    // "NCHW", "NHWC" or "NHW"
	N        int    `json:"n"`        // samples
	Channels int    `json:"channels"` // 1 or 3
	Height   int    `json:"height"`
	Width    int    `json:"width"`
	DType    string `json:"dtype"` // the images' .npy dtype
	IDs      string `json:"ids"`   // "record ids" or "record indices"

	MaskShape []int    `json:"mask_shape,omitempty"`
	MaskDType string   `json:"mask_dtype,omitempty"`
	Targets   []string `json:"targets"` // target arrays read
	Ignored   []string `json:"ignored"` // arrays not read, by name
}

// Describe says the layout in words.
func (l Layout) Describe() string {
	s := fmt.Sprintf("%d samples, %s, %d channel", l.N, l.Order, l.Channels)
	if l.Channels != 1 {
		s += "s"
	}
	s += fmt.Sprintf(", %dx%d, %s (ids: %s)", l.Width, l.Height, dtypeWords(l.DType), l.IDs)
	if l.MaskDType != "" {
		s += fmt.Sprintf("; masks %s %s", shapeString(l.MaskShape), dtypeWords(l.MaskDType))
	}
	return s
}

func shapeString(s []int) string {
	parts := make([]string, len(s))
	for i, v := range s {
		parts[i] = fmt.Sprint(v)
	}
	return strings.Join(parts, "×")
}

// dtypeWords names a .npy dtype the way NumPy users write it.
func dtypeWords(t string) string {
	kind, _, item, err := parseDType(t)
	if err != nil {
		return t
	}
	switch kind {
	case 'u':
		return fmt.Sprintf("uint%d", 8*item)
	case 'i':
		return fmt.Sprintf("int%d", 8*item)
	case 'f':
		return fmt.Sprintf("float%d", 8*item)
	case 'b':
		return "bool"
	}
	return t
}

// inferLayout finds the axis order of the images array. want lists the
// (width, height) pairs the dataset's records have, used only when the
// shape alone cannot tell (an image 3 pixels wide).
func inferLayout(file string, a *Array, n int, sizes map[[2]int]bool) (Layout, error) {
	bad := func(format string, args ...any) error {
		return &InputError{File: file, Msg: "images: " + fmt.Sprintf(format, args...)}
	}
	if a.Kind != 'u' && a.Kind != 'i' && a.Kind != 'f' && a.Kind != 'b' {
		return Layout{}, bad("dtype %s is not numbers", a.DType)
	}
	s := a.Shape
	l := Layout{DType: a.DType}
	switch len(s) {
	case 3:
		l.Order, l.N, l.Channels, l.Height, l.Width = "NHW", s[0], 1, s[1], s[2]
	case 4:
		chFirst := s[1] == 1 || s[1] == 3
		chLast := s[3] == 1 || s[3] == 3
		known := func(h, w int) bool { return sizes[[2]int{w, h}] }
		if chFirst && chLast {
			switch {
			case known(s[2], s[3]) && !known(s[1], s[2]):
				chLast = false
			case known(s[1], s[2]) && !known(s[2], s[3]):
				chFirst = false
			default:
				return Layout{}, bad("shape %s could be N×C×H×W or N×H×W×C; trueset cannot tell which (dump N×C×H×W or N×H×W×C with images larger than 3 pixels, or the dataset's own size)", shapeString(s))
			}
		}
		switch {
		case chFirst:
			l.Order, l.N, l.Channels, l.Height, l.Width = "NCHW", s[0], s[1], s[2], s[3]
		case chLast:
			l.Order, l.N, l.Channels, l.Height, l.Width = "NHWC", s[0], s[3], s[1], s[2]
		default:
			return Layout{}, bad("shape %s has no axis of 1 or 3 channels at position 1 or 3; want N×C×H×W, N×H×W×C or N×H×W", shapeString(s))
		}
	default:
		return Layout{}, bad("shape %s: want N×C×H×W, N×H×W×C or N×H×W", shapeString(s))
	}
	if l.N != n {
		return Layout{}, bad("%d images for %d ids", l.N, n)
	}
	if l.Height < 1 || l.Width < 1 {
		return Layout{}, bad("shape %s has an empty image axis", shapeString(s))
	}
	return l, nil
}

// planes returns sample i's loader image as channel planes of H·W.
func (l Layout) planes(a *Array, i int) [][]float32 {
	hw := l.Height * l.Width
	out := make([][]float32, l.Channels)
	switch l.Order {
	case "NCHW", "NHW":
		base := i * l.Channels * hw
		for c := range out {
			out[c] = a.Num[base+c*hw : base+(c+1)*hw]
		}
	default:
		base := i * hw * l.Channels
		for c := range out {
			p := make([]float32, hw)
			for j := range p {
				p[j] = a.Num[base+j*l.Channels+c]
			}
			out[c] = p
		}
	}
	return out
}

// maskPlane returns sample i's loader mask, or an error when the masks
// array does not fit the images.
func maskLayout(file string, m *Array, l Layout) error {
	bad := func(format string, args ...any) error {
		return &InputError{File: file, Msg: "masks: " + fmt.Sprintf(format, args...)}
	}
	if m.Kind == 'U' || m.Kind == 'S' {
		return bad("dtype %s is not numbers", m.DType)
	}
	s := m.Shape
	ok := false
	switch len(s) {
	case 3:
		ok = s[0] == l.N && s[1] == l.Height && s[2] == l.Width
	case 4:
		ok = s[0] == l.N && ((s[1] == 1 && s[2] == l.Height && s[3] == l.Width) || (s[3] == 1 && s[1] == l.Height && s[2] == l.Width))
	}
	if !ok {
		return bad("shape %s: want N×H×W = %d×%d×%d, as the images", shapeString(s), l.N, l.Height, l.Width)
	}
	return nil
}
