package augment

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// ptBase is a valid plan; every case below is one edit away from it. The
// line numbers in the table refer to this text.
const ptBase = `name: base
geometry:
  outside:
    image: tone
    classes: background
  cuts:
    policy: redraw
    least_shown: 0.5
  moves:
    - do: flip
      axis: horizontal
      chance: 0.5
    - do: rotate
      angle: [-10, 10]
    - do: crop
      area: [0.6, 1]
    - do: resize
      to: [32, 32]
pixels:
  - do: jpeg
    quality: [60, 90]
  - do: cutout
    size: [2, 4]
    classes: keep
  - do: pick
    from:
      - do: blur
        sigma: 1
      - do: brightness
        delta: [-5, 5]
    odds: [1, 2]
  - do: gaussian-noise
    sigma: [1, 3]
`

// ptEdit replaces exactly one occurrence of old in s.
func ptEdit(t *testing.T, s, old, new string) string {
	t.Helper()
	if n := strings.Count(s, old); n != 1 {
		t.Fatalf("edit: %q occurs %d times", old, n)
	}
	return strings.Replace(s, old, new, 1)
}

func TestParsePlanBaseIsValid(t *testing.T) {
	if _, err := ParsePlan("base.yaml", []byte(ptBase)); err != nil {
		t.Fatal(err)
	}
}

// ptCase is a plan trueset must refuse: at line, with the field path, and a
// message holding every piece of want and none of not.
type ptCase struct {
	name string
	doc  string
	line int
	path string
	want []string
	not  []string
}

func ptCheck(t *testing.T, cases []ptCase) {
	t.Helper()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p, err := ParsePlan("bad.yaml", []byte(c.doc))
			if err == nil {
				t.Fatalf("accepted: %s", p.JSON())
			}
			var pe *PlanError
			if !errors.As(err, &pe) {
				t.Fatalf("error %T is not a *PlanError: %v", err, err)
			}
			if pe.File != "bad.yaml" {
				t.Errorf("File %q, want bad.yaml", pe.File)
			}
			if pe.Line != c.line || pe.Path != c.path {
				t.Errorf("at line %d path %q, want line %d path %q (%v)", pe.Line, pe.Path, c.line, c.path, err)
			}
			msg := err.Error()
			for _, w := range c.want {
				if !strings.Contains(msg, w) {
					t.Errorf("message %q lacks %q", msg, w)
				}
			}
			for _, w := range c.not {
				if strings.Contains(msg, w) {
					t.Errorf("message %q holds %q", msg, w)
				}
			}
			if c.line > 0 && !strings.HasPrefix(msg, fmt.Sprintf("bad.yaml:%d:", c.line)) {
				t.Errorf("message %q does not start with bad.yaml:%d:", msg, c.line)
			}
		})
	}
}

// Each malformed plan is refused with a *PlanError at the exact line and
// field path, and its message names the bad value or what is allowed.
func TestParsePlanRefusals(t *testing.T) {
	huge := ptBase + "# " + strings.Repeat("x", MaxPlanBytes) + "\n"
	pixelOps := []string{"blur", "gaussian-noise", "jpeg"}
	cases := []ptCase{
		{"unknown op", ptEdit(t, ptBase, "do: rotate", "do: twirl"),
			13, "geometry.moves[1].do", []string{`"twirl"`, "unknown step", "under geometry.moves", "rotate", "warp", "pick"}, pixelOps},
		{"unknown field", ptEdit(t, ptBase, "angle: [-10, 10]\n", "angle: [-10, 10]\n      radius: 3\n"),
			15, "geometry.moves[1].radius", []string{`unknown field "radius" for rotate`, "rotate takes angle, grow_canvas (and do, chance)"}, []string{"sigma", "axis"}},
		{"unknown field of a noise step", ptEdit(t, ptBase, "    sigma: [1, 3]\n", "    sigma: [1, 3]\n    p: 0.5\n"),
			34, "pixels[3].p", []string{`unknown field "p" for gaussian-noise`, "gaussian-noise takes sigma (and do, chance)"}, []string{"delta", "axis", "fraction", "quality"}},
		{"misspelt chance", ptEdit(t, ptBase, "    sigma: [1, 3]\n", "    sigma: [1, 3]\n    chanse: 0.5\n"),
			34, "pixels[3].chanse", []string{`unknown field "chanse" for gaussian-noise`, `did you mean "chance"?`}, nil},
		{"unknown top-level field", ptEdit(t, ptBase, "name: base\n", "name: base\nseed: 7\n"),
			2, "seed", []string{`unknown field "seed"`, "geometry", "pixels"}, nil},
		{"field of another op", ptEdit(t, ptBase, "chance: 0.5\n", "chance: 0.5\n      sigma: 2\n"),
			13, "geometry.moves[0].sigma", []string{"flip does not take sigma; it takes axis (and do, chance)"}, nil},
		{"zero-valued field of another op", ptEdit(t, ptBase, "chance: 0.5\n", "chance: 0.5\n      grow_canvas: false\n"),
			13, "geometry.moves[0].grow_canvas", []string{"flip does not take grow_canvas"}, nil},
		{"null field of another op", ptEdit(t, ptBase, "chance: 0.5\n", "chance: 0.5\n      sigma: ~\n"),
			13, "geometry.moves[0].sigma", []string{"flip does not take sigma"}, nil},
		{"field given twice", ptEdit(t, ptBase, "axis: horizontal\n", "axis: horizontal\n      axis: vertical\n"),
			12, "geometry.moves[0].axis", []string{`"axis" is given twice`}, nil},
		{"flip without a known axis", ptEdit(t, ptBase, "axis: horizontal", "axis: diagonal"),
			11, "geometry.moves[0].axis", []string{`"diagonal"`, "horizontal or vertical"}, nil},
		{"flip without an axis", ptEdit(t, ptBase, "      axis: horizontal\n", ""),
			10, "geometry.moves[0].axis", []string{"flip needs axis: horizontal or vertical"}, []string{"(got"}},
		{"chance over 1", ptEdit(t, ptBase, "chance: 0.5", "chance: 1.5"),
			12, "geometry.moves[0].chance", []string{"1.5", "0..1"}, nil},
		{"inverted range", ptEdit(t, ptBase, "angle: [-10, 10]", "angle: [10, -10]"),
			14, "geometry.moves[1].angle", []string{"minimum 10 is greater than maximum -10", "min ≤ max"}, nil},
		{"range of three numbers", ptEdit(t, ptBase, "angle: [-10, 10]", "angle: [1, 2, 3]"),
			14, "geometry.moves[1].angle", []string{"[1, 2, 3]", "[min, max] with two numbers"}, nil},
		{"string for a number", ptEdit(t, ptBase, "sigma: 1", "sigma: soft"),
			28, "pixels[2].from[0].sigma", []string{`"soft"`, "want a number"}, nil},
		{"angle out of bounds", ptEdit(t, ptBase, "angle: [-10, 10]", "angle: [-10, 4000]"),
			14, "geometry.moves[1].angle", []string{"[-10, 4000]", "[-3600, 3600]"}, nil},
		{"rotate without angle", ptEdit(t, ptBase, "      angle: [-10, 10]\n", ""),
			13, "geometry.moves[1].angle", []string{"rotate needs angle"}, nil},
		{"crop with area and size", ptEdit(t, ptBase, "area: [0.6, 1]\n", "area: [0.6, 1]\n      size: 10\n"),
			15, "geometry.moves[2]", []string{"area", "size", "not both"}, nil},
		{"crop with neither", ptEdit(t, ptBase, "area: [0.6, 1]", "aspect: 1"),
			15, "geometry.moves[2]", []string{"crop needs area", "or size"}, nil},
		{"resize without to", ptEdit(t, ptBase, "      to: [32, 32]\n", ""),
			17, "geometry.moves[3].to", []string{"resize needs to: [width, height]"}, nil},
		{"to with 3 numbers", ptEdit(t, ptBase, "to: [32, 32]", "to: [32, 32, 32]"),
			18, "geometry.moves[3].to", []string{"[32 32 32]", "[width, height]", "1..4096"}, nil},
		{"to too wide", ptEdit(t, ptBase, "to: [32, 32]", "to: [5000, 32]"),
			18, "geometry.moves[3].to", []string{"[5000 32]", "1..4096"}, nil},
		{"jpeg quality 0", ptEdit(t, ptBase, "quality: [60, 90]", "quality: 0"),
			21, "pixels[0].quality", []string{"quality in 1..100"}, nil},
		{"fractional quality", ptEdit(t, ptBase, "quality: [60, 90]", "quality: 60.5"),
			21, "pixels[0].quality", []string{"60.5", "whole numbers"}, nil},
		{"cutout classes erase", ptEdit(t, ptBase, "classes: keep", "classes: erase"),
			24, "pixels[1].classes", []string{`"erase"`, "keep", "ignore"}, nil},
		{"cutout without size", ptEdit(t, ptBase, "    size: [2, 4]\n", ""),
			22, "pixels[1].size", []string{"cutout needs size"}, nil},
		{"pick with mismatched odds", ptEdit(t, ptBase, "odds: [1, 2]", "odds: [1, 2, 3]"),
			31, "pixels[2].odds", []string{"[1 2 3]", "one odds value per step in from (2)"}, nil},
		{"pick with negative odds", ptEdit(t, ptBase, "odds: [1, 2]", "odds: [1, -2]"),
			31, "pixels[2].odds", []string{"[1 -2]", "must not be negative"}, nil},
		{"pick with zero odds", ptEdit(t, ptBase, "odds: [1, 2]", "odds: [0, 0]"),
			31, "pixels[2].odds", []string{"[0 0]", "more than 0"}, nil},
		{"pick without from", ptEdit(t, ptBase, "    from:\n      - do: blur\n        sigma: 1\n      - do: brightness\n        delta: [-5, 5]\n", ""),
			25, "pixels[2].from", []string{"pick needs from"}, nil},
		{"nested pick", ptEdit(t, ptBase, "      - do: blur\n        sigma: 1\n", "      - do: pick\n        from: [{do: blur, sigma: 1}]\n"),
			27, "pixels[2].from[0]", []string{"pick cannot hold another pick"}, nil},
		{"a move under pixels", ptEdit(t, ptBase, "  - do: jpeg\n    quality: [60, 90]\n", "  - do: rotate\n    angle: 3\n"),
			20, "pixels[0].do", []string{`"rotate"`, "belongs under geometry.moves"}, nil},
		{"a pixel step under moves", ptEdit(t, ptBase, "    - do: crop\n      area: [0.6, 1]\n", "    - do: blur\n      sigma: 1\n"),
			15, "geometry.moves[2].do", []string{`"blur"`, "belongs under pixels"}, nil},
		{"a move picked under pixels", ptEdit(t, ptBase, "      - do: blur\n        sigma: 1\n", "      - do: flip\n        axis: vertical\n"),
			27, "pixels[2].from[0].do", []string{`"flip"`, "belongs under geometry.moves"}, nil},
		{"outside image wrap", ptEdit(t, ptBase, "image: tone", "image: wrap"),
			4, "geometry.outside.image", []string{`"wrap"`, "tone", "extend", "mirror"}, nil},
		{"outside tone of two", ptEdit(t, ptBase, "    image: tone\n", "    image: tone\n    tone: [1, 2]\n"),
			5, "geometry.outside.tone", []string{"[1 2]", "[r, g, b]"}, nil},
		{"outside tone 256", ptEdit(t, ptBase, "    image: tone\n", "    image: tone\n    tone: 256\n"),
			5, "geometry.outside.tone", []string{"(got 256)", "0..255"}, nil},
		{"sampling nearest", ptEdit(t, ptBase, "geometry:\n", "geometry:\n  sampling: nearest\n"),
			3, "geometry.sampling", []string{`"nearest"`, "bilinear or bicubic"}, nil},
		{"outside classes other", ptEdit(t, ptBase, "classes: background", "classes: other"),
			5, "geometry.outside.classes", []string{`"other"`, "background or ignore"}, nil},
		{"cuts policy skip", ptEdit(t, ptBase, "policy: redraw", "policy: skip"),
			7, "geometry.cuts.policy", []string{`"skip"`, "redraw", "drop", "keep"}, nil},
		{"cuts.least_shown 2", ptEdit(t, ptBase, "least_shown: 0.5", "least_shown: 2"),
			8, "geometry.cuts.least_shown", []string{"(got 2)", "fraction in 0..1"}, nil},
		{"cuts.tries 5000", ptEdit(t, ptBase, "    least_shown: 0.5\n", "    least_shown: 0.5\n    tries: 5000\n"),
			9, "geometry.cuts.tries", []string{"5000", "1..1000"}, nil},
		{"no steps", "name: e\ngeometry:\n  moves: []\npixels: []\n",
			4, "pixels", []string{"at least one step", "geometry.moves or pixels"}, nil},
		{"no sections", "name: e\n",
			1, "", []string{"at least one step"}, nil},
		{"missing name", ptEdit(t, ptBase, "name: base\n", ""),
			1, "name", []string{"a plan needs a name"}, nil},
		{"alias", ptEdit(t, ptBase, "      - do: brightness\n        delta: [-5, 5]\n", "      - &b {do: brightness, delta: 1}\n      - *b\n"),
			30, "pixels[2].from[2]", []string{"aliases are not allowed"}, nil},
		{"YAML syntax error", ptEdit(t, ptBase, "axis: horizontal", "axis: horizontal: 3"),
			11, "", []string{"YAML syntax", "mapping values are not allowed"}, nil},
		{"plan over the size bound", huge,
			0, "", []string{fmt.Sprintf("%d bytes", len(huge)), fmt.Sprintf("at most %d", MaxPlanBytes)}, nil},
	}
	if len(cases) < 20 {
		t.Fatalf("only %d cases", len(cases))
	}
	ptCheck(t, cases)
}

// The names of the earlier flat syntax are refused where they stand, with
// the name trueset uses now.
func TestParsePlanRefusesOldNames(t *testing.T) {
	old := "name: old\nsteps:\n  - op: flip\n    axis: horizontal\n"
	warp := func(field string) string {
		return "name: w\ngeometry:\n  moves:\n    - do: warp\n      " + field + ": 1.1\n"
	}
	cases := []ptCase{
		{"steps", old, 2, "steps", []string{`unknown field "steps"`, "geometry.moves", "pixels"}, nil},
		{"interpolation", ptEdit(t, ptBase, "name: base\n", "name: base\ninterpolation: bicubic\n"),
			2, "interpolation", []string{`unknown field "interpolation"`, "geometry.sampling"}, nil},
		{"fill", ptEdit(t, ptBase, "name: base\n", "name: base\nfill: {mode: edge}\n"),
			2, "fill", []string{`unknown field "fill"`, "geometry.outside"}, nil},
		{"mask_fill", ptEdit(t, ptBase, "name: base\n", "name: base\nmask_fill: ignore\n"),
			2, "mask_fill", []string{`unknown field "mask_fill"`, "geometry.outside.classes"}, nil},
		{"cut", ptEdit(t, ptBase, "name: base\n", "name: base\ncut: {policy: drop}\n"),
			2, "cut", []string{`unknown field "cut"`, "geometry.cuts"}, nil},
		{"interpolation in geometry", ptEdit(t, ptBase, "geometry:\n", "geometry:\n  interpolation: bicubic\n"),
			3, "geometry.interpolation", []string{`unknown field "interpolation"`, "sampling"}, nil},
		{"steps in geometry", ptEdit(t, ptBase, "  moves:\n", "  steps:\n"),
			9, "geometry.steps", []string{`unknown field "steps"`, "moves"}, nil},
		{"fill mode", ptEdit(t, ptBase, "image: tone", "mode: constant"),
			4, "geometry.outside.mode", []string{`unknown field "mode"`, "image"}, nil},
		{"fill intensity", ptEdit(t, ptBase, "    image: tone\n", "    image: tone\n    intensity: 3\n"),
			5, "geometry.outside.intensity", []string{`unknown field "intensity"`, "tone"}, nil},
		{"fill color", ptEdit(t, ptBase, "    image: tone\n", "    image: tone\n    color: [1, 2, 3]\n"),
			5, "geometry.outside.color", []string{`unknown field "color"`, "tone"}, nil},
		{"constant", ptEdit(t, ptBase, "image: tone", "image: constant"),
			4, "geometry.outside.image", []string{`"constant"`, "trueset calls it tone"}, nil},
		{"edge", ptEdit(t, ptBase, "image: tone", "image: edge"),
			4, "geometry.outside.image", []string{`"edge"`, "trueset calls it extend"}, nil},
		{"reflect", ptEdit(t, ptBase, "image: tone", "image: reflect"),
			4, "geometry.outside.image", []string{`"reflect"`, "trueset calls it mirror"}, nil},
		{"resample", ptEdit(t, ptBase, "policy: redraw", "policy: resample"),
			7, "geometry.cuts.policy", []string{`"resample"`, "trueset calls it redraw"}, nil},
		{"min_visible", ptEdit(t, ptBase, "least_shown: 0.5", "min_visible: 0.5"),
			8, "geometry.cuts.min_visible", []string{`unknown field "min_visible"`, "least_shown"}, nil},
		{"op", ptEdit(t, ptBase, "  - do: jpeg", "  - op: jpeg"),
			20, "pixels[0].op", []string{`unknown field "op"`, `trueset spells it "do"`}, nil},
		{"one-of", ptEdit(t, ptBase, "do: pick", "do: one-of"),
			25, "pixels[2].do", []string{`"one-of"`, "trueset calls this step pick", "from", "odds"}, nil},
		{"affine", ptEdit(t, ptBase, "do: rotate\n      angle: [-10, 10]", "do: affine\n      scale: 1.1"),
			13, "geometry.moves[1].do", []string{`"affine"`, "trueset calls this step warp", "zoom", "shift", "slant"}, nil},
		{"degrees on rotate", ptEdit(t, ptBase, "angle: [-10, 10]", "degrees: [-10, 10]"),
			14, "geometry.moves[1].degrees", []string{`unknown field "degrees"`, `trueset spells it "angle"`}, nil},
		{"expand", ptEdit(t, ptBase, "angle: [-10, 10]\n", "angle: [-10, 10]\n      expand: true\n"),
			15, "geometry.moves[1].expand", []string{`unknown field "expand"`, `trueset spells it "grow_canvas"`}, nil},
		{"output", ptEdit(t, ptBase, "to: [32, 32]", "output: [32, 32]"),
			18, "geometry.moves[3].output", []string{`unknown field "output"`, `trueset spells it "to"`}, nil},
		{"steps in pick", ptEdit(t, ptBase, "    from:\n", "    steps:\n"),
			26, "pixels[2].steps", []string{`unknown field "steps"`, `trueset spells it "from"`}, nil},
		{"weights", ptEdit(t, ptBase, "odds: [1, 2]", "weights: [1, 2]"),
			31, "pixels[2].weights", []string{`unknown field "weights"`, `trueset spells it "odds"`}, nil},
		{"masks", ptEdit(t, ptBase, "classes: keep", "masks: keep"),
			24, "pixels[1].masks", []string{`unknown field "masks"`, `trueset spells it "classes"`}, nil},
		{"value", ptEdit(t, ptBase, "    classes: keep\n", "    classes: keep\n    value: 3\n"),
			25, "pixels[1].value", []string{`unknown field "value"`, `trueset spells it "tone"`}, nil},
		{"hue degrees", "name: h\npixels:\n  - do: hue\n    degrees: 5\n",
			4, "pixels[0].degrees", []string{`unknown field "degrees"`, `trueset spells it "angle"`}, nil},
		{"scale", warp("scale"), 5, "geometry.moves[0].scale", []string{`trueset spells it "zoom"`}, nil},
		{"translate", warp("translate"), 5, "geometry.moves[0].translate", []string{`trueset spells it "shift"`}, nil},
		{"shear", warp("shear"), 5, "geometry.moves[0].shear", []string{`trueset spells it "slant"`}, nil},
	}
	ptCheck(t, cases)
}

func TestParsePlanEmpty(t *testing.T) {
	for _, doc := range []string{"", "# only a comment\n"} {
		_, err := ParsePlan("empty.yaml", []byte(doc))
		var pe *PlanError
		if !errors.As(err, &pe) || !strings.Contains(pe.Msg, "plan is empty") {
			t.Errorf("%q: %v, want a PlanError saying the plan is empty", doc, err)
		}
	}
}

func ptParse(t *testing.T, doc string) *Plan {
	t.Helper()
	p, err := ParsePlan("ok.yaml", []byte(doc))
	if err != nil {
		t.Fatalf("%v\n%s", err, doc)
	}
	return p
}

// Defaults are filled in where a plan leaves a setting out.
func TestParsePlanDefaults(t *testing.T) {
	p := ptParse(t, `name: d
geometry:
  moves:
    - {do: flip, axis: vertical}
    - {do: warp, slant: 3}
pixels:
  - {do: cutout, size: 4}
  - do: pick
    from: [{do: blur, sigma: 1}, {do: gamma, gamma: 2}, {do: contrast, factor: 1.1}]
`)
	g := p.Geometry
	if g.Sampling != "bilinear" {
		t.Errorf("sampling %q, want bilinear", g.Sampling)
	}
	if g.Outside.Image != "tone" || g.Outside.Tone.Level != 0 || g.Outside.Tone.RGB != nil {
		t.Errorf("outside %+v, want tone 0", g.Outside)
	}
	if g.Outside.Classes != "background" {
		t.Errorf("outside.classes %q, want background with image: tone", g.Outside.Classes)
	}
	if g.Cuts.Policy != "redraw" || g.Cuts.LeastShown == nil || *g.Cuts.LeastShown != 0.5 || g.Cuts.Tries != 20 {
		t.Errorf("cuts %+v, want redraw, least_shown 0.5, 20 tries", g.Cuts)
	}
	var walk func(steps []Step)
	walk = func(steps []Step) {
		for _, s := range steps {
			if s.Chance == nil || *s.Chance != 1 {
				t.Errorf("%s: chance %v, want 1", s.Do, s.Chance)
			}
			walk(s.From)
		}
	}
	walk(g.Moves)
	walk(p.Pixels)
	w := g.Moves[1]
	if *w.Zoom != (Range{Min: 1, Max: 1}) || *w.Shift != (Range{}) || *w.Slant != (Range{Min: 3, Max: 3}) {
		t.Errorf("warp zoom %v shift %v slant %v, want 1, 0, 3", *w.Zoom, *w.Shift, *w.Slant)
	}
	cut := p.Pixels[0]
	if *cut.Count != (IntRange{Min: 1, Max: 1}) || *cut.Tone != (Range{}) || cut.Classes != "keep" {
		t.Errorf("cutout count %v tone %v classes %q, want 1, 0, keep", *cut.Count, *cut.Tone, cut.Classes)
	}
	if o := p.Pixels[1].Odds; !reflect.DeepEqual(o, []float64{1, 1, 1}) {
		t.Errorf("pick odds %v, want equal odds [1 1 1]", o)
	}
	// Extended and mirrored pixels show copies of objects the masks cannot
	// name, so their classes default to ignore; a stated classes wins.
	for _, c := range []struct{ image, classes, want string }{
		{"tone", "", "background"},
		{"extend", "", "ignore"},
		{"mirror", "", "ignore"},
		{"extend", "background", "background"},
		{"tone", "ignore", "ignore"},
	} {
		doc := "name: d\ngeometry:\n  outside: {image: " + c.image
		if c.classes != "" {
			doc += ", classes: " + c.classes
		}
		doc += "}\npixels: [{do: blur, sigma: 1}]\n"
		if got := ptParse(t, doc).Geometry.Outside.Classes; got != c.want {
			t.Errorf("image %s, classes %q: got %q, want %q", c.image, c.classes, got, c.want)
		}
	}
	// Stated values are kept, not replaced by defaults.
	p = ptParse(t, "name: d\ngeometry: {sampling: bicubic, cuts: {policy: drop, least_shown: 0, tries: 3}}\npixels: [{do: blur, sigma: 1, chance: 0}]\n")
	if g := p.Geometry; g.Sampling != "bicubic" || g.Cuts.Policy != "drop" || *g.Cuts.LeastShown != 0 || g.Cuts.Tries != 3 || *p.Pixels[0].Chance != 0 {
		t.Errorf("stated values changed: %s", p.JSON())
	}
	// A gray tone and a color tone.
	if tn := ptParse(t, "name: d\ngeometry: {outside: {tone: 12.5}}\npixels: [{do: blur, sigma: 1}]\n").Geometry.Outside.Tone; tn.Level != 12.5 || tn.RGB != nil {
		t.Errorf("tone 12.5 read as %+v", tn)
	}
	if tn := ptParse(t, "name: d\ngeometry: {outside: {tone: [1, 2, 3]}}\npixels: [{do: blur, sigma: 1}]\n").Geometry.Outside.Tone; !reflect.DeepEqual(tn.RGB, []int{1, 2, 3}) {
		t.Errorf("tone [1, 2, 3] read as %+v", tn)
	}
}

// Plan.JSON (what dataset.json stores) parses back, as a plan, to the same
// JSON: JSON is YAML 1.2 flow syntax, so ParsePlan reads it as it is.
func TestPlanJSONRoundTrip(t *testing.T) {
	docs := map[string]string{"base": ptBase}
	for _, glob := range []string{"../testdata/plans/*.yaml", "../examples/plans/*.yaml", "../bench/plans/*.yaml"} {
		files, _ := filepath.Glob(glob)
		if len(files) == 0 {
			t.Fatalf("no plans at %s", glob)
		}
		for _, f := range files {
			b, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			docs[f] = string(b)
		}
	}
	docs["color tone and every default"] = "name: c\ndescription: d\ngeometry:\n  outside: {image: extend, tone: [1, 2, 3]}\n  moves:\n    - {do: warp, shift: [-2.5, 2.5]}\n    - {do: rotate, angle: 0.1, grow_canvas: true}\npixels:\n  - {do: cutout, size: 3, classes: ignore}\n"
	docs["pixels only"] = "name: p\npixels: [{do: hue, angle: 3}]\n"
	docs["moves only"] = "name: m\ngeometry: {moves: [{do: pick, from: [{do: flip, axis: vertical}, {do: resize, to: [8, 9]}], odds: [1, 2]}]}\n"
	for name, doc := range docs {
		t.Run(name, func(t *testing.T) {
			first := ptParse(t, doc).JSON()
			if !json.Valid(first) {
				t.Fatalf("not JSON: %s", first)
			}
			again, err := ParsePlan("plan.json", first)
			if err != nil {
				t.Fatalf("the JSON does not parse back: %v\n%s", err, first)
			}
			if second := again.JSON(); !bytes.Equal(first, second) {
				t.Errorf("round trip changed the plan:\nfirst:  %s\nsecond: %s", first, second)
			}
		})
	}
}

// examples/plans/light.yaml is the plan the README shows, byte for byte.
func TestExamplePlanIsTheREADMEs(t *testing.T) {
	readme, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	ex, err := os.ReadFile("../examples/plans/light.yaml")
	if err != nil {
		t.Fatal(err)
	}
	sec := string(readme)
	i := strings.Index(sec, "### Augmentation")
	if i < 0 {
		t.Fatal("README.md has no ### Augmentation section")
	}
	sec = sec[i:]
	k := strings.Index(sec, "```yaml\n")
	if k < 0 {
		t.Fatal("the Augmentation section shows no plan")
	}
	body := sec[k+len("```yaml\n"):]
	body = body[:strings.Index(body, "```")]
	if body != string(ex) {
		t.Errorf("README's plan and examples/plans/light.yaml differ:\n%s\n---\n%s", body, ex)
	}
	ptParse(t, body)
}

// Every op has a field list, and every listed field is a Step field.
func TestPlanStepFieldsAreStepTags(t *testing.T) {
	tags := map[string]bool{}
	for _, f := range psYAMLFields(reflect.TypeOf(Step{})) {
		tags[f] = true
	}
	used := map[string]bool{"do": true, "chance": true}
	for op, fields := range stepFields {
		for _, f := range fields {
			if !tags[f] {
				t.Errorf("stepFields[%s]: %s is not a Step yaml field", op, f)
			}
			used[f] = true
		}
	}
	for f := range tags {
		if !used[f] {
			t.Errorf("Step field %s belongs to no op", f)
		}
	}
}
