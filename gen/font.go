package gen

import (
	"errors"
	"fmt"
	"github.com/trueset/trueset/internal/safefile"
	"path/filepath"
	"sort"

	"golang.org/x/image/font"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/gobolditalic"
	"golang.org/x/image/font/gofont/goitalic"
	"golang.org/x/image/font/gofont/gomedium"
	"golang.org/x/image/font/gofont/gomediumitalic"
	"golang.org/x/image/font/gofont/gomono"
	"golang.org/x/image/font/gofont/gomonobold"
	"golang.org/x/image/font/gofont/gomonobolditalic"
	"golang.org/x/image/font/gofont/gomonoitalic"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/font/gofont/gosmallcaps"
	"golang.org/x/image/font/gofont/gosmallcapsitalic"
	"golang.org/x/image/font/sfnt"
	"golang.org/x/image/math/fixed"
)

// goFonts are the Go fonts embedded in golang.org/x/image/font/gofont, by the
// name of their package.
var goFonts = map[string][]byte{
	"goregular":         goregular.TTF,
	"gobold":            gobold.TTF,
	"gobolditalic":      gobolditalic.TTF,
	"goitalic":          goitalic.TTF,
	"gomedium":          gomedium.TTF,
	"gomediumitalic":    gomediumitalic.TTF,
	"gomono":            gomono.TTF,
	"gomonobold":        gomonobold.TTF,
	"gomonobolditalic":  gomonobolditalic.TTF,
	"gomonoitalic":      gomonoitalic.TTF,
	"gosmallcaps":       gosmallcaps.TTF,
	"gosmallcapsitalic": gosmallcapsitalic.TTF,
}

// FontNames lists the built-in font names, sorted.
func FontNames() []string {
	var names []string
	for n := range goFonts {
		names = append(names, n)
	}
	sort.Strings(names)
	return names
}

// MaxFontBytes bounds a user font file.
const MaxFontBytes = 32 << 20

// Font is a parsed font with the outlines of the glyphs a recipe uses,
// in font units with y down, loaded once so workers only read them.
type Font struct {
	Name    string
	UPEM    float64
	Ascent  float64 // font units, positive
	Descent float64 // font units, positive
	sf      *sfnt.Font
	glyphs  map[rune]*GlyphOutline
}

// GlyphOutline is one glyph in font units: its path, ink bounds and advance.
type GlyphOutline struct {
	Path    Path
	Bounds  [4]float64 // x0, y0, x1, y1 in font units, y down, origin at the pen
	Advance float64
}

func loadFont(name string, data []byte) (*Font, error) {
	sf, err := sfnt.Parse(data)
	if err != nil {
		return nil, err
	}
	var b sfnt.Buffer
	upem := sf.UnitsPerEm()
	m, err := sf.Metrics(&b, fixed.I(int(upem)), font.HintingNone)
	if err != nil {
		return nil, err
	}
	return &Font{
		Name: name, UPEM: float64(upem), sf: sf, glyphs: map[rune]*GlyphOutline{},
		Ascent: fix(m.Ascent), Descent: fix(m.Descent),
	}, nil
}

func fix(v fixed.Int26_6) float64 { return float64(v) / 64 }

// openFont returns the font of a glyph spec: a Go font by name, or a file
// relative to dir.
func openFont(spec *GlyphSpec, dir string) (*Font, string, error) {
	if spec.File != "" {
		p := spec.File
		if !filepath.IsAbs(p) {
			p = filepath.Join(dir, p)
		}
		data, err := safefile.Read(p, "font file", MaxFontBytes)
		if err != nil {
			return nil, p, errors.New(safefile.Msg(err))
		}
		f, err := loadFont(spec.File, data)
		if err != nil {
			return nil, p, fmt.Errorf("not a TrueType/OpenType font: %v", err)
		}
		return f, p, nil
	}
	data, ok := goFonts[spec.Font]
	if !ok {
		return nil, spec.Font, fmt.Errorf("unknown font")
	}
	f, err := loadFont(spec.Font, data)
	return f, spec.Font, err
}

// glyph loads (once) the outline of r; it fails when the font lacks r.
func (f *Font) glyph(r rune) (*GlyphOutline, error) {
	if g, ok := f.glyphs[r]; ok {
		return g, nil
	}
	var b sfnt.Buffer
	idx, err := f.sf.GlyphIndex(&b, r)
	if err != nil {
		return nil, err
	}
	if idx == 0 {
		return nil, fmt.Errorf("font %s has no glyph for %q", f.Name, r)
	}
	ppem := fixed.I(int(f.UPEM))
	segs, err := f.sf.LoadGlyph(&b, idx, ppem, nil)
	if err != nil {
		return nil, err
	}
	bounds, adv, err := f.sf.GlyphBounds(&b, idx, ppem, font.HintingNone)
	if err != nil {
		return nil, err
	}
	g := &GlyphOutline{
		Bounds:  [4]float64{fix(bounds.Min.X), fix(bounds.Min.Y), fix(bounds.Max.X), fix(bounds.Max.Y)},
		Advance: fix(adv),
	}
	for _, s := range segs {
		a := s.Args
		switch s.Op {
		case sfnt.SegmentOpMoveTo:
			g.Path = append(g.Path, Seg{Op: OpMove, P: [3]Pt{{fix(a[0].X), fix(a[0].Y)}}})
		case sfnt.SegmentOpLineTo:
			g.Path = append(g.Path, Seg{Op: OpLine, P: [3]Pt{{fix(a[0].X), fix(a[0].Y)}}})
		case sfnt.SegmentOpQuadTo:
			g.Path = append(g.Path, Seg{Op: OpQuad, P: [3]Pt{{fix(a[0].X), fix(a[0].Y)}, {fix(a[1].X), fix(a[1].Y)}}})
		case sfnt.SegmentOpCubeTo:
			g.Path = append(g.Path, Seg{Op: OpCube, P: [3]Pt{{fix(a[0].X), fix(a[0].Y)}, {fix(a[1].X), fix(a[1].Y)}, {fix(a[2].X), fix(a[2].Y)}}})
		}
	}
	if len(g.Path) == 0 {
		return nil, fmt.Errorf("font %s: glyph for %q has no outline (blank characters cannot be objects)", f.Name, r)
	}
	f.glyphs[r] = g
	return g, nil
}
