package augment

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"

	"github.com/trueset/trueset/manifest"
)

// The columns.json schema is checked with a validator the project did not
// write. Source: JSON Schema draft 2020-12 (https://json-schema.org/draft/2020-12),
// validated with santhosh-tekuri/jsonschema v6, which also checks the schema
// against the draft 2020-12 meta-schema when it compiles it. trueset
// (readFolderColumns) and the schema must judge the same documents alike;
// only the checks the schema's description leaves to trueset (class names
// against classes.json, glyphs for readings) are outside this table.

const colSchemaFile = "../schema/columns.schema.json"

func colCompile(t *testing.T) *jsonschema.Schema {
	t.Helper()
	f, err := os.Open(colSchemaFile)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	doc, err := jsonschema.UnmarshalJSON(f)
	if err != nil {
		t.Fatal(err)
	}
	c := jsonschema.NewCompiler()
	id := doc.(map[string]any)["$id"].(string)
	if err := c.AddResource(id, doc); err != nil {
		t.Fatal(err)
	}
	sch, err := c.Compile(id)
	if err != nil {
		t.Fatalf("compiling %s: %v", colSchemaFile, err)
	}
	return sch
}

var colClasses = []manifest.Class{{ID: 0, Name: "background"}, {ID: 1, Name: "washer"}, {ID: 2, Name: "digit-1"}, {ID: 3, Name: "digit-7"}}

func TestColumnsSchemaAgrees(t *testing.T) {
	sch := colCompile(t)
	glyphs := `"glyphs": {"digit-1": "1", "digit-7": "7"}`
	for _, c := range []struct {
		doc string
		ok  bool
	}{
		{`{"columns": {}}`, true},
		{`{"columns": {"washers": {"kind": "count", "classes": ["washer"]}}}`, true},
		{`{"columns": {"n": {"kind": "count"}}}`, true},
		{`{"columns": {"a": {"kind": "sum", "of": "area", "classes": ["washer"]}}}`, true},
		{`{"columns": {"a": {"kind": "mean", "of": "area"}}}`, true},
		{`{` + glyphs + `, "columns": {"code": {"kind": "text"}}}`, true},
		{`{` + glyphs + `, "columns": {"code": {"kind": "number", "classes": ["digit-1"]}}}`, true},
		{`{"columns": {"lighting": {"kind": "image"}}}`, true},
		{`{"columns": {"cam": {"kind": "image", "type": "text"}}}`, true},
		{`{"columns": {"cam": {"kind": "image", "type": "number"}}}`, true},
		{`{}`, false},
		{`[]`, false},
		{`{"columns": {"n": {}}}`, false},
		{`{"columns": {"n": {"kind": "median"}}}`, false},
		{`{"columns": {"n": {"kind": "count", "of": "area"}}}`, false},
		{`{"columns": {"n": {"kind": "count", "type": "text"}}}`, false},
		{`{"columns": {"a": {"kind": "sum"}}}`, false},
		{`{"columns": {"a": {"kind": "sum", "of": "size"}}}`, false},
		{`{"columns": {"a": {"kind": "max", "of": "value"}}}`, false},
		{`{"columns": {"l": {"kind": "image", "type": "date"}}}`, false},
		{`{"columns": {"l": {"kind": "image", "classes": ["washer"]}}}`, false},
		{`{"columns": {"l": {"kind": "image", "of": "area"}}}`, false},
		{`{"columns": {"id": {"kind": "image"}}}`, false},
		{`{"columns": {"n": {"kind": "count", "weight": 2}}}`, false},
		{`{"colums": {}}`, false},
		{`{"glyphs": {"digit-1": "12"}, "columns": {}}`, false},
		{`{"glyphs": {"digit-1": ""}, "columns": {}}`, false},
		{`{` + glyphs + `, "columns": {"code": {"kind": "text", "of": "area"}}}`, false},
	} {
		dir := t.TempDir()
		p := filepath.Join(dir, "columns.json")
		if err := os.WriteFile(p, []byte(c.doc), 0o644); err != nil {
			t.Fatal(err)
		}
		_, terr := readFolderColumns(p, colClasses)
		inst, err := jsonschema.UnmarshalJSON(bytes.NewReader([]byte(c.doc)))
		if err != nil {
			t.Fatal(err)
		}
		serr := sch.Validate(inst)
		if (terr == nil) != c.ok || (serr == nil) != c.ok {
			t.Errorf("%s: want ok=%v; trueset says %v, the schema says %v", c.doc, c.ok, terr, serr)
		}
	}
}

// TestColumnsChecksBeyondSchema: what only trueset checks, each naming the
// file and the column.
func TestColumnsChecksBeyondSchema(t *testing.T) {
	for _, c := range []struct{ doc, want string }{
		{`{"columns": {"n": {"kind": "count", "classes": ["bolt"]}}}`, `columns.n.classes: class "bolt" is not in classes.json (washer, digit-1, digit-7)`},
		{`{"columns": {"code": {"kind": "text"}}}`, `columns.code: a text column reads glyph classes, but "glyphs" names none`},
		{`{"glyphs": {"digit-1": "1"}, "columns": {"code": {"kind": "text", "classes": ["digit-7"]}}}`, `class "digit-7" has no character in "glyphs"`},
		{`{"glyphs": {"nut": "1"}, "columns": {}}`, `glyphs.nut: class "nut" is not in classes.json`},
		{`{"columns": {"a": {"kind": "sum", "of": "size"}}}`, `objects read from a plain folder have no planned size, angle or value`},
		{`{"columns": {"n": {"kind": "count"}}, "columns2": 1}`, `unknown field "columns2"`},
	} {
		p := filepath.Join(t.TempDir(), "columns.json")
		os.WriteFile(p, []byte(c.doc), 0o644)
		_, err := readFolderColumns(p, colClasses)
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), p) {
			t.Errorf("%s: got %v, want an error naming %s with %q", c.doc, err, p, c.want)
		}
	}
}

// TestLabelsTypoAndMismatch: a typo in a numeric column is refused naming
// file:line and column (undeclared: most cells are numbers; declared: the
// column is numeric), a declared text column keeps digit strings as text,
// and a declared count that is not what the masks hold is refused naming
// the row. testdata/plain: disc-01 has 3 leaf discs, disc-02 2 (its README).
func TestLabelsTypoAndMismatch(t *testing.T) {
	for _, c := range []struct{ csv, cols, want string }{
		{"id,leaves\ndisc-01,3\ndisc-02,x\ndisc-03,2\ndisc-04,4\n", "", `labels.csv:3: column "leaves": "x" is not a number, but 3 of the column's 4 cells are`},
		{"id,leaves\ndisc-01,3\ndisc-02,x\ndisc-03,y\ndisc-04,4\n", `{"columns": {"leaves": {"kind": "count", "classes": ["leaf-disc"]}}}`, `labels.csv:3: column "leaves": "x" is not a number; columns.json declares the column numeric`},
		{"id,leaves\ndisc-01,4\ndisc-02,2\ndisc-03,2\ndisc-04,4\n", `{"columns": {"leaves": {"kind": "count", "classes": ["leaf-disc"]}}}`, `labels.csv:2: column "leaves" is 4 for id "disc-01", but its masks give 3`},
	} {
		d := copyFixture(t)
		writeFile(t, filepath.Join(d, "labels.csv"), []byte(c.csv))
		if c.cols != "" {
			writeFile(t, filepath.Join(d, "columns.json"), []byte(c.cols))
		}
		_, err := ReadFolder(d, 1<<20)
		if err == nil || !strings.Contains(err.Error(), filepath.Join(d, c.want)) {
			t.Errorf("%q: got %v, want %q", c.csv, err, c.want)
		}
	}
	d := copyFixture(t)
	writeFile(t, filepath.Join(d, "labels.csv"), []byte("id,tray\ndisc-01,007\ndisc-02,12\ndisc-03,007\ndisc-04,3\n"))
	writeFile(t, filepath.Join(d, "columns.json"), []byte(`{"columns": {"tray": {"kind": "image", "type": "text"}}}`))
	f, err := ReadFolder(d, 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range f.Sources {
		if v := s.Targets["tray"]; !v.IsStr {
			t.Errorf("%s: tray %v is not text", s.ID, v)
		}
	}
}

// TestDropRefusedForReadings: the drop policy with a move that can cut is
// refused before any work when a target reads glyphs, saying why.
func TestDropRefusedForReadings(t *testing.T) {
	defs := []manifest.TargetDef{{Name: "code", Kind: "text"}}
	for _, c := range []struct {
		plan string
		bad  bool
	}{
		{"name: a\ngeometry:\n  cuts: {policy: drop}\n  moves:\n    - do: crop\n      area: [0.5, 0.9]\n", true},
		{"name: a\ngeometry:\n  cuts: {policy: drop}\n  moves:\n    - do: rotate\n      angle: [-5, 5]\n", true},
		{"name: a\ngeometry:\n  cuts: {policy: drop}\n  moves:\n    - do: rotate\n      angle: [-5, 5]\n      grow_canvas: true\n", false},
		{"name: a\ngeometry:\n  cuts: {policy: drop}\n  moves:\n    - do: warp\n      zoom: [0.8, 1]\n", false},
		{"name: a\ngeometry:\n  cuts: {policy: redraw}\n  moves:\n    - do: crop\n      area: [0.5, 0.9]\n", false},
	} {
		p, err := ParsePlan("p.yaml", []byte(c.plan))
		if err != nil {
			t.Fatal(err)
		}
		err = CheckReadingCuts(p, defs)
		if (err != nil) != c.bad || err != nil && !strings.Contains(err.Error(), `could cut an object that target "code" reads`) {
			t.Errorf("%s: %v", c.plan, err)
		}
		if err := CheckReadingCuts(p, nil); err != nil {
			t.Errorf("no reading target: %v", err)
		}
	}
}

// TestColumnsREADMEExample: the columns.json the README shows is valid for
// the schema and for trueset, given the classes its scenario names.
func TestColumnsREADMEExample(t *testing.T) {
	b, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	i := strings.Index(s, "and its `columns.json`:\n\n```json\n")
	if i < 0 {
		t.Fatal("README.md has no columns.json example")
	}
	s = s[i+len("and its `columns.json`:\n\n```json\n"):]
	doc := s[:strings.Index(s, "```")]
	classes := []manifest.Class{{ID: 0, Name: "background"}, {ID: 1, Name: "washer"}}
	for k := 0; k <= 9; k++ {
		classes = append(classes, manifest.Class{ID: 2 + k, Name: "digit-" + string(rune('0'+k))})
	}
	p := filepath.Join(t.TempDir(), "columns.json")
	writeFile(t, p, []byte(doc))
	c, err := readFolderColumns(p, classes)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Columns) != 5 || c.Columns["bin_code"].Kind != "text" {
		t.Errorf("README example read as %+v", c)
	}
	inst, err := jsonschema.UnmarshalJSON(strings.NewReader(doc))
	if err != nil {
		t.Fatal(err)
	}
	if err := colCompile(t).Validate(inst); err != nil {
		t.Errorf("the schema refuses the README example: %v", err)
	}
}
