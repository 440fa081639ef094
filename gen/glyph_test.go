package gen

import (
	"fmt"
	"math"
	"testing"

	"golang.org/x/image/font"
	"golang.org/x/image/font/gofont/gomonobold"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/font/sfnt"
	"golang.org/x/image/math/fixed"
)

// sfntMetrics is one glyph's metrics in pixels at ppem = size, read by
// golang.org/x/image/font/sfnt: the hmtx advance width and the glyf ink
// bounds (x0, y0, x1, y1), y down, origin at the pen on the baseline.
type sfntMetrics struct {
	adv                float64
	bx0, by0, bx1, by1 float64
}

func fixedPx(v fixed.Int26_6) float64 { return float64(v) / 64 }

// readMetrics parses a font file with sfnt directly (not through gen's font
// loader) and returns the metrics of each rune at ppem pixels per em.
func readMetrics(t *testing.T, ttf []byte, chars string, ppem int) map[rune]sfntMetrics {
	t.Helper()
	f, err := sfnt.Parse(ttf)
	if err != nil {
		t.Fatal(err)
	}
	// At ppem = 32·k and 2048 units per em one font unit is k/64 pixel, so
	// sfnt's 26.6 fixed-point results are exact: no rounding enters the
	// 1e-3 px comparison below.
	if f.UnitsPerEm() != 2048 || ppem%32 != 0 {
		t.Fatalf("test assumes 2048 units per em and ppem a multiple of 32; got %d and %d", f.UnitsPerEm(), ppem)
	}
	var b sfnt.Buffer
	out := map[rune]sfntMetrics{}
	for _, r := range chars {
		idx, err := f.GlyphIndex(&b, r)
		if err != nil || idx == 0 {
			t.Fatalf("no glyph for %q: %v", r, err)
		}
		bounds, adv1, err := f.GlyphBounds(&b, idx, fixed.I(ppem), font.HintingNone)
		if err != nil {
			t.Fatal(err)
		}
		adv, err := f.GlyphAdvance(&b, idx, fixed.I(ppem), font.HintingNone)
		if err != nil {
			t.Fatal(err)
		}
		if adv != adv1 {
			t.Fatalf("%q: GlyphAdvance %v, GlyphBounds advance %v", r, adv, adv1)
		}
		out[r] = sfntMetrics{fixedPx(adv), fixedPx(bounds.Min.X), fixedPx(bounds.Min.Y), fixedPx(bounds.Max.X), fixedPx(bounds.Max.Y)}
	}
	return out
}

// TestGlyphRowAgainstFontMetrics checks glyph placement in a row layout
// against the font file's own metrics (sfnt hmtx advance widths and glyf
// bounds, read by golang.org/x/image/font/sfnt), with zero spacing, zero
// baseline jitter, zero angle and antialiasing off.
//
// A row sets glyph n's pen at pen_n = pen_0 + Σ_{k<n} adv_k on one baseline,
// and its recorded center is the center of its ink box placed at the pen:
//
//	center_x(n) = pen_n + (bx0_n + bx1_n)/2,  center_y(n) = baseline + (by0_n + by1_n)/2
//
// (bounds and advances already scaled to pixels by ppem = size). Hence
//
//	center_x(n+1) − center_x(n) = adv_n + (bx0+bx1)_{n+1}/2 − (bx0+bx1)_n/2
//
// and center_y(n) − (by0+by1)_n/2 is the same baseline for every n.
func TestGlyphRowAgainstFontMetrics(t *testing.T) {
	const chars = "AHMOSVWabdefgjkpqxyz0123456789&@"
	fonts := []struct {
		name string
		ttf  []byte
	}{{"goregular", goregular.TTF}, {"gomonobold", gomonobold.TTF}}
	for _, fnt := range fonts {
		for _, size := range []int{32, 64} {
			t.Run(fmt.Sprintf("%s/%d", fnt.name, size), func(t *testing.T) {
				met := readMetrics(t, fnt.ttf, chars, size)
				src := fmt.Sprintf(`name: glyph-probe
canvas:
  width: %d
  height: %d
  mode: gray
  antialias: false
classes:
  - name: char
    color: [255, 255, 255]
layers:
  - layout:
      kind: row
      spacing: 0
      baseline_jitter: 0
      least_pixels: 1
      least_shown: 0
    objects:
      - class: char
        glyph:
          font: %s
          chars: %q
        count: 6
        size: %d
        angle: 0
        intensity: 255
`, 8*size, 2*size, fnt.name, chars, size)
				r, err := ParseRecipe("glyph-probe.yaml", []byte(src))
				if err != nil {
					t.Fatal(err)
				}
				rd := NewRenderer(r)
				const tol = 1e-3 + 1e-9 // centers are recorded to 3 decimals
				for idx := 0; idx < 40; idx++ {
					s, err := rd.Generate(7, idx)
					if err != nil {
						t.Fatal(err)
					}
					objs := s.Record.Objects
					if len(objs) != 6 {
						t.Fatalf("sample %d: %d glyphs, want 6", idx, len(objs))
					}
					stats := measureGray16(s.Instances)
					var ms []sfntMetrics
					for _, o := range objs {
						if o.Shape != "glyph" || o.Font != fnt.name || *o.Size != float64(size) || *o.Angle != 0 || *o.Aspect != 1 {
							t.Fatalf("sample %d: unexpected object %+v", idx, o)
						}
						ms = append(ms, met[[]rune(o.Glyph)[0]])
					}

					// (a) Successive centers differ by the sfnt advance of
					// the previous glyph plus the half-width difference of
					// the ink bounds; all glyphs share one baseline.
					base := objs[0].Center[1] - (ms[0].by0+ms[0].by1)/2
					for n := 1; n < len(objs); n++ {
						got := objs[n].Center[0] - objs[n-1].Center[0]
						want := ms[n-1].adv + (ms[n].bx0+ms[n].bx1)/2 - (ms[n-1].bx0+ms[n-1].bx1)/2
						if math.Abs(got-want) > tol {
							t.Errorf("sample %d: %q→%q: center step %.4f px, sfnt metrics give %.4f", idx, objs[n-1].Glyph, objs[n].Glyph, got, want)
						}
						b := objs[n].Center[1] - (ms[n].by0+ms[n].by1)/2
						if math.Abs(b-base) > tol {
							t.Errorf("sample %d: glyph %d %q sits on baseline %.4f, glyph 0 on %.4f", idx, n, objs[n].Glyph, b, base)
						}
					}

					// (b) Each glyph's mask box lies within its sfnt ink
					// bounds placed at its pen and the baseline, grown by 1
					// px, and (size ≥ 20) contains those bounds shrunk by
					// 1 px: the rendered ink matches the font's bounds.
					//
					// Outer: a pixel outside the ink box has no coverage,
					// so the mask box is within floor/ceil of the bounds.
					// Inner: holds where the ink reaches its bound with a
					// flat side or a round one. It does not hold at an
					// acute tip: goregular's "k" has its rightmost point at
					// the 52° corner where its leg meets the baseline. For
					// sample 11 at size 32 we clipped that (all-line)
					// outline against each pixel square (Sutherland–Hodgman)
					// and took the shoelace area once, by hand: the pixels
					// just inside the 1 px margin are covered 0.39 and 0.28,
					// under the mask's 0.5 rule, so the mask rightly stops
					// about 1.03 px short of x1 there; for that glyph the
					// right side is left out of the inner check.
					pen := objs[0].Center[0] - (ms[0].bx0+ms[0].bx1)/2
					for n, o := range objs {
						m := ms[n]
						ink := [4]float64{pen + m.bx0, base + m.by0, pen + m.bx1, base + m.by1}
						pen += m.adv
						st := stats[o.Instance]
						if st == nil {
							t.Errorf("sample %d: glyph %q has no mask pixels", idx, o.Glyph)
							continue
						}
						bb := st.bbox
						outer := float64(bb[0]) >= ink[0]-1 && float64(bb[1]) >= ink[1]-1 && float64(bb[2]) <= ink[2]+1 && float64(bb[3]) <= ink[3]+1
						inner := float64(bb[0]) <= ink[0]+1 && float64(bb[1]) <= ink[1]+1 && float64(bb[3]) >= ink[3]-1
						if !(fnt.name == "goregular" && o.Glyph == "k") {
							inner = inner && float64(bb[2]) >= ink[2]-1
						}
						if !outer {
							t.Errorf("sample %d: glyph %q mask box %v leaves the sfnt ink bounds %.3f grown by 1 px", idx, o.Glyph, bb, ink)
						}
						if size >= 20 && !inner {
							t.Errorf("sample %d: glyph %q mask box %v does not reach the sfnt ink bounds %.3f shrunk by 1 px", idx, o.Glyph, bb, ink)
						}
					}
				}
			})
		}
	}
}
