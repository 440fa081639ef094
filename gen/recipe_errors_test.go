package gen

import (
	"context"
	"errors"
	"os"
	"strings"
	"testing"
	"time"
)

// errBase is a small valid recipe; each case below breaks one thing in it.
// Line numbers of the unbroken recipe:
//
//	 1 name: t
//	 2 canvas:
//	 3   width: 64
//	 4   height: 64
//	 5 classes:
//	 6   - name: a
//	 7     color: [255, 0, 0]
//	 8   - name: b
//	 9     color: [0, 255, 0]
//	10 layers:
//	11   - layout:
//	12       kind: scatter
//	13     objects:
//	14       - class: a
//	15         shape: circle
//	16         count: [1, 3]
//	17         size: [8, 12]
//	18       - class: b
//	19         shape: rectangle
//	20         count: 2
//	21         size: 10
//	22 targets:
//	23   - name: total
//	24     kind: count
const errBase = `name: t
canvas:
  width: 64
  height: 64
classes:
  - name: a
    color: [255, 0, 0]
  - name: b
    color: [0, 255, 0]
layers:
  - layout:
      kind: scatter
    objects:
      - class: a
        shape: circle
        count: [1, 3]
        size: [8, 12]
      - class: b
        shape: rectangle
        count: 2
        size: 10
targets:
  - name: total
    kind: count
`

// breakOnce replaces the one occurrence of old in errBase with new.
func breakOnce(t *testing.T, old, new string) string {
	t.Helper()
	if n := strings.Count(errBase, old); n != 1 {
		t.Fatalf("breakOnce: %q occurs %d times in the base recipe", old, n)
	}
	return strings.Replace(errBase, old, new, 1)
}

func TestRecipeErrorBaseIsValid(t *testing.T) {
	if _, err := ParseRecipe("ok.yaml", []byte(errBase)); err != nil {
		t.Fatalf("the base recipe is refused: %v", err)
	}
}

func TestRecipeErrorPositions(t *testing.T) {
	glyphB := "        glyph:\n          font: goregular\n          chars: AB\n" // replaces line 19 with lines 19-21
	cases := []struct {
		name     string
		old, new string   // the one edit to errBase
		line     int      // where the error points
		path     string   // the field path it names
		mentions []string // the bad value and/or the allowed values
	}{
		{"unknown top-level field", "name: t\n", "name: t\ncolors: 3\n",
			2, "colors", []string{`unknown field "colors"`, "allowed here: background, bait, canvas, classes, description, hold_out, layers, mislabel, name, split, targets"}},
		{"unknown canvas field", "  height: 64\n", "  height: 64\n  depth: 8\n",
			5, "canvas.depth", []string{`unknown field "depth"`, "antialias, height, mode, width"}},
		{"unknown layout field", "      kind: scatter\n", "      kind: scatter\n      spread: 3\n",
			13, "layers[0].layout.spread", []string{`unknown field "spread"`, "max_overlap", "region"}},
		{"unknown object field", "        size: 10\n", "        size: 10\n        weight: 3\n",
			22, "layers[0].objects[1].weight", []string{`unknown field "weight"`, "shape", "glyph"}},
		// Issue 10: one spelling (American) and the names of this version;
		// the other spelling or an earlier name gets a hint, a typo a
		// did-you-mean (Levenshtein distance ≤ 2).
		{"British spelling of color", "    color: [0, 255, 0]\n", "    colour: [0, 255, 0]\n",
			9, "classes[1].colour", []string{`unknown field "colour"`, `trueset spells it "color"`}},
		{"earlier name of least_shown", "      kind: scatter\n", "      kind: scatter\n      min_visible: 0.5\n",
			13, "layers[0].layout.min_visible", []string{`unknown field "min_visible"`, `"least_shown"`}},
		{"earlier name of least_pixels", "      kind: scatter\n", "      kind: scatter\n      min_pixels: 4\n",
			13, "layers[0].layout.min_pixels", []string{`"least_pixels"`}},
		{"gray spelled grey", "  height: 64\n", "  height: 64\n  mode: grey\n",
			5, "canvas.mode", []string{`"grey"`, "trueset spells it gray"}},
		{"typo in a field name", "        size: 10\n", "        szie: 10\n",
			21, "layers[0].objects[1].szie", []string{`unknown field "szie"`, `did you mean "size"?`}},
		// Issue 11: nothing in a recipe is silently ignored.
		{"second YAML document", "    kind: count\n", "    kind: count\n---\nname: other\n",
			25, "", []string{"one YAML document", "a second one starts here"}},
		{"class name longer than a record should repeat", "  - name: a\n", "  - name: xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx\n",
			6, "classes[0].name", []string{"at most 64 bytes"}},
		{"count given twice in a weighted count", "count: 2", `count: {"1": 1, "1": 5}`,
			20, "layers[0].objects[1].count", []string{`"1"`, "count 1 is given twice"}},
		{"field given twice", "  height: 64\n", "  height: 64\n  height: 32\n",
			5, "canvas.height", []string{"given twice"}},
		{"string for width", "  width: 64\n", "  width: wide\n",
			3, "canvas.width", []string{`"wide"`, "want an integer", "a string"}},
		{"list for width", "  width: 64\n", "  width: [64]\n",
			3, "canvas.width", []string{"[64]", "want an integer", "a list"}},
		{"negative width", "  width: 64\n", "  width: -5\n",
			3, "canvas.width", []string{"-5", "1..4096"}},
		{"width over the maximum", "  width: 64\n", "  width: 5000\n",
			3, "canvas.width", []string{"5000", "1..4096"}},
		{"missing name", "name: t\n", "",
			1, "name", []string{"needs a name"}},
		{"inverted range", "size: [8, 12]", "size: [30, 10]",
			17, "layers[0].objects[0].size", []string{"[30, 10]", "minimum 30 is greater than maximum 10", "min ≤ max"}},
		{"range of three numbers", "size: [8, 12]", "size: [8, 10, 12]",
			17, "layers[0].objects[0].size", []string{"[8, 10, 12]", "[min, max]"}},
		{"negative count", "count: 2", "count: -2",
			20, "layers[0].objects[1].count", []string{"-2", "must not be negative"}},
		{"negative weight", "count: 2", "count: {1: 1, 3: -1}",
			20, "layers[0].objects[1].count.3", []string{"-1", "weight must not be negative"}},
		{"unknown class in an object", "      - class: b\n", "      - class: c\n",
			18, "layers[0].objects[1].class", []string{`"c"`, "declared classes: a, b"}},
		{"unknown shape kind", "shape: rectangle", "shape: hexagon",
			19, "layers[0].objects[1].shape", []string{`"hexagon"`, "circle, ellipse, rectangle, rounded-rectangle, triangle, polygon, star, ring, cross, bar"}},
		{"both shape and glyph", "        shape: rectangle\n", "        shape: rectangle\n        glyph:\n          chars: AB\n",
			19, "layers[0].objects[1].shape", []string{"exactly one of shape or glyph"}},
		{"neither shape nor glyph", "        shape: rectangle\n", "",
			18, "layers[0].objects[1].shape", []string{"exactly one of shape or glyph"}},
		{"sides on a circle", "shape: circle", "shape: circle\n        sides: 5",
			16, "layers[0].objects[0].sides", []string{"polygon, star", `"circle"`}},
		{"unknown font name", "        shape: rectangle\n", "        glyph:\n          font: comic\n          chars: AB\n",
			20, "layers[0].objects[1].glyph.font", []string{`"comic"`, "built-in fonts: gobold", "goregular"}},
		{"character missing from the font", "        shape: rectangle\n", "        glyph:\n          font: goregular\n          chars: \"A世\"\n",
			21, "layers[0].objects[1].glyph.chars", []string{`"世"`, "no glyph", "goregular"}},
		{"blank char", "        shape: rectangle\n", "        glyph:\n          chars: \"A B\"\n",
			20, "layers[0].objects[1].glyph.chars", []string{"' '", "not blank"}},
		{"empty chars", "        shape: rectangle\n", "        glyph:\n          chars: \"\"\n",
			20, "layers[0].objects[1].glyph.chars", []string{"at least one character"}},
		{"object larger than canvas", "size: 10", "size: 80",
			21, "layers[0].objects[1].size", []string{"80", "64×64 canvas"}},
		{"unknown target kind", "    kind: count\n", "    kind: median\n",
			24, "targets[0].kind", []string{`"median"`, "count, sum, min, max, mean, text, number"}},
		{"sum target without of", "    kind: count\n", "    kind: sum\n",
			23, "targets[0].of", []string{"a sum target needs of", "value, area, size, angle"}},
		{"number target over non-digit chars", "        shape: rectangle\n        count: 2\n        size: 10\ntargets:\n  - name: total\n    kind: count\n",
			glyphB + "        count: 2\n        size: 10\ntargets:\n  - name: total\n    kind: number\n    classes: [b]\n",
			26, "targets[0].kind", []string{`"number"`, "reads digits", `"A"`}},
		{"color on a gray canvas", "        size: 10\n", "        size: 10\n        color: [255, 0, 0]\n",
			22, "layers[0].objects[1].color", []string{"canvas.mode rgb", "intensity"}},
		{"invalid YAML syntax", "  height: 64\n", "  height: 64: 3\n",
			4, "", []string{"YAML syntax", "mapping values are not allowed"}},
		{"duplicate class names", "  - name: b\n", "  - name: a\n",
			8, "classes[1].name", []string{`"a"`, "must be unique"}},
		{"class named background", "  - name: b\n", "  - name: background\n",
			8, "classes[1].name", []string{`"background"`, "id 0 is background"}},
		{"grid with more objects than cells", "      kind: scatter\n", "      kind: grid\n      rows: 1\n      cols: 2\n",
			15, "layers[0].objects", []string{"(got 5)", "2 cells"}},
		{"pips arrangement with count over 6", "        size: 10\n",
			"        size: 10\n        parts:\n          - class: a\n            shape: circle\n            arrangement: pips\n            count: 7\n            size: 0.2\n",
			26, "layers[0].objects[1].parts[0].count", []string{"(got 7)", "1 to 6 parts"}},
		{"parts nested in parts", "        size: 10\n",
			"        size: 10\n        parts:\n          - class: a\n            shape: circle\n            count: 1\n            size: 0.5\n            parts:\n              - class: a\n                shape: circle\n                count: 1\n                size: 0.5\n",
			27, "layers[0].objects[1].parts[0].parts", []string{"parts cannot have parts"}},
		{"row layout with shape objects", "      kind: scatter\n", "      kind: row\n",
			15, "layers[0].objects[0].shape", []string{"row layout", "circle"}},
		{"region outside canvas", "      kind: scatter\n", "      kind: scatter\n      region: [0, 0, 100, 64]\n",
			13, "layers[0].layout.region", []string{"[0 0 100 64]", "inside the 64x64 canvas"}},
		{"gradient without an end tone", "classes:\n", "background:\n  kind: gradient\nclasses:\n",
			5, "background.end_intensity", []string{"end tone"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			doc := breakOnce(t, c.old, c.new)
			_, err := ParseRecipe("bad.yaml", []byte(doc))
			if err == nil {
				t.Fatalf("recipe accepted:\n%s", doc)
			}
			var re *RecipeError
			if !errors.As(err, &re) {
				t.Fatalf("error %T %v is not a *RecipeError", err, err)
			}
			if re.File != "bad.yaml" {
				t.Errorf("File = %q, want bad.yaml", re.File)
			}
			if re.Line != c.line {
				t.Errorf("Line = %d, want %d (%v)", re.Line, c.line, err)
			}
			if re.Line > 0 && re.Column < 1 {
				t.Errorf("Column = %d with a line given (%v)", re.Column, err)
			}
			if re.Path != c.path {
				t.Errorf("Path = %q, want %q (%v)", re.Path, c.path, err)
			}
			msg := err.Error()
			for _, m := range c.mentions {
				if !strings.Contains(msg, m) {
					t.Errorf("error %q does not mention %q", msg, m)
				}
			}
			if !strings.HasPrefix(msg, "bad.yaml:") {
				t.Errorf("error %q does not start with the file name", msg)
			}
		})
	}
	if len(cases) < 24 {
		t.Errorf("only %d cases", len(cases))
	}
}

// An impossible layout — 30 non-overlapping size-20 circles on a 64x64 canvas,
// count fixed at 30 — fails with a LayoutError naming the sample and the scatter
// constraint, within bounded time (MaxAttempts × MaxTries draws).
func TestImpossibleLayoutFails(t *testing.T) {
	src := `name: crowded
canvas:
  width: 64
  height: 64
classes:
  - name: a
    color: [255, 0, 0]
layers:
  - layout:
      kind: scatter
      max_overlap: 0
    objects:
      - class: a
        shape: circle
        count: 30
        size: 20
`
	r, err := ParseRecipe("crowded.yaml", []byte(src))
	if err != nil {
		t.Fatalf("the recipe is valid; only its layout is impossible: %v", err)
	}
	done := make(chan error, 1)
	go func() {
		_, err := NewRenderer(r).Generate(1, 0)
		done <- err
	}()
	select {
	case err = <-done:
	case <-time.After(30 * time.Second):
		t.Fatal("Generate did not give up within 30 s")
	}
	if err == nil {
		t.Fatal("Generate placed 30 non-overlapping size-20 objects on a 64x64 canvas")
	}
	var le *LayoutError
	if !errors.As(err, &le) {
		t.Fatalf("error %T %v is not a *LayoutError", err, err)
	}
	if le.Index != 0 {
		t.Errorf("Index = %d, want 0", le.Index)
	}
	msg := err.Error()
	for _, m := range []string{"sample 0", "scatter", "layers[0]"} {
		if !strings.Contains(msg, m) {
			t.Errorf("error %q does not mention %q", msg, m)
		}
	}
}

// Issue 11: a least_pixels no object can reach is reported as a recipe
// error naming the file and the field, before the output folder is touched.
func TestUnreachableLeastPixelsNamesTheField(t *testing.T) {
	src := breakOnce(t, "      kind: scatter\n", "      kind: scatter\n      least_pixels: 5000\n")
	dir := t.TempDir()
	file := dir + "/tiny.yaml"
	if err := os.WriteFile(file, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := LoadRecipe(file)
	if err != nil {
		t.Fatal(err)
	}
	out := dir + "/out"
	_, err = Run(context.Background(), RunOptions{Recipe: r, Out: out, Count: 3, Seed: 1, Workers: 1, Version: "test"})
	var re *RecipeError
	if !errors.As(err, &re) {
		t.Fatalf("got %v, want a RecipeError", err)
	}
	if re.File != file || re.Path != "layers[0].layout.least_pixels" || !strings.Contains(re.Msg, "least_pixels 5000") {
		t.Errorf("got file %q path %q msg %q", re.File, re.Path, re.Msg)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("the output folder was created: %v", err)
	}
}
