package gen

import (
	"bytes"
	"fmt"
	"image"
	"os"
	"path/filepath"
	"testing"

	"github.com/trueset/trueset/internal/yamlnode"
	"github.com/trueset/trueset/manifest"
)

// Bounds that keep one fuzz execution fast: the parser itself takes up to
// MaxRecipeBytes and 4096×4096 canvases, but rendering those is a benchmark,
// not a fuzz input.
const (
	fuzzRecipeMaxBytes = 64 << 10
	fuzzRecipeMaxSide  = 256
	fuzzRecipeMaxObjs  = 50
)

// fuzzRecipeSeeds are the project's real recipes: every built-in preset and
// every recipe under testdata/recipes, plus broken variants of each
// (truncated halfway, one bit flipped, a tab where YAML wants spaces).
func fuzzRecipeSeeds(tb testing.TB) [][]byte {
	tb.Helper()
	var real [][]byte
	for _, name := range PresetNames() {
		b, err := PresetYAML(name)
		if err != nil {
			tb.Fatal(err)
		}
		real = append(real, b)
	}
	files, err := filepath.Glob("../testdata/recipes/*.yaml")
	if err != nil || len(files) == 0 {
		tb.Fatalf("no recipes under testdata/recipes: %v", err)
	}
	for _, p := range files {
		b, err := os.ReadFile(p)
		if err != nil {
			tb.Fatal(err)
		}
		real = append(real, b)
	}
	out := append([][]byte(nil), real...)
	for _, b := range real {
		out = append(out, b[:len(b)/2])
		flipped := bytes.Clone(b)
		flipped[len(flipped)/3] ^= 0x04
		out = append(out, flipped)
		out = append(out, bytes.Replace(b, []byte("  "), []byte("\t"), 1))
	}
	out = append(out, []byte(""), []byte("name: x\n"), []byte("{}"), []byte("[1, 2]"),
		[]byte("name: x\ncanvas: {width: 8, height: 8}\nclasses: [{name: a, color: [1, 2, 3]}]\nlayers: [{objects: [{class: a, shape: circle, count: 1, size: 4}]}]\n"),
		[]byte(fuzzShapesRecipe))
	return out
}

// fuzzShapesRecipe reaches the shapes and fields the presets do not use, so
// the fuzzer starts from every shape kind.
const fuzzShapesRecipe = `name: shapes
canvas: {width: 48, height: 40, antialias: false}
background: {kind: noise, intensity: [10, 40], cell: 4}
classes:
  - {name: a, color: [255, 0, 0]}
  - {name: b, color: [0, 255, 0]}
  - {name: d, color: [0, 0, 255]}
layers:
  - layout: {kind: scatter, max_overlap: 0.3, least_shown: 0.2, least_pixels: 2, region: [0, 0, 40, 40]}
    objects:
      - {class: a, shape: polygon, sides: [3, 8], count: {0: 1, 2: 3}, size: [6, 9], aspect: [0.5, 2], angle: [-180, 180], value: [1, 9]}
      - {class: a, shape: star, sides: 5, inner: [0.3, 0.6], count: 1, size: 8}
      - {class: b, shape: ring, inner: 0.5, count: [0, 1], size: 8}
      - {class: b, shape: cross, thickness: 0.3, count: 1, size: 8}
      - {class: b, shape: bar, count: 1, size: 3, aspect: 4}
      - {class: b, shape: triangle, count: 1, size: 7, intensity: [100, 200]}
  - layout: {kind: grid, rows: 1, cols: 2, jitter: 1}
    objects:
      - class: d
        glyph: {font: gomono, chars: "0123456789"}
        count: [1, 2]
        size: 12
        value: digit
targets:
  - {name: n, kind: count}
  - {name: s, kind: sum, of: value, classes: [a]}
  - {name: lo, kind: min, of: size}
  - {name: hi, kind: max, of: angle}
  - {name: m, kind: mean, of: area, classes: [b]}
split: {ratios: "train=0.5,test=0.5", stratify: n}
`

// fuzzRecipeObjects is the most objects (parts included) one scene of r may
// hold, as validate counts them.
func fuzzRecipeObjects(r *Recipe) int {
	n := 0
	for _, L := range r.Layers {
		for _, o := range L.Objects {
			per := 1
			for _, p := range o.Parts {
				per += p.Count.Max
			}
			n += o.Count.Max * per
		}
	}
	return n
}

// FuzzParseRecipe feeds any bytes to ParseRecipe. It must never panic; a
// refusal is a *RecipeError that says something; an accepted recipe renders
// sample 0 without panicking, and what it renders stays inside the canvas
// and encodes as a manifest record.
func FuzzParseRecipe(f *testing.F) {
	for _, b := range fuzzRecipeSeeds(f) {
		f.Add(b)
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) > fuzzRecipeMaxBytes {
			t.Skip("over 64 KiB")
		}
		r, err := ParseRecipe("fuzz.yaml", b)
		if err != nil {
			re, ok := err.(*RecipeError)
			if !ok {
				t.Fatalf("ParseRecipe error is %T, not *RecipeError: %v", err, err)
			}
			if re.Msg == "" {
				t.Fatalf("RecipeError with an empty Msg: %#v", re)
			}
			if r != nil {
				t.Fatalf("ParseRecipe returned a recipe and an error: %v", err)
			}
			return
		}
		if r == nil {
			t.Fatal("ParseRecipe returned neither a recipe nor an error")
		}
		W, H := r.Canvas.Width, r.Canvas.Height
		if W < 1 || H < 1 || W > MaxCanvasSide || H > MaxCanvasSide {
			t.Fatalf("accepted canvas %d×%d outside 1..%d", W, H, MaxCanvasSide)
		}
		if W > fuzzRecipeMaxSide || H > fuzzRecipeMaxSide || fuzzRecipeObjects(r) > fuzzRecipeMaxObjs {
			t.Skip("too big to render in a fuzz execution")
		}
		s, err := NewRenderer(r).Generate(1, 0)
		if err != nil {
			return // a recipe may be unplaceable (LayoutError) or invisible; that is reported, not a crash
		}
		checkFuzzSample(t, r, s)
	})
}

// checkFuzzSample checks what a rendered sample promises: every raster is
// the canvas size, every object's box lies inside it and holds its area, mask
// values are class ids, and the record encodes.
func checkFuzzSample(t *testing.T, r *Recipe, s *Sample) {
	t.Helper()
	W, H := r.Canvas.Width, r.Canvas.Height
	frame := image.Rect(0, 0, W, H)
	if s.Image == nil || s.Mask == nil || s.Instances == nil {
		t.Fatal("sample without image, mask or instances")
	}
	if s.Image.Bounds() != frame || s.Mask.Rect != frame || s.Instances.Rect != frame {
		t.Fatalf("rasters %v, %v, %v; want %v", s.Image.Bounds(), s.Mask.Rect, s.Instances.Rect, frame)
	}
	if s.Record.Width != W || s.Record.Height != H {
		t.Fatalf("record says %d×%d, canvas is %d×%d", s.Record.Width, s.Record.Height, W, H)
	}
	for _, v := range s.Mask.Pix {
		if int(v) > len(r.Classes) {
			t.Fatalf("mask value %d; the recipe has %d classes", v, len(r.Classes))
		}
	}
	stats := manifest.MeasureInstances(s.Instances)
	if len(stats) != len(s.Record.Objects) {
		t.Fatalf("%d instance ids in the mask, %d objects in the record", len(stats), len(s.Record.Objects))
	}
	for _, o := range s.Record.Objects {
		b := o.Box
		if b[0] < 0 || b[1] < 0 || b[2] > W || b[3] > H || b[0] >= b[2] || b[1] >= b[3] {
			t.Fatalf("object %d: bbox %v outside the %d×%d canvas or empty", o.Instance, b, W, H)
		}
		if o.Area < 1 || o.Area > (b[2]-b[0])*(b[3]-b[1]) {
			t.Fatalf("object %d: area %d does not fit its bbox %v", o.Instance, o.Area, b)
		}
		if o.Shown <= 0 || o.Shown > 1 {
			t.Fatalf("object %d: visible %v outside (0, 1]", o.Instance, o.Shown)
		}
		if o.Class < 1 || o.Class > len(r.Classes) {
			t.Fatalf("object %d: class %d; the recipe has %d classes", o.Instance, o.Class, len(r.Classes))
		}
		st := stats[o.Instance]
		if st == nil || st.Area != o.Area || st.BBox != o.Box {
			t.Fatalf("object %d: record says area %d bbox %v, the instance mask says %+v", o.Instance, o.Area, o.Box, st)
		}
	}
	if _, err := manifest.MarshalRecord(&s.Record); err != nil {
		t.Fatalf("rendered record does not encode: %v", err)
	}
}

// fuzzScene is one layer of one object kind, with optional parts: the
// numbers FuzzRenderRecipe varies. Byte mutations of recipe text almost
// never give a valid recipe, so this target writes valid YAML around fuzzed
// numbers to reach the planner and the rasterizer with extreme geometry.
type fuzzScene struct {
	W, H             uint16
	Shape            uint8 // index into shapeKinds; len(shapeKinds) = a glyph
	Layout           uint8 // scatter, row, grid
	Rows, Cols       uint8
	Count            uint8
	Size0, Size1     float64
	Aspect0, Aspect1 float64
	Angle0, Angle1   float64
	Param            float64 // inner, corner or thickness, as the shape takes
	Sides            uint8
	Parts            uint8
	PartSize         float64
	Pips             bool
	Overlap, Visible float64
	Chars            string
	Antialias, RGB   bool
	Background       uint8 // solid, gradient, noise
}

func (sc fuzzScene) yaml() []byte {
	ff := yamlnode.FormatFloat
	var b bytes.Buffer
	mode := "gray"
	if sc.RGB {
		mode = "rgb"
	}
	fmt.Fprintf(&b, "name: fuzz\ncanvas: {width: %d, height: %d, mode: %s, antialias: %t}\n", sc.W, sc.H, mode, sc.Antialias)
	switch sc.Background % 3 {
	case 1:
		b.WriteString("background: {kind: gradient, intensity: [0, 80], end_intensity: 200}\n")
	case 2:
		b.WriteString("background: {kind: noise, intensity: [0, 90], cell: [1, 5]}\n")
	}
	b.WriteString("classes:\n  - {name: a, color: [200, 0, 0]}\n  - {name: p, color: [0, 200, 0]}\nlayers:\n  - layout:\n")
	layout := []string{"scatter", "row", "grid"}[sc.Layout%3]
	fmt.Fprintf(&b, "      kind: %s\n      max_overlap: %s\n      least_shown: %s\n      least_pixels: 1\n", layout, ff(sc.Overlap), ff(sc.Visible))
	if layout == "grid" {
		fmt.Fprintf(&b, "      rows: %d\n      cols: %d\n", sc.Rows, sc.Cols)
	}
	b.WriteString("    objects:\n      - class: a\n")
	if int(sc.Shape)%(len(shapeKinds)+1) == len(shapeKinds) {
		fmt.Fprintf(&b, "        glyph: {font: goregular, chars: %q}\n", sc.Chars)
	} else {
		shape := shapeKinds[int(sc.Shape)%(len(shapeKinds)+1)]
		fmt.Fprintf(&b, "        shape: %s\n", shape)
		switch shape {
		case "polygon", "star":
			fmt.Fprintf(&b, "        sides: %d\n", sc.Sides)
		}
		switch shape {
		case "star", "ring":
			fmt.Fprintf(&b, "        inner: %s\n", ff(sc.Param))
		case "rounded-rectangle":
			fmt.Fprintf(&b, "        corner: %s\n", ff(sc.Param))
		case "cross":
			fmt.Fprintf(&b, "        thickness: %s\n", ff(sc.Param))
		}
	}
	fmt.Fprintf(&b, "        count: [0, %d]\n        size: [%s, %s]\n        aspect: [%s, %s]\n        angle: [%s, %s]\n",
		sc.Count, ff(sc.Size0), ff(sc.Size1), ff(sc.Aspect0), ff(sc.Aspect1), ff(sc.Angle0), ff(sc.Angle1))
	if sc.Parts > 0 {
		arr := "scatter"
		if sc.Pips {
			arr = "pips"
		}
		fmt.Fprintf(&b, "        value: parts\n        parts:\n          - {class: p, shape: circle, arrangement: %s, count: [0, %d], size: %s}\n", arr, sc.Parts, ff(sc.PartSize))
	}
	b.WriteString("targets:\n  - {name: n, kind: count}\n  - {name: m, kind: mean, of: area}\n  - {name: s, kind: sum, of: size, classes: [p]}\n")
	return b.Bytes()
}

// FuzzRenderRecipe renders sample 0 of valid-looking recipes whose numbers
// the fuzzer picks (canvas, shape, layout, counts, sizes, aspects, angles,
// shape parameters, parts). A refusal must be a *RecipeError; an accepted
// recipe must render without panicking and keep its labels inside the canvas.
func FuzzRenderRecipe(f *testing.F) {
	add := func(sc fuzzScene) {
		f.Add(sc.W, sc.H, sc.Shape, sc.Layout, sc.Rows, sc.Cols, sc.Count, sc.Size0, sc.Size1, sc.Aspect0, sc.Aspect1,
			sc.Angle0, sc.Angle1, sc.Param, sc.Sides, sc.Parts, sc.PartSize, sc.Pips, sc.Overlap, sc.Visible, sc.Chars,
			sc.Antialias, sc.RGB, sc.Background)
	}
	base := fuzzScene{W: 64, H: 64, Count: 4, Size0: 8, Size1: 14, Aspect0: 0.5, Aspect1: 2, Angle0: -90, Angle1: 90,
		Param: 0.4, Sides: 5, Overlap: 0.2, Visible: 0.5, Chars: "A1g", Antialias: true, Rows: 2, Cols: 3}
	for shape := 0; shape <= len(shapeKinds); shape++ {
		sc := base
		sc.Shape = uint8(shape)
		sc.Background = uint8(shape)
		sc.RGB = shape%2 == 1
		add(sc)
	}
	for layout := uint8(0); layout < 3; layout++ {
		sc := base
		sc.Layout = layout
		sc.Shape = uint8(len(shapeKinds)) // glyphs, so the row layout is valid too
		add(sc)
		sc.Shape = 0
		sc.Parts, sc.PartSize, sc.Pips = 6, 0.2, layout == 2
		sc.Size0, sc.Size1 = 20, 24
		add(sc)
	}
	tiny := base
	tiny.W, tiny.H, tiny.Size0, tiny.Size1, tiny.Count, tiny.Antialias = 1, 1, 0.5, 1, 1, false
	add(tiny)
	thin := base
	thin.W, thin.H, thin.Shape, thin.Aspect0, thin.Aspect1, thin.Size0, thin.Size1 = 256, 3, 1, 20, 20, 0.01, 3
	add(thin)
	f.Fuzz(func(t *testing.T, w, h uint16, shape, layout, rows, cols, count uint8, size0, size1, aspect0, aspect1,
		angle0, angle1, param float64, sides, parts uint8, partSize float64, pips bool, overlap, visible float64,
		chars string, antialias, rgb bool, background uint8) {
		sc := fuzzScene{w, h, shape, layout, rows, cols, count, size0, size1, aspect0, aspect1, angle0, angle1, param,
			sides, parts, partSize, pips, overlap, visible, chars, antialias, rgb, background}
		r, err := ParseRecipe("fuzz.yaml", sc.yaml())
		if err != nil {
			if re, ok := err.(*RecipeError); !ok || re.Msg == "" {
				t.Fatalf("ParseRecipe error %T %v; want a *RecipeError with a message", err, err)
			}
			return
		}
		if r.Canvas.Width > fuzzRecipeMaxSide || r.Canvas.Height > fuzzRecipeMaxSide || fuzzRecipeObjects(r) > fuzzRecipeMaxObjs {
			t.Skip("too big to render in a fuzz execution")
		}
		s, err := NewRenderer(r).Generate(1, 0)
		if err != nil {
			return
		}
		checkFuzzSample(t, r, s)
	})
}
