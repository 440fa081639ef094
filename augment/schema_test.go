package augment

import (
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

	"github.com/trueset/trueset/internal/yamlnode"
)

// The plan schema is checked with a validator the project did not write.
// Source: JSON Schema draft 2020-12 (https://json-schema.org/draft/2020-12),
// validated with santhosh-tekuri/jsonschema v6, a general-purpose validator
// that also checks the schema itself against the draft 2020-12 meta-schema
// when it compiles it.
//
// Beyond fixed cases, the tests below make trueset (ParsePlan) and the schema
// judge the same generated documents: every field of every op removed, set to
// null, moved to another op, and every numeric bound probed just inside and
// just outside. Where the two disagree, one of them has drifted.

const psSchemaFile = "../schema/plan.schema.json"

func psSchemaDoc(t *testing.T) map[string]any {
	t.Helper()
	f, err := os.Open(psSchemaFile)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	doc, err := jsonschema.UnmarshalJSON(f)
	if err != nil {
		t.Fatalf("%s: %v", psSchemaFile, err)
	}
	m, ok := doc.(map[string]any)
	if !ok {
		t.Fatalf("%s: not a JSON object", psSchemaFile)
	}
	return m
}

func psCompile(t *testing.T) *jsonschema.Schema {
	t.Helper()
	doc := psSchemaDoc(t)
	id, _ := doc["$id"].(string)
	if id == "" {
		t.Fatalf("%s has no $id", psSchemaFile)
	}
	if doc["$schema"] != "https://json-schema.org/draft/2020-12/schema" {
		t.Fatalf("%s: $schema is %v, want draft 2020-12", psSchemaFile, doc["$schema"])
	}
	c := jsonschema.NewCompiler()
	if err := c.AddResource(id, doc); err != nil {
		t.Fatal(err)
	}
	sch, err := c.Compile(id)
	if err != nil {
		t.Fatalf("compiling %s: %v", psSchemaFile, err)
	}
	return sch
}

// psJSONValue turns a value decoded by yaml.v3 into a JSON-compatible one
// (mapping keys as strings).
func psJSONValue(v any) any {
	switch x := v.(type) {
	case map[string]any:
		out := make(map[string]any, len(x))
		for k, e := range x {
			out[k] = psJSONValue(e)
		}
		return out
	case map[any]any:
		out := make(map[string]any, len(x))
		for k, e := range x {
			out[fmt.Sprint(k)] = psJSONValue(e)
		}
		return out
	case []any:
		out := make([]any, len(x))
		for i, e := range x {
			out[i] = psJSONValue(e)
		}
		return out
	}
	return v
}

// psInstance decodes plan YAML and re-reads it as the JSON instance the
// validator sees (numbers as json.Number).
func psInstance(t *testing.T, data []byte) any {
	t.Helper()
	var v any
	if err := yaml.Unmarshal(data, &v); err != nil {
		t.Fatalf("yaml: %v\n%s", err, data)
	}
	b, err := json.Marshal(psJSONValue(v))
	if err != nil {
		t.Fatalf("json: %v", err)
	}
	inst, err := jsonschema.UnmarshalJSON(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("json: %v", err)
	}
	return inst
}

func TestPlanSchemaAcceptsTestdataPlans(t *testing.T) {
	sch := psCompile(t)
	files, err := filepath.Glob("../testdata/plans/*.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(files) == 0 {
		t.Fatal("no plans in testdata/plans")
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			data, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			p, err := ParsePlan(f, data)
			if err != nil {
				t.Fatalf("trueset refuses the plan: %v", err)
			}
			if err := sch.Validate(psInstance(t, data)); err != nil {
				t.Errorf("%s does not validate against the schema:\n%v", f, err)
			}
			// The normalized plan (every default filled in, as stored in
			// dataset.json) is a plan too.
			if err := sch.Validate(psInstance(t, p.JSON())); err != nil {
				t.Errorf("the normalized JSON of %s does not validate:\n%v\n%s", f, err, p.JSON())
			}
		})
	}
}

const psBase = `name: t
geometry:
  moves:
    - do: rotate
      angle: [-10, 10]
`

// psTail is a plan's sections after its name, for cases that change the
// geometry settings.
const psTail = "pixels: [{do: blur, sigma: 1}]\n"

func psEdit(t *testing.T, s, old, new string) string {
	t.Helper()
	if strings.Count(s, old) != 1 {
		t.Fatalf("edit: %q occurs %d times in\n%s", old, strings.Count(s, old), s)
	}
	return strings.Replace(s, old, new, 1)
}

// Flexible forms that both trueset and the schema accept.
func TestPlanSchemaAcceptsFlexibleForms(t *testing.T) {
	sch := psCompile(t)
	move := func(s string) string { return psEdit(t, psBase, "    - do: rotate\n      angle: [-10, 10]\n", s) }
	pix := func(s string) string { return "name: t\npixels:\n" + s }
	cases := map[string]string{
		"base":               psBase,
		"fixed angle":        psEdit(t, psBase, "angle: [-10, 10]", "angle: 90"),
		"integer-valued 2.0": psEdit(t, psBase, "angle: [-10, 10]", "angle: [-2.0, 2.0]"),
		"null chance":        psEdit(t, psBase, "angle: [-10, 10]", "angle: 5\n      chance: ~"),
		"chance 0":           psEdit(t, psBase, "angle: [-10, 10]", "angle: 5\n      chance: 0"),
		"every geometry field": "name: t\ndescription: all of them\ngeometry:\n  sampling: bicubic\n  outside: {image: mirror, tone: [1, 2, 3], classes: background}\n" +
			"  cuts: {policy: drop, least_shown: 0, tries: 1000}\n  moves: [{do: flip, axis: vertical}]\npixels:\n  - {do: blur, sigma: 1}\n",
		"gray tone 12.5":       "name: t\ngeometry: {outside: {tone: 12.5}}\n" + psTail,
		"null least_shown":     "name: t\ngeometry: {cuts: {least_shown: ~}}\n" + psTail,
		"pixels only":          "name: t\n" + psTail,
		"geometry, no moves":   "name: t\ngeometry: {sampling: bicubic}\n" + psTail,
		"flow style":           "{name: t, geometry: {moves: [{do: flip, axis: vertical}]}}\n",
		"crop by size":         move("    - {do: crop, size: [20, 30], to: [16, 16]}\n"),
		"crop, null size":      move("    - {do: crop, area: 0.5, size: ~}\n"),
		"warp, slant only":     move("    - {do: warp, slant: [-4, 4], zoom: ~}\n"),
		"cutout, size only":    pix("  - {do: cutout, size: 5}\n"),
		"cutout, zero count":   pix("  - {do: cutout, size: 5, count: 0}\n"),
		"pick of moves":        move("    - do: pick\n      chance: 0.5\n      from:\n        - {do: rotate, angle: 1, chance: 0.3}\n        - {do: flip, axis: horizontal}\n"),
		"pick, zero odds":      pix("  - do: pick\n    from: [{do: blur, sigma: 1}, {do: gamma, gamma: 2}]\n    odds: [0, 0.5]\n"),
		"jpeg, fixed quality":  pix("  - {do: jpeg, quality: 75}\n"),
		"rotate, grow false":   psEdit(t, psBase, "angle: [-10, 10]", "angle: 30\n      grow_canvas: false"),
		"README's light plan":  psReadFile(t, "../examples/plans/light.yaml"),
		"bench's kernels plan": psReadFile(t, "../bench/plans/kernels.yaml"),
	}
	for name, doc := range cases {
		t.Run(name, func(t *testing.T) {
			if _, err := ParsePlan("ok.yaml", []byte(doc)); err != nil {
				t.Fatalf("trueset refuses a valid plan: %v\n%s", err, doc)
			}
			if err := sch.Validate(psInstance(t, []byte(doc))); err != nil {
				t.Errorf("schema refuses a valid plan:\n%v\n%s", err, doc)
			}
		})
	}
}

func psReadFile(t *testing.T, name string) string {
	t.Helper()
	b, err := os.ReadFile(name)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// Each document breaks one rule; the schema must refuse it for that rule,
// and trueset must refuse it too.
func TestPlanSchemaRejectsInvalid(t *testing.T) {
	sch := psCompile(t)
	move := func(s string) string { return psEdit(t, psBase, "    - do: rotate\n      angle: [-10, 10]\n", s) }
	pix := func(s string) string { return "name: t\npixels:\n" + s }
	geo := func(s string) string { return "name: t\ngeometry: " + s + "\n" + psTail }
	// why is a piece of the validator's complaint (the instance location, the
	// keyword or the property), so a case cannot pass for another reason.
	cases := []struct{ name, why, doc string }{
		{"missing name", "missing property 'name'", psEdit(t, psBase, "name: t\n", "")},
		{"empty name", "at '/name': minLength: got 0, want 1", psEdit(t, psBase, "name: t", `name: ""`)},
		{"unknown top-level field", "additional properties 'seed' not allowed", psEdit(t, psBase, "name: t\n", "name: t\nseed: 3\n")},
		{"old steps", "additional properties 'steps' not allowed", "name: t\nsteps: [{op: blur, sigma: 1}]\n"},
		{"no steps", "at '/geometry/moves': minItems: got 0, want 1", "name: t\ngeometry: {moves: []}\npixels: []\n"},
		{"no sections", "missing property 'pixels'", "name: t\n"},
		{"unknown op", "at '/geometry/moves/0/do': value must be one of", psEdit(t, psBase, "do: rotate", "do: twirl")},
		{"old op name", "additional properties 'op' not allowed", psEdit(t, psBase, "do: rotate", "op: rotate")},
		{"move under pixels", "at '/pixels/0/do': value must be one of", pix("  - {do: rotate, angle: 3}\n")},
		{"pixel step under moves", "at '/geometry/moves/0/do': value must be one of", move("    - {do: blur, sigma: 1}\n")},
		{"unknown step field", "additional properties 'radius' not allowed", psEdit(t, psBase, "angle: [-10, 10]", "angle: 3\n      radius: 2")},
		{"sigma on flip", "invalid propertyName 'sigma'", move("    - {do: flip, axis: horizontal, sigma: 2}\n")},
		{"null sigma on flip", "invalid propertyName 'sigma'", move("    - {do: flip, axis: horizontal, sigma: ~}\n")},
		{"grow_canvas false on flip", "invalid propertyName 'grow_canvas'", move("    - {do: flip, axis: horizontal, grow_canvas: false}\n")},
		{"flip without axis", "missing property 'axis'", move("    - {do: flip}\n")},
		{"rotate without angle", "missing property 'angle'", move("    - {do: rotate, grow_canvas: true}\n")},
		{"old degrees", "additional properties 'degrees' not allowed", psEdit(t, psBase, "angle: [-10, 10]", "degrees: 3")},
		{"chance over 1", "at '/geometry/moves/0/chance': maximum: got 1.5, want 1", psEdit(t, psBase, "angle: [-10, 10]", "angle: 3\n      chance: 1.5")},
		{"three-number range", "at '/geometry/moves/0/angle': maxItems: got 3, want 2", psEdit(t, psBase, "angle: [-10, 10]", "angle: [1, 2, 3]")},
		{"angle over 3600", "at '/geometry/moves/0/angle/1': maximum: got 3,601, want 3,600", psEdit(t, psBase, "angle: [-10, 10]", "angle: [0, 3601]")},
		{"string angle", "at '/geometry/moves/0/angle': got string, want number", psEdit(t, psBase, "angle: [-10, 10]", "angle: lots")},
		{"crop with area and size", "'oneOf' failed, subschemas 0, 1 matched", move("    - {do: crop, area: 0.5, size: 10}\n")},
		{"crop with neither", "'oneOf' failed, none matched", move("    - {do: crop, aspect: 1}\n")},
		{"warp with nothing", "at '/geometry/moves/0': missing property 'slant'", move("    - {do: warp, zoom: ~}\n")},
		{"resize without to", "missing property 'to'", move("    - {do: resize}\n")},
		{"to with three numbers", "at '/geometry/moves/0/to': maxItems: got 3, want 2", move("    - {do: resize, to: [8, 8, 8]}\n")},
		{"fractional to", "at '/geometry/moves/0/to/0': got number, want integer", move("    - {do: resize, to: [8.5, 8]}\n")},
		{"jpeg quality 0", "at '/pixels/0/quality/0': minimum: got 0, want 1", pix("  - {do: jpeg, quality: [0, 90]}\n")},
		{"fractional quality", "at '/pixels/0/quality': got number, want integer", pix("  - {do: jpeg, quality: 90.5}\n")},
		{"speckle sigma 6", "at '/pixels/0/sigma': maximum: got 6, want 5", pix("  - {do: speckle, sigma: 6}\n")},
		{"cutout classes erase", "at '/pixels/0/classes': value must be one of 'keep', 'ignore'", pix("  - {do: cutout, size: 4, classes: erase}\n")},
		{"cutout without size", "missing property 'size'", pix("  - {do: cutout, count: 2}\n")},
		{"nested pick", "at '/pixels/0/from/0/do': value must be one of", pix("  - do: pick\n    from:\n      - do: pick\n        from: [{do: blur, sigma: 1}]\n")},
		{"move picked under pixels", "at '/pixels/0/from/1/do': value must be one of", pix("  - {do: pick, from: [{do: blur, sigma: 1}, {do: flip, axis: vertical}]}\n")},
		{"pick without from", "missing property 'from'", pix("  - {do: pick, odds: [1]}\n")},
		{"all odds zero", "at '/pixels/0/odds': no items match contains schema", pix("  - {do: pick, from: [{do: blur, sigma: 1}], odds: [0]}\n")},
		{"negative odds", "at '/pixels/0/odds/1': minimum: got -1, want 0", pix("  - {do: pick, from: [{do: blur, sigma: 1}, {do: blur, sigma: 2}], odds: [1, -1]}\n")},
		{"outside image wrap", "at '/geometry/outside/image': value must be one of", geo("{outside: {image: wrap}}")},
		{"outside image constant", "at '/geometry/outside/image': value must be one of", geo("{outside: {image: constant}}")},
		{"outside tone of two", "at '/geometry/outside/tone'", geo("{outside: {tone: [1, 2]}}")},
		{"outside classes other", "at '/geometry/outside/classes': value must be one of", geo("{outside: {classes: other}}")},
		{"sampling nearest", "at '/geometry/sampling': value must be one of", geo("{sampling: nearest}")},
		{"old interpolation", "additional properties 'interpolation' not allowed", "name: t\ninterpolation: bicubic\n" + psTail},
		{"cuts policy resample", "at '/geometry/cuts/policy': value must be one of", geo("{cuts: {policy: resample}}")},
		{"cuts least_shown 2", "at '/geometry/cuts/least_shown': maximum: got 2, want 1", geo("{cuts: {least_shown: 2}}")},
		{"cuts tries 1001", "at '/geometry/cuts/tries': maximum: got 1,001, want 1,000", geo("{cuts: {tries: 1001}}")},
		{"unknown cuts field", "additional properties 'retries' not allowed", geo("{cuts: {retries: 3}}")},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if _, err := ParsePlan("bad.yaml", []byte(c.doc)); err == nil {
				t.Errorf("trueset accepts the document; the case does not break a rule:\n%s", c.doc)
			}
			err := sch.Validate(psInstance(t, []byte(c.doc)))
			if err == nil {
				t.Fatalf("schema accepts an invalid plan:\n%s", c.doc)
			}
			if !strings.Contains(err.Error(), c.why) {
				t.Errorf("schema refuses the document for another reason; want %q in:\n%v", c.why, err)
			}
		})
	}
}

// psStep is a valid example of an op; together the examples use every field
// of every op.
type psStep struct {
	op  string
	doc string // a YAML flow mapping
}

var psSteps = []psStep{
	{"flip", "{do: flip, axis: horizontal, chance: 0.5}"},
	{"rotate", "{do: rotate, angle: [-10, 10], grow_canvas: true}"},
	{"warp", "{do: warp, zoom: [0.9, 1.1], shift: 2, slant: [-3, 3]}"},
	{"warp", "{do: warp, slant: 4}"},
	{"crop", "{do: crop, area: [0.5, 1], aspect: [0.8, 1.25], to: [32, 32]}"},
	{"crop", "{do: crop, size: [20, 30]}"},
	{"resize", "{do: resize, to: [48, 40]}"},
	{"pick", "{do: pick, from: [{do: blur, sigma: 1}, {do: gamma, gamma: 2}], odds: [1, 3]}"},
	{"pick", "{do: pick, from: [{do: rotate, angle: 3}, {do: flip, axis: vertical}], odds: [2, 1]}"},
	{"gaussian-noise", "{do: gaussian-noise, sigma: [1, 5]}"},
	{"salt-and-pepper", "{do: salt-and-pepper, fraction: 0.01}"},
	{"shot-noise", "{do: shot-noise, photons: [10, 100]}"},
	{"speckle", "{do: speckle, sigma: 0.1}"},
	{"blur", "{do: blur, sigma: [0.5, 2]}"},
	{"brightness", "{do: brightness, delta: [-20, 20]}"},
	{"contrast", "{do: contrast, factor: [0.8, 1.2]}"},
	{"gamma", "{do: gamma, gamma: [0.8, 1.25]}"},
	{"hue", "{do: hue, angle: [-10, 10]}"},
	{"saturation", "{do: saturation, factor: [0.5, 1.5]}"},
	{"jpeg", "{do: jpeg, quality: [50, 90]}"},
	{"cutout", "{do: cutout, count: [1, 3], size: [4, 8], tone: 128, classes: ignore}"},
}

func psStepMap(t *testing.T, doc string) map[string]any {
	t.Helper()
	var m map[string]any
	if err := yaml.Unmarshal([]byte(doc), &m); err != nil {
		t.Fatalf("%s: %v", doc, err)
	}
	return m
}

// psGeometric reports whether a step map belongs under geometry.moves: a
// move, or a pick whose first choice is a move.
func psGeometric(step map[string]any) bool {
	op, _ := step["do"].(string)
	if op == "pick" {
		from, _ := step["from"].([]any)
		if len(from) > 0 {
			first, _ := from[0].(map[string]any)
			op, _ = first["do"].(string)
		}
	}
	return Geometric(op)
}

// psSectionDoc is a plan holding the one step under geometry.moves
// (geometry true) or pixels.
func psSectionDoc(t *testing.T, step map[string]any, geometry bool) []byte {
	t.Helper()
	doc := map[string]any{"name": "probe", "pixels": []any{step}}
	if geometry {
		doc = map[string]any{"name": "probe", "geometry": map[string]any{"moves": []any{step}}}
	}
	b, err := yaml.Marshal(doc)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// psPlanDoc is a plan holding the one step in its own section.
func psPlanDoc(t *testing.T, step map[string]any) []byte {
	t.Helper()
	return psSectionDoc(t, step, psGeometric(step))
}

// psStepOf returns the one step of a plan's normalized JSON.
func psStepOf(t *testing.T, js map[string]any) map[string]any {
	t.Helper()
	list, _ := js["pixels"].([]any)
	if g, _ := js["geometry"].(map[string]any); len(list) == 0 && g != nil {
		list, _ = g["moves"].([]any)
	}
	if len(list) != 1 {
		t.Fatalf("plan JSON %v does not hold one step", js)
	}
	return list[0].(map[string]any)
}

// psAgree checks that trueset and the schema give the same verdict on doc.
func psAgree(t *testing.T, sch *jsonschema.Schema, what string, doc []byte) {
	t.Helper()
	_, perr := ParsePlan("probe.yaml", doc)
	serr := sch.Validate(psInstance(t, doc))
	if (perr == nil) != (serr == nil) {
		t.Errorf("%s: trueset and the schema disagree\ntrueset: %v\nschema: %v\n%s", what, perr, serr, doc)
	}
}

func psCopy(m map[string]any) map[string]any {
	out := make(map[string]any, len(m))
	for k, v := range m {
		out[k] = v
	}
	return out
}

// Every field of every example removed, set to null, or given to an op that
// does not take it: trueset and the schema agree each time.
func TestPlanSchemaAgreesOnEveryField(t *testing.T) {
	sch := psCompile(t)
	// A well-typed value for each field, for giving it to another op.
	some := map[string]any{}
	for _, ex := range psSteps {
		for k, v := range psStepMap(t, ex.doc) {
			if _, ok := some[k]; !ok && k != "do" {
				some[k] = v
			}
		}
	}
	used := map[string]map[string]bool{}
	for _, ex := range psSteps {
		m := psStepMap(t, ex.doc)
		if m["do"] != ex.op {
			t.Fatalf("example %s has do %v", ex.doc, m["do"])
		}
		psAgree(t, sch, ex.doc, psPlanDoc(t, m))
		if _, err := ParsePlan("ex.yaml", psPlanDoc(t, m)); err != nil {
			t.Errorf("example %s is refused: %v", ex.doc, err)
		}
		// In the other section, it is refused by both.
		wrong := psSectionDoc(t, m, !psGeometric(m))
		psAgree(t, sch, ex.doc+" in the other section", wrong)
		if _, err := ParsePlan("x.yaml", wrong); err == nil {
			t.Errorf("%s in the other section is accepted", ex.doc)
		}
		if used[ex.op] == nil {
			used[ex.op] = map[string]bool{}
		}
		for k := range m {
			used[ex.op][k] = true
			without := psCopy(m)
			delete(without, k)
			psAgree(t, sch, ex.doc+" without "+k, psPlanDoc(t, without))
			null := psCopy(m)
			null[k] = nil
			psAgree(t, sch, ex.doc+" with "+k+": null", psPlanDoc(t, null))
		}
		allowed := map[string]bool{"do": true, "chance": true}
		for _, f := range stepFields[ex.op] {
			allowed[f] = true
		}
		for k, v := range some {
			if allowed[k] {
				continue
			}
			for _, val := range []any{v, nil} {
				extra := psCopy(m)
				extra[k] = val
				psAgree(t, sch, fmt.Sprintf("%s with %s: %v", ex.doc, k, val), psPlanDoc(t, extra))
				if _, err := ParsePlan("x.yaml", psPlanDoc(t, extra)); err == nil {
					t.Errorf("%s with %s: %v is accepted", ex.doc, k, val)
				}
			}
		}
	}
	// The examples use every field of every op, so nothing above was skipped.
	for op, fields := range stepFields {
		for _, f := range fields {
			if !used[op][f] {
				t.Errorf("no example of %s uses %s", op, f)
			}
		}
	}
}

// psBounds returns the minimum and maximum a field's number form allows in
// an op's then-clause (ok false when the field is not a range).
func psBounds(prop map[string]any) (lo, hi float64, integer, ok bool) {
	alts, _ := prop["anyOf"].([]any)
	if len(alts) == 0 {
		return 0, 0, false, false
	}
	first, _ := alts[0].(map[string]any)
	l, ok1 := psNumber(first["minimum"])
	h, ok2 := psNumber(first["maximum"])
	return l, h, first["type"] == "integer", ok1 && ok2
}

func psNumber(v any) (float64, bool) {
	switch x := v.(type) {
	case json.Number:
		f, err := x.Float64()
		return f, err == nil
	case float64:
		return x, true
	}
	return 0, false
}

// Every bound the schema states for a range is the bound trueset enforces:
// probed at the bound and just beyond it, as a number and as [min, max].
func TestPlanSchemaBoundsMatchValidation(t *testing.T) {
	sch := psCompile(t)
	rules := psRules(t, psSchemaDoc(t))
	probed := 0
	for _, ex := range psSteps {
		m := psStepMap(t, ex.doc)
		props, _ := rules[ex.op]["properties"].(map[string]any)
		for k := range m {
			prop, _ := props[k].(map[string]any)
			lo, hi, integer, ok := psBounds(prop)
			if !ok {
				continue
			}
			eps := func(v float64) float64 {
				if integer {
					return 1
				}
				return 1e-3 * max(1, abs(v))
			}
			for _, v := range []float64{lo, hi, lo - eps(lo), hi + eps(hi)} {
				var val any = v
				if integer {
					val = int(v)
				}
				for _, form := range []any{val, []any{val, val}} {
					doc := psCopy(m)
					doc[k] = form
					psAgree(t, sch, fmt.Sprintf("%s with %s: %v", ex.op, k, form), psPlanDoc(t, doc))
					probed++
				}
			}
			// One end inside, the other outside.
			doc := psCopy(m)
			doc[k] = []any{lo, hi + eps(hi)}
			psAgree(t, sch, fmt.Sprintf("%s with %s: [lo, hi+ε]", ex.op, k), psPlanDoc(t, doc))
		}
	}
	// Bounds of the plan-wide settings.
	for _, c := range []struct {
		doc  string
		want bool
	}{
		{"outside: {tone: 0}", true}, {"outside: {tone: 255}", true},
		{"outside: {tone: -0.001}", false}, {"outside: {tone: 255.001}", false},
		{"outside: {tone: [0, 0, 255]}", true}, {"outside: {tone: [0, 0, 256]}", false}, {"outside: {tone: [-1, 0, 0]}", false},
		{"outside: {tone: [0, 0, 0, 0]}", false}, {"outside: {tone: [0.5, 0, 0]}", false},
		{"cuts: {least_shown: 0}", true}, {"cuts: {least_shown: 1}", true},
		{"cuts: {least_shown: -0.001}", false}, {"cuts: {least_shown: 1.001}", false},
		{"cuts: {tries: 1}", true}, {"cuts: {tries: 1000}", true}, {"cuts: {tries: 1001}", false}, {"cuts: {tries: -1}", false},
	} {
		doc := []byte("name: t\ngeometry: {" + c.doc + "}\n" + psTail)
		_, perr := ParsePlan("probe.yaml", doc)
		if (perr == nil) != c.want {
			t.Errorf("%s: trueset says %v, want accepted=%v", c.doc, perr, c.want)
		}
		psAgree(t, sch, c.doc, doc)
		probed++
	}
	t.Logf("%d bound probes", probed)
}

func abs(f float64) float64 {
	if f < 0 {
		return -f
	}
	return f
}

// psRules returns each op's then-clause from $defs/step/allOf.
func psRules(t *testing.T, doc map[string]any) map[string]map[string]any {
	t.Helper()
	step := psAt(t, doc, "$defs/step")
	all, _ := step["allOf"].([]any)
	out := map[string]map[string]any{}
	for i, r := range all {
		rule, _ := r.(map[string]any)
		ifs, _ := rule["if"].(map[string]any)
		props, _ := ifs["properties"].(map[string]any)
		opc, _ := props["do"].(map[string]any)
		op, _ := opc["const"].(string)
		if op == "" {
			t.Fatalf("$defs/step/allOf/%d: no if do const", i)
		}
		if req, _ := ifs["required"].([]any); len(req) != 1 || req[0] != "do" {
			t.Errorf("$defs/step/allOf/%d (%s): the if clause must require do, or it holds vacuously", i, op)
		}
		then, _ := rule["then"].(map[string]any)
		if then == nil {
			t.Fatalf("$defs/step/allOf/%d (%s): no then", i, op)
		}
		if _, dup := out[op]; dup {
			t.Errorf("op %s has two rules", op)
		}
		out[op] = then
	}
	return out
}

func psAt(t *testing.T, doc map[string]any, path string) map[string]any {
	t.Helper()
	var cur any = doc
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

func psKeys(m map[string]any) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

func psYAMLFields(typ reflect.Type) []string {
	var out []string
	for i := 0; i < typ.NumField(); i++ {
		if n := yamlnode.FieldName(typ.Field(i)); n != "" {
			out = append(out, n)
		}
	}
	sort.Strings(out)
	return out
}

func psStrings(v any) []string {
	raw, _ := v.([]any)
	out := make([]string, 0, len(raw))
	for _, e := range raw {
		out = append(out, fmt.Sprint(e))
	}
	sort.Strings(out)
	return out
}

// The schema's objects have exactly the Go structs' yaml fields, its do enum
// and per-op rules are stepFields' ops, each section's do enum is the ops
// Geometric puts there (plus pick; a pick's choices without it), and each
// op's allowed fields (the then-clause's propertyNames) are stepFields[op]
// plus do and chance.
func TestPlanSchemaFieldsMatchCode(t *testing.T) {
	doc := psSchemaDoc(t)
	for _, c := range []struct {
		typ reflect.Type
		at  string
	}{
		{reflect.TypeOf(Plan{}), ""},
		{reflect.TypeOf(Geometry{}), "properties/geometry"},
		{reflect.TypeOf(Outside{}), "properties/geometry/properties/outside"},
		{reflect.TypeOf(Cuts{}), "properties/geometry/properties/cuts"},
		{reflect.TypeOf(Step{}), "$defs/step"},
	} {
		s := psAt(t, doc, c.at)
		if s["additionalProperties"] != false {
			t.Errorf("%q (%s): additionalProperties is not false", c.at, c.typ.Name())
		}
		if got, want := psKeys(psAt(t, s, "properties")), psYAMLFields(c.typ); !reflect.DeepEqual(got, want) {
			t.Errorf("%q: schema properties %v, Go %s yaml fields %v", c.at, got, c.typ.Name(), want)
		}
	}
	stepTags := map[string]bool{}
	for _, f := range psYAMLFields(reflect.TypeOf(Step{})) {
		stepTags[f] = true
	}
	if got := psStrings(psAt(t, doc, "$defs/step/properties/do")["enum"]); !reflect.DeepEqual(got, opNames()) {
		t.Errorf("do enum %v, stepFields has %v", got, opNames())
	}
	for _, c := range []struct {
		at       string
		geometry bool
		pick     bool
	}{
		{"$defs/move", true, true}, {"$defs/picked-move", true, false},
		{"$defs/pixel-step", false, true}, {"$defs/picked-pixel-step", false, false},
	} {
		want := sectionOps(c.geometry)
		if !c.pick {
			want = want[:len(want)-1]
		}
		sort.Strings(want)
		if got := psStrings(psAt(t, doc, c.at+"/properties/do")["enum"]); !reflect.DeepEqual(got, want) {
			t.Errorf("%s: do enum %v, want %v", c.at, got, want)
		}
	}
	rules := psRules(t, doc)
	var ruleOps []string
	for op := range rules {
		ruleOps = append(ruleOps, op)
	}
	sort.Strings(ruleOps)
	if got := ruleOps; !reflect.DeepEqual(got, opNames()) {
		t.Errorf("schema has rules for %v, stepFields has %v", got, opNames())
	}
	for op, fields := range stepFields {
		then := rules[op]
		if then == nil {
			continue
		}
		want := append([]string{"do", "chance"}, fields...)
		sort.Strings(want)
		names, _ := then["propertyNames"].(map[string]any)
		if got := psStrings(names["enum"]); !reflect.DeepEqual(got, want) {
			t.Errorf("%s: schema allows %v, stepFields says %v", op, got, want)
		}
		for _, f := range fields {
			if !stepTags[f] {
				t.Errorf("stepFields[%s] names %s, which is not a Step yaml field", op, f)
			}
		}
		props, _ := then["properties"].(map[string]any)
		for _, k := range psKeys(props) {
			if !slicesContains(fields, k) {
				t.Errorf("%s: the then-clause describes %s, which %s does not take", op, k, op)
			}
		}
		for _, f := range fields {
			if _, ok := props[f]; !ok {
				t.Errorf("%s: the then-clause does not describe %s", op, f)
			}
		}
		for _, r := range psStrings(then["required"]) {
			if !slicesContains(fields, r) {
				t.Errorf("%s: requires %s, which it does not take", op, r)
			}
		}
	}
	// Bounds from plan.go's constants.
	for _, at := range []string{"properties/pixels", "properties/geometry/properties/moves"} {
		if got := fmt.Sprint(psAt(t, doc, at)["maxItems"]); got != fmt.Sprint(MaxSteps) {
			t.Errorf("%s maxItems %s, MaxSteps %d", at, got, MaxSteps)
		}
	}
	for _, op := range []string{"resize", "crop"} {
		out := psAt(t, rules[op], "properties/to")
		for i, it := range out["prefixItems"].([]any) {
			if got := fmt.Sprint(it.(map[string]any)["maximum"]); got != fmt.Sprint(MaxSide) {
				t.Errorf("%s to[%d] maximum %s, MaxSide %d", op, i, got, MaxSide)
			}
		}
	}
}

func slicesContains(s []string, v string) bool {
	for _, e := range s {
		if e == v {
			return true
		}
	}
	return false
}

// Every default the schema states is the one ParsePlan fills in.
func TestPlanSchemaDefaultsMatchCode(t *testing.T) {
	doc := psSchemaDoc(t)
	p, err := ParsePlan("min.yaml", []byte("name: t\n"+psTail))
	if err != nil {
		t.Fatal(err)
	}
	var got map[string]any
	if err := json.Unmarshal(p.JSON(), &got); err != nil {
		t.Fatal(err)
	}
	for _, path := range []string{"geometry/sampling", "geometry/outside/image", "geometry/outside/tone", "geometry/cuts/policy", "geometry/cuts/least_shown", "geometry/cuts/tries"} {
		parts := strings.Split(path, "/")
		sp := "properties/" + strings.Join(parts, "/properties/")
		def := fmt.Sprint(psAt(t, doc, sp)["default"])
		var v any = got
		for _, k := range parts {
			v = v.(map[string]any)[k]
		}
		if fmt.Sprint(v) != def {
			t.Errorf("%s: schema default %s, ParsePlan fills in %v", path, def, v)
		}
	}
	if got := fmt.Sprint(psAt(t, doc, "$defs/step/properties/chance")["default"]); got != fmt.Sprint(*p.Pixels[0].Chance) {
		t.Errorf("chance: schema default %s, ParsePlan fills in %v", got, *p.Pixels[0].Chance)
	}
	// Per-op defaults: the field left out of an example comes back as the
	// default (a number d is the range [d, d]; false is left out of JSON).
	rules := psRules(t, doc)
	checked := 0
	for _, ex := range psSteps {
		m := psStepMap(t, ex.doc)
		props, _ := rules[ex.op]["properties"].(map[string]any)
		for k := range m {
			prop, _ := props[k].(map[string]any)
			def, ok := prop["default"]
			if !ok {
				continue
			}
			without := psCopy(m)
			delete(without, k)
			p, err := ParsePlan("d.yaml", psPlanDoc(t, without))
			if err != nil {
				continue // k is needed in this example (warp with slant only)
			}
			var js map[string]any
			if err := json.Unmarshal(p.JSON(), &js); err != nil {
				t.Fatal(err)
			}
			step := psStepOf(t, js)
			filled, present := step[k]
			want := fmt.Sprint(def)
			switch d := def.(type) {
			case json.Number:
				want = fmt.Sprint([]any{d, d})
				if n, err := d.Float64(); err == nil {
					want = fmt.Sprint([]any{n, n})
				}
			case bool:
				if !d && !present {
					filled = false
				}
			}
			if fmt.Sprint(filled) != want {
				t.Errorf("%s.%s: schema default %v, ParsePlan fills in %v", ex.op, k, def, filled)
			}
			checked++
		}
	}
	if checked < 6 {
		t.Errorf("only %d per-op defaults checked", checked)
	}
}

// Every property of every closed object and of every op's then-clause has a
// description.
func TestPlanSchemaDescribesEveryField(t *testing.T) {
	doc := psSchemaDoc(t)
	check := func(at string, props map[string]any) {
		for _, k := range psKeys(props) {
			p, _ := props[k].(map[string]any)
			if d, _ := p["description"].(string); strings.TrimSpace(d) == "" {
				t.Errorf("%s/properties/%s has no description", at, k)
			}
		}
	}
	var walk func(v any, at string)
	walk = func(v any, at string) {
		switch x := v.(type) {
		case map[string]any:
			if x["additionalProperties"] == false {
				props, _ := x["properties"].(map[string]any)
				check(at, props)
			}
			for _, k := range psKeys(x) {
				walk(x[k], at+"/"+k)
			}
		case []any:
			for i, e := range x {
				walk(e, fmt.Sprintf("%s/%d", at, i))
			}
		}
	}
	walk(doc, "#")
	for op, then := range psRules(t, doc) {
		props, _ := then["properties"].(map[string]any)
		check("rule "+op, props)
		if d, _ := then["description"].(string); d == "" {
			t.Errorf("rule %s has no description", op)
		}
	}
}
