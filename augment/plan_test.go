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
fill:
  mode: constant
mask_fill: background
cut:
  policy: resample
  least_shown: 0.5
steps:
  - op: flip
    axis: horizontal
    chance: 0.5
  - op: rotate
    degrees: [-10, 10]
  - op: crop
    area: [0.6, 1]
  - op: resize
    output: [32, 32]
  - op: jpeg
    quality: [60, 90]
  - op: cutout
    size: [2, 4]
    masks: keep
  - op: one-of
    steps:
      - op: blur
        sigma: 1
      - op: brightness
        delta: [-5, 5]
    weights: [1, 2]
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

// Each malformed plan is refused with a *PlanError at the exact line and
// field path, and its message names the bad value or what is allowed.
func TestParsePlanRefusals(t *testing.T) {
	huge := ptBase + "# " + strings.Repeat("x", MaxPlanBytes) + "\n"
	cases := []struct {
		name string
		doc  string
		line int
		path string
		want []string // pieces of err.Error()
	}{
		{"unknown op", ptEdit(t, ptBase, "op: rotate", "op: twirl"),
			12, "steps[1].op", []string{`"twirl"`, "unknown step", "rotate", "one-of"}},
		{"unknown field", ptEdit(t, ptBase, "degrees: [-10, 10]\n", "degrees: [-10, 10]\n    radius: 3\n"),
			14, "steps[1].radius", []string{`unknown field "radius"`, "degrees", "expand"}},
		{"unknown top-level field", ptEdit(t, ptBase, "name: base\n", "name: base\nseed: 7\n"),
			2, "seed", []string{`unknown field "seed"`, "interpolation"}},
		{"field of another op", ptEdit(t, ptBase, "chance: 0.5\n", "chance: 0.5\n    sigma: 2\n"),
			12, "steps[0].sigma", []string{"flip does not take sigma; it takes axis"}},
		{"zero-valued field of another op", ptEdit(t, ptBase, "chance: 0.5\n", "chance: 0.5\n    expand: false\n"),
			12, "steps[0].expand", []string{"flip does not take expand"}},
		{"null field of another op", ptEdit(t, ptBase, "chance: 0.5\n", "chance: 0.5\n    sigma: ~\n"),
			12, "steps[0].sigma", []string{"flip does not take sigma"}},
		{"field given twice", ptEdit(t, ptBase, "axis: horizontal\n", "axis: horizontal\n    axis: vertical\n"),
			11, "steps[0].axis", []string{`"axis" is given twice`}},
		{"flip without a known axis", ptEdit(t, ptBase, "axis: horizontal", "axis: diagonal"),
			10, "steps[0].axis", []string{`"diagonal"`, "horizontal or vertical"}},
		{"chance over 1", ptEdit(t, ptBase, "chance: 0.5", "chance: 1.5"),
			11, "steps[0].chance", []string{"1.5", "0..1"}},
		{"inverted range", ptEdit(t, ptBase, "degrees: [-10, 10]", "degrees: [10, -10]"),
			13, "steps[1].degrees", []string{"minimum 10 is greater than maximum -10", "min ≤ max"}},
		{"range of three numbers", ptEdit(t, ptBase, "degrees: [-10, 10]", "degrees: [1, 2, 3]"),
			13, "steps[1].degrees", []string{"[1, 2, 3]", "[min, max] with two numbers"}},
		{"string for a number", ptEdit(t, ptBase, "sigma: 1", "sigma: soft"),
			26, "steps[6].steps[0].sigma", []string{`"soft"`, "want a number"}},
		{"degrees out of bounds", ptEdit(t, ptBase, "degrees: [-10, 10]", "degrees: [-10, 4000]"),
			13, "steps[1].degrees", []string{"[-10, 4000]", "[-3600, 3600]"}},
		{"rotate without degrees", ptEdit(t, ptBase, "    degrees: [-10, 10]\n", ""),
			12, "steps[1].degrees", []string{"rotate needs degrees"}},
		{"crop with area and size", ptEdit(t, ptBase, "area: [0.6, 1]\n", "area: [0.6, 1]\n    size: 10\n"),
			14, "steps[2]", []string{"area", "size", "not both"}},
		{"crop with neither", ptEdit(t, ptBase, "area: [0.6, 1]", "aspect: 1"),
			14, "steps[2]", []string{"crop needs area", "or size"}},
		{"resize without output", ptEdit(t, ptBase, "    output: [32, 32]\n", ""),
			16, "steps[3].output", []string{"resize needs output: [width, height]"}},
		{"output with 3 numbers", ptEdit(t, ptBase, "output: [32, 32]", "output: [32, 32, 32]"),
			17, "steps[3].output", []string{"[32 32 32]", "[width, height]", "1..4096"}},
		{"output too wide", ptEdit(t, ptBase, "output: [32, 32]", "output: [5000, 32]"),
			17, "steps[3].output", []string{"[5000 32]", "1..4096"}},
		{"jpeg quality 0", ptEdit(t, ptBase, "quality: [60, 90]", "quality: 0"),
			19, "steps[4].quality", []string{"quality in 1..100"}},
		{"fractional quality", ptEdit(t, ptBase, "quality: [60, 90]", "quality: 60.5"),
			19, "steps[4].quality", []string{"60.5", "whole numbers"}},
		{"cutout masks erase", ptEdit(t, ptBase, "masks: keep", "masks: erase"),
			22, "steps[5].masks", []string{`"erase"`, "keep", "ignore"}},
		{"cutout without size", ptEdit(t, ptBase, "    size: [2, 4]\n", ""),
			20, "steps[5].size", []string{"cutout needs size"}},
		{"one-of with mismatched weights", ptEdit(t, ptBase, "weights: [1, 2]", "weights: [1, 2, 3]"),
			29, "steps[6].weights", []string{"[1 2 3]", "one weight per step (2)"}},
		{"one-of with negative weight", ptEdit(t, ptBase, "weights: [1, 2]", "weights: [1, -2]"),
			29, "steps[6].weights", []string{"[1 -2]", "must not be negative"}},
		{"one-of with zero weights", ptEdit(t, ptBase, "weights: [1, 2]", "weights: [0, 0]"),
			29, "steps[6].weights", []string{"[0 0]", "more than 0"}},
		{"nested one-of", ptEdit(t, ptBase, "      - op: blur\n        sigma: 1\n", "      - op: one-of\n        steps: [{op: blur, sigma: 1}]\n"),
			25, "steps[6].steps[0]", []string{"one-of cannot hold another one-of"}},
		{"fill mode wrap", ptEdit(t, ptBase, "mode: constant", "mode: wrap"),
			3, "fill.mode", []string{`"wrap"`, "constant, edge or reflect"}},
		{"fill color of two", ptEdit(t, ptBase, "  mode: constant\n", "  mode: constant\n  color: [1, 2]\n"),
			4, "fill.color", []string{"[1 2]", "[r, g, b]"}},
		{"interpolation nearest", ptEdit(t, ptBase, "name: base\n", "name: base\ninterpolation: nearest\n"),
			2, "interpolation", []string{`"nearest"`, "bilinear or bicubic"}},
		{"mask_fill other", ptEdit(t, ptBase, "mask_fill: background", "mask_fill: other"),
			4, "mask_fill", []string{`"other"`, "background or ignore"}},
		{"cut policy skip", ptEdit(t, ptBase, "policy: resample", "policy: skip"),
			6, "cut.policy", []string{`"skip"`, "resample", "drop", "keep"}},
		{"cut.least_shown 2", ptEdit(t, ptBase, "least_shown: 0.5", "least_shown: 2"),
			7, "cut.least_shown", []string{"(got 2)", "fraction in 0..1"}},
		{"cut.tries 5000", ptEdit(t, ptBase, "  least_shown: 0.5\n", "  least_shown: 0.5\n  tries: 5000\n"),
			8, "cut.tries", []string{"5000", "1..1000"}},
		{"empty steps", ptBase[:strings.Index(ptBase, "steps:\n")] + "steps: []\n",
			8, "steps", []string{"at least one step"}},
		{"missing name", ptEdit(t, ptBase, "name: base\n", ""),
			1, "name", []string{"a plan needs a name"}},
		{"alias", ptEdit(t, ptBase, "      - op: brightness\n        delta: [-5, 5]\n", "      - &b {op: brightness, delta: 1}\n      - *b\n"),
			28, "steps[6].steps[2]", []string{"aliases are not allowed"}},
		{"YAML syntax error", ptEdit(t, ptBase, "axis: horizontal", "axis: horizontal: 3"),
			10, "", []string{"YAML syntax", "mapping values are not allowed"}},
		{"plan over the size bound", huge,
			0, "", []string{fmt.Sprintf("%d bytes", len(huge)), fmt.Sprintf("at most %d", MaxPlanBytes)}},
	}
	if len(cases) < 20 {
		t.Fatalf("only %d cases", len(cases))
	}
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
			if c.line > 0 && !strings.HasPrefix(msg, fmt.Sprintf("bad.yaml:%d:", c.line)) {
				t.Errorf("message %q does not start with bad.yaml:%d:", msg, c.line)
			}
		})
	}
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
steps:
  - {op: flip, axis: vertical}
  - {op: affine, shear: 3}
  - {op: cutout, size: 4}
  - op: one-of
    steps: [{op: blur, sigma: 1}, {op: gamma, gamma: 2}, {op: contrast, factor: 1.1}]
`)
	if p.Interpolation != "bilinear" {
		t.Errorf("interpolation %q, want bilinear", p.Interpolation)
	}
	if p.Fill.Mode != "constant" || p.Fill.Intensity != 0 || p.Fill.Color != nil {
		t.Errorf("fill %+v, want constant 0", p.Fill)
	}
	if p.MaskFill != "background" {
		t.Errorf("mask_fill %q, want background with a constant fill", p.MaskFill)
	}
	if p.Cut.Policy != "resample" || p.Cut.LeastShown == nil || *p.Cut.LeastShown != 0.5 || p.Cut.Tries != 20 {
		t.Errorf("cut %+v, want resample, least_shown 0.5, 20 tries", p.Cut)
	}
	var walk func(steps []Step)
	walk = func(steps []Step) {
		for _, s := range steps {
			if s.Chance == nil || *s.Chance != 1 {
				t.Errorf("%s: chance %v, want 1", s.Op, s.Chance)
			}
			walk(s.Steps)
		}
	}
	walk(p.Steps)
	aff := p.Steps[1]
	if *aff.Scale != (Range{Min: 1, Max: 1}) || *aff.Translate != (Range{}) || *aff.Shear != (Range{Min: 3, Max: 3}) {
		t.Errorf("affine scale %v translate %v shear %v, want 1, 0, 3", *aff.Scale, *aff.Translate, *aff.Shear)
	}
	cut := p.Steps[2]
	if *cut.Count != (IntRange{Min: 1, Max: 1}) || *cut.Value != (Range{}) || cut.Masks != "keep" {
		t.Errorf("cutout count %v value %v masks %q, want 1, 0, keep", *cut.Count, *cut.Value, cut.Masks)
	}
	if w := p.Steps[3].Weights; !reflect.DeepEqual(w, []float64{1, 1, 1}) {
		t.Errorf("one-of weights %v, want equal weights [1 1 1]", w)
	}
	// Edge and reflect fills show copies of objects the masks cannot name,
	// so their mask fill defaults to ignore; a stated mask_fill wins.
	for _, c := range []struct{ fill, maskFill, want string }{
		{"constant", "", "background"},
		{"edge", "", "ignore"},
		{"reflect", "", "ignore"},
		{"edge", "background", "background"},
		{"constant", "ignore", "ignore"},
	} {
		doc := "name: d\nfill: {mode: " + c.fill + "}\n"
		if c.maskFill != "" {
			doc += "mask_fill: " + c.maskFill + "\n"
		}
		doc += "steps: [{op: blur, sigma: 1}]\n"
		if got := ptParse(t, doc).MaskFill; got != c.want {
			t.Errorf("fill %s, mask_fill %q: got %q, want %q", c.fill, c.maskFill, got, c.want)
		}
	}
	// Stated values are kept, not replaced by defaults.
	p = ptParse(t, "name: d\ninterpolation: bicubic\ncut: {policy: drop, least_shown: 0, tries: 3}\nsteps: [{op: blur, sigma: 1, chance: 0}]\n")
	if p.Interpolation != "bicubic" || p.Cut.Policy != "drop" || *p.Cut.LeastShown != 0 || p.Cut.Tries != 3 || *p.Steps[0].Chance != 0 {
		t.Errorf("stated values changed: %s", p.JSON())
	}
}

// Plan.JSON (what dataset.json stores) parses back, as a plan, to the same
// JSON: JSON is YAML 1.2 flow syntax, so ParsePlan reads it as it is.
func TestPlanJSONRoundTrip(t *testing.T) {
	docs := map[string]string{"base": ptBase}
	files, _ := filepath.Glob("../testdata/plans/*.yaml")
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		docs[filepath.Base(f)] = string(b)
	}
	if len(docs) < 2 {
		t.Fatal("no plans in testdata/plans")
	}
	docs["color fill and every default"] = "name: c\ndescription: d\nfill: {mode: edge, color: [1, 2, 3]}\nsteps:\n  - {op: affine, translate: [-2.5, 2.5]}\n  - {op: cutout, size: 3, masks: ignore}\n  - {op: rotate, degrees: 0.1, expand: true}\n"
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

// Every op has a field list, and every listed field is a Step field.
func TestPlanStepFieldsAreStepTags(t *testing.T) {
	tags := map[string]bool{}
	for _, f := range psYAMLFields(reflect.TypeOf(Step{})) {
		tags[f] = true
	}
	used := map[string]bool{"op": true, "chance": true}
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
