package gen

import (
	"github.com/trueset/trueset/internal/yamlnode"

	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"
	"go.yaml.in/yaml/v3"
)

// The recipe schema is checked with a validator the project did not write.
// Source: JSON Schema draft 2020-12 (https://json-schema.org/draft/2020-12),
// validated by santhosh-tekuri/jsonschema v6, a general-purpose validator
// that also checks the schema itself against the draft 2020-12 meta-schema.

const schemaFile = "../schema/recipe.schema.json"

func loadSchemaDoc(t *testing.T) any {
	t.Helper()
	f, err := os.Open(schemaFile)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	doc, err := jsonschema.UnmarshalJSON(f)
	if err != nil {
		t.Fatalf("%s: %v", schemaFile, err)
	}
	return doc
}

func compileRecipeSchema(t *testing.T) *jsonschema.Schema {
	t.Helper()
	doc := loadSchemaDoc(t)
	id, _ := doc.(map[string]any)["$id"].(string)
	if id == "" {
		id = "file://" + filepath.ToSlash(schemaFile)
	}
	c := jsonschema.NewCompiler()
	if err := c.AddResource(id, doc); err != nil {
		t.Fatal(err)
	}
	sch, err := c.Compile(id)
	if err != nil {
		t.Fatalf("compiling %s: %v", schemaFile, err)
	}
	return sch
}

// jsonKeys turns a value decoded by yaml.v3 into a JSON-compatible one:
// mapping keys become strings (weighted counts have integer keys).
func jsonKeys(v any) any {
	switch x := v.(type) {
	case map[string]any:
		out := make(map[string]any, len(x))
		for k, e := range x {
			out[k] = jsonKeys(e)
		}
		return out
	case map[any]any:
		out := make(map[string]any, len(x))
		for k, e := range x {
			out[fmt.Sprint(k)] = jsonKeys(e)
		}
		return out
	case []any:
		out := make([]any, len(x))
		for i, e := range x {
			out[i] = jsonKeys(e)
		}
		return out
	}
	return v
}

// recipeAsJSON decodes recipe YAML and re-reads it as the JSON instance the
// validator sees (numbers as json.Number).
func recipeAsJSON(t *testing.T, data []byte) any {
	t.Helper()
	var v any
	if err := yaml.Unmarshal(data, &v); err != nil {
		t.Fatalf("yaml: %v", err)
	}
	b, err := json.Marshal(jsonKeys(v))
	if err != nil {
		t.Fatalf("json: %v", err)
	}
	inst, err := jsonschema.UnmarshalJSON(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("json: %v", err)
	}
	return inst
}

func TestSchemaAcceptsPresets(t *testing.T) {
	sch := compileRecipeSchema(t)
	names := PresetNames()
	if len(names) == 0 {
		t.Fatal("no presets")
	}
	for _, name := range names {
		t.Run(name, func(t *testing.T) {
			data, err := PresetYAML(name)
			if err != nil {
				t.Fatal(err)
			}
			if err := sch.Validate(recipeAsJSON(t, data)); err != nil {
				t.Errorf("preset %s does not validate against the schema:\n%v", name, err)
			}
		})
	}
}

const schemaBase = `name: t
canvas:
  width: 64
  height: 64
classes:
  - name: a
    color: [255, 0, 0]
layers:
  - objects:
      - class: a
        shape: circle
        count: [1, 3]
        size: [8, 12]
`

// schemaEdit replaces exactly one occurrence of old in s.
func schemaEdit(t *testing.T, s, old, new string) string {
	t.Helper()
	if strings.Count(s, old) != 1 {
		t.Fatalf("edit: %q occurs %d times", old, strings.Count(s, old))
	}
	return strings.Replace(s, old, new, 1)
}

// Both the schema and trueset accept these flexible forms.
func TestSchemaAcceptsFlexibleForms(t *testing.T) {
	sch := compileRecipeSchema(t)
	cases := map[string]string{
		"base":                schemaBase,
		"fixed count":         schemaEdit(t, schemaBase, "count: [1, 3]", "count: 2"),
		"weighted count":      schemaEdit(t, schemaBase, "count: [1, 3]", "count: {0: 1, 2: 3.5}"),
		"weighted count json": schemaEdit(t, schemaBase, "count: [1, 3]", `count: {"0": 1, "2": 3}`),
		"single size":         schemaEdit(t, schemaBase, "size: [8, 12]", "size: 9.5"),
		"value range":         schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 12]\n        value: [1, 9]"),
		"value fixed":         schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 12]\n        value: 3"),
		"null aspect":         schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 12]\n        aspect: ~"),
		"rgb color range": schemaEdit(t, schemaEdit(t, schemaBase, "  height: 64\n", "  height: 64\n  mode: rgb\n"),
			"size: [8, 12]", "size: [8, 12]\n        color: [[0, 0, 0], [10, 20, 30]]"),
		"grid":          schemaEdit(t, schemaBase, "  - objects:", "  - layout: {kind: grid, rows: 2, cols: 2, jitter: 1}\n    objects:"),
		"noise":         schemaEdit(t, schemaBase, "classes:", "background: {kind: noise, intensity: [0, 40], cell: 4}\nclasses:"),
		"gradient":      schemaEdit(t, schemaBase, "classes:", "background: {kind: gradient, intensity: 10, end_intensity: [100, 200], angle: 45}\nclasses:"),
		"polygon sides": schemaEdit(t, schemaBase, "shape: circle", "shape: polygon\n        sides: [5, 8]"),
		"digit row": schemaEdit(t, schemaBase, `  - objects:
      - class: a
        shape: circle
`, `  - layout: {kind: row, spacing: [0, 2], baseline_jitter: 1}
    objects:
      - class: a
        glyph: {font: gomono, chars: "0123456789"}
        value: digit
`) + "targets:\n  - {name: code, kind: number}\n  - {name: total, kind: sum, of: value}\n",
		"pips": schemaEdit(t, schemaBase, "size: [8, 12]\n", `size: [8, 12]
        value: parts
        parts:
          - {class: a, shape: circle, arrangement: pips, count: {1: 1, 6: 1}, size: 0.2}
`),
	}
	for name, doc := range cases {
		t.Run(name, func(t *testing.T) {
			if _, err := ParseRecipe("ok.yaml", []byte(doc)); err != nil {
				t.Fatalf("trueset rejects a valid recipe: %v\n%s", err, doc)
			}
			if err := sch.Validate(recipeAsJSON(t, []byte(doc))); err != nil {
				t.Errorf("schema rejects a valid recipe:\n%v\n%s", err, doc)
			}
		})
	}
}

// Each document breaks one rule; the schema must reject it, and so must
// trueset (the two describe the same syntax).
func TestSchemaRejectsInvalid(t *testing.T) {
	sch := compileRecipeSchema(t)
	// why is a piece of the validator's complaint: the instance location or
	// the keyword that failed, so a case cannot pass for another reason.
	cases := []struct{ name, why, doc string }{
		{"unknown top-level field", "additional properties 'colors' not allowed", schemaEdit(t, schemaBase, "name: t\n", "name: t\ncolors: 3\n")},
		{"unknown nested field", "additional properties 'depth' not allowed", schemaEdit(t, schemaBase, "  height: 64\n", "  height: 64\n  depth: 8\n")},
		{"unknown object field", "additional properties 'weight' not allowed", schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 12]\n        weight: 3")},
		{"string width", "at '/canvas/width'", schemaEdit(t, schemaBase, "width: 64", "width: wide")},
		{"fractional width", "at '/canvas/width'", schemaEdit(t, schemaBase, "width: 64", "width: 64.5")},
		{"width over maximum", "at '/canvas/width'", schemaEdit(t, schemaBase, "width: 64", "width: 5000")},
		{"missing name", "missing property 'name'", schemaEdit(t, schemaBase, "name: t\n", "")},
		{"missing size", "missing property 'size'", schemaEdit(t, schemaBase, "        size: [8, 12]\n", "")},
		{"bad shape enum", "at '/layers/0/objects/0/shape'", schemaEdit(t, schemaBase, "shape: circle", "shape: hexagon")},
		{"bad mode enum", "at '/canvas/mode'", schemaEdit(t, schemaBase, "  height: 64\n", "  height: 64\n  mode: cmyk\n")},
		{"bad layout enum", "at '/layers/0/layout/kind'", schemaEdit(t, schemaBase, "  - objects:", "  - layout: {kind: spiral}\n    objects:")},
		{"bad font enum", "at '/layers/0/objects/0/glyph/font'", schemaEdit(t, schemaBase, "shape: circle", "glyph: {font: comic, chars: A}")},
		{"bad target kind", "at '/targets/0/kind'", schemaBase + "targets:\n  - {name: x, kind: median}\n"},
		{"bad of attribute", "at '/targets/0/of'", schemaBase + "targets:\n  - {name: x, kind: sum, of: color}\n"},
		{"sum without of", "missing property 'of'", schemaBase + "targets:\n  - {name: x, kind: sum}\n"},
		{"three-number range", "at '/layers/0/objects/0/size'", schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 10, 12]")},
		{"negative count", "at '/layers/0/objects/0/count'", schemaEdit(t, schemaBase, "count: [1, 3]", "count: -1")},
		{"negative weight", "at '/layers/0/objects/0/count/1'", schemaEdit(t, schemaBase, "count: [1, 3]", "count: {1: -1}")},
		{"intensity over 255", "at '/layers/0/objects/0/intensity'", schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 12]\n        intensity: 300")},
		{"shape and glyph", "'oneOf' failed, subschemas 0, 1 matched", schemaEdit(t, schemaBase, "shape: circle", "shape: circle\n        glyph: {chars: A}")},
		{"neither shape nor glyph", "'oneOf' failed, none matched", schemaEdit(t, schemaBase, "        shape: circle\n", "")},
		{"sides on a circle", "at '/layers/0/objects/0/shape'", schemaEdit(t, schemaBase, "shape: circle", "shape: circle\n        sides: 5")},
		{"color on a gray canvas", "at '/layers/0/objects/0': 'allOf' failed", schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 12]\n        color: [1, 2, 3]")},
		{"class named background", "at '/classes/0/name'", schemaEdit(t, schemaBase, "name: a", "name: background")},
		{"row of shapes", "missing property 'glyph'", schemaEdit(t, schemaBase, "  - objects:", "  - layout: {kind: row}\n    objects:")},
		{"grid without rows", "missing property 'rows'", schemaEdit(t, schemaBase, "  - objects:", "  - layout: {kind: grid, cols: 2}\n    objects:")},
		{"parts in parts", "at '/layers/0/objects/0/parts/0'", schemaEdit(t, schemaBase, "size: [8, 12]\n", `size: [8, 12]
        parts:
          - class: a
            shape: circle
            count: 1
            size: 0.5
            parts: [{class: a, shape: circle, count: 1, size: 0.5}]
`)},
		{"seven pips", "at '/layers/0/objects/0/parts/0/count'", schemaEdit(t, schemaBase, "size: [8, 12]\n", `size: [8, 12]
        parts: [{class: a, shape: circle, arrangement: pips, count: 7, size: 0.2}]
`)},
		{"arrangement on a top-level object", "additional properties 'arrangement'", schemaEdit(t, schemaBase, "size: [8, 12]", "size: [8, 12]\n        arrangement: pips")},
		{"blank glyph chars", "at '/layers/0/objects/0/glyph/chars'", schemaEdit(t, schemaBase, "shape: circle", `glyph: {chars: "A B"}`)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if _, err := ParseRecipe("bad.yaml", []byte(c.doc)); err == nil {
				t.Errorf("trueset accepts the document; the case does not break a rule:\n%s", c.doc)
			}
			err := sch.Validate(recipeAsJSON(t, []byte(c.doc)))
			if err == nil {
				t.Fatalf("schema accepts an invalid recipe:\n%s", c.doc)
			}
			if !strings.Contains(err.Error(), c.why) {
				t.Errorf("schema rejects the document for another reason; want %q in:\n%v", c.why, err)
			}
		})
	}
}

// schemaAt follows a slash-separated path of keys from the schema root.
func schemaAt(t *testing.T, doc any, path string) map[string]any {
	t.Helper()
	cur := doc
	for _, k := range strings.Split(path, "/") {
		if k == "" {
			continue
		}
		m, ok := cur.(map[string]any)
		if !ok {
			t.Fatalf("schema: %s: %q is not an object", path, k)
		}
		cur = m[k]
	}
	m, ok := cur.(map[string]any)
	if !ok {
		t.Fatalf("schema: no object at %s", path)
	}
	return m
}

func schemaKeys(m map[string]any) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// Every yaml-tagged field of the recipe structs is a schema property and
// every schema property is a field: the schema neither drops nor invents
// syntax.
func TestSchemaPropertiesMatchGoFields(t *testing.T) {
	doc := loadSchemaDoc(t)
	cases := []struct {
		typ    reflect.Type
		at     string
		except string // a field the schema object leaves out on purpose
	}{
		{reflect.TypeOf(Recipe{}), "", ""},
		{reflect.TypeOf(Canvas{}), "properties/canvas", ""},
		{reflect.TypeOf(Background{}), "properties/background", ""},
		{reflect.TypeOf(ClassSpec{}), "properties/classes/items", ""},
		{reflect.TypeOf(Layer{}), "$defs/layer", ""},
		{reflect.TypeOf(Layout{}), "$defs/layout", ""},
		{reflect.TypeOf(ObjectSpec{}), "$defs/object", "arrangement"}, // parts only
		{reflect.TypeOf(ObjectSpec{}), "$defs/part", "parts"},         // parts have no parts
		{reflect.TypeOf(GlyphSpec{}), "$defs/glyph", ""},
		{reflect.TypeOf(TargetSpec{}), "properties/targets/items", ""},
		{reflect.TypeOf(SplitSpec{}), "properties/split", ""},
		{reflect.TypeOf(BalanceSpec{}), "properties/split/properties/balance", ""},
	}
	for _, c := range cases {
		s := schemaAt(t, doc, c.at)
		if s["additionalProperties"] != false {
			t.Errorf("%s (%s): additionalProperties is not false", c.at, c.typ.Name())
		}
		props := schemaAt(t, s, "properties")
		var fields []string
		for i := 0; i < c.typ.NumField(); i++ {
			if n := yamlnode.FieldName(c.typ.Field(i)); n != "" && n != c.except {
				fields = append(fields, n)
			}
		}
		sort.Strings(fields)
		if got := schemaKeys(props); !reflect.DeepEqual(got, fields) {
			t.Errorf("%s: schema properties %v, Go %s fields %v", c.at, got, c.typ.Name(), fields)
		}
	}
}

func schemaEnum(t *testing.T, doc any, path string) []string {
	t.Helper()
	raw, _ := schemaAt(t, doc, path)["enum"].([]any)
	var out []string
	for _, v := range raw {
		out = append(out, fmt.Sprint(v))
	}
	sort.Strings(out)
	return out
}

func schemaSorted(s []string) []string {
	out := append([]string(nil), s...)
	sort.Strings(out)
	return out
}

// The schema's enums are the validator's lists.
func TestSchemaEnumsMatchValidator(t *testing.T) {
	doc := loadSchemaDoc(t)
	cases := []struct {
		path string
		want []string
	}{
		{"$defs/object/properties/shape", shapeKinds},
		{"$defs/part/properties/shape", shapeKinds},
		{"$defs/glyph/properties/font", FontNames()},
		{"properties/targets/items/properties/kind", targetKinds},
		{"properties/targets/items/properties/of", targetAttrs},
		{"properties/canvas/properties/mode", []string{"gray", "rgb"}},
		{"properties/background/properties/kind", []string{"solid", "gradient", "noise"}},
		{"$defs/layout/properties/kind", []string{"scatter", "row", "grid"}},
		{"$defs/part/properties/arrangement", []string{"pips", "scatter"}},
	}
	for _, c := range cases {
		if got, want := schemaEnum(t, doc, c.path), schemaSorted(c.want); !reflect.DeepEqual(got, want) {
			t.Errorf("%s: enum %v, validator allows %v", c.path, got, want)
		}
	}
	// Bounds from gen/validate.go's constants.
	for _, c := range []struct {
		path string
		key  string
		want float64
	}{
		{"properties/canvas/properties/width", "maximum", MaxCanvasSide},
		{"properties/canvas/properties/height", "maximum", MaxCanvasSide},
		{"properties/canvas/properties/width", "minimum", 1},
		{"properties/classes", "maxItems", MaxClasses},
	} {
		got := fmt.Sprint(schemaAt(t, doc, c.path)[c.key])
		if got != fmt.Sprint(c.want) {
			t.Errorf("%s: %s is %s, want %v", c.path, c.key, got, c.want)
		}
	}
}

// Every property of every closed object in the schema has a description.
func TestSchemaDescribesEveryProperty(t *testing.T) {
	var walk func(v any, at string)
	walk = func(v any, at string) {
		switch x := v.(type) {
		case map[string]any:
			if x["additionalProperties"] == false {
				props, _ := x["properties"].(map[string]any)
				for _, k := range schemaKeys(props) {
					p, _ := props[k].(map[string]any)
					if d, _ := p["description"].(string); strings.TrimSpace(d) == "" {
						t.Errorf("%s/properties/%s has no description", at, k)
					}
				}
			}
			for _, k := range schemaKeys(x) {
				walk(x[k], at+"/"+k)
			}
		case []any:
			for i, e := range x {
				walk(e, fmt.Sprintf("%s/%d", at, i))
			}
		}
	}
	walk(loadSchemaDoc(t), "#")
}
