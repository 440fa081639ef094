package augment

// columns.json: what each labels.csv column of a plain folder means.
//
//	{
//	  "glyphs":  {"digit-0": "0", "digit-1": "1", …},   optional: the character each glyph-like class reads as
//	  "columns": {
//	    "seedlings":  {"kind": "count", "classes": ["seedling"]},
//	    "leaf_area":  {"kind": "sum", "of": "area", "classes": ["leaf"]},
//	    "tray_code":  {"kind": "text", "classes": ["digit-0", …]},
//	    "lighting":   {"kind": "image"},
//	    "camera":     {"kind": "image", "type": "text"}
//	  }
//	}
//
// A derived column (count, sum, min, max, mean, text, number) is a target
// trueset computes from the masks, as a recipe's targets are; every source's
// labels.csv cell must equal what its masks give. An image column is a
// property of the whole photo that geometry cannot change (lighting, camera),
// carried into every copy as is. schema/columns.schema.json is the reference.

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"sort"
	"strings"
	"unicode/utf8"

	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/manifest"
)

// folderColumnsFile declares the meaning of labels.csv columns.
const folderColumnsFile = "columns.json"

// maxColumnsBytes bounds columns.json.
const maxColumnsBytes = 1 << 20

// Column is one declared labels.csv column.
type Column struct {
	Kind    string   `json:"kind"`              // count, sum, min, max, mean, text, number or image
	Classes []string `json:"classes,omitempty"` // derived kinds: the classes it runs over (empty = all; text/number: every class with a glyph)
	Of      string   `json:"of,omitempty"`      // sum, min, max, mean: "area" (the only per-object quantity a plain folder has)
	Type    string   `json:"type,omitempty"`    // image: "number" or "text" (default: numeric when every cell is a number)
}

// Columns is a folder's columns.json.
type Columns struct {
	Glyphs  map[string]string `json:"glyphs,omitempty"`
	Columns map[string]Column `json:"columns"`
}

// derivedKinds are the column kinds computed from the masks.
var derivedKinds = map[string]bool{"count": true, "sum": true, "min": true, "max": true, "mean": true, "text": true, "number": true}

// Derived reports whether the column is recomputed from the masks.
func (c Column) Derived() bool { return derivedKinds[c.Kind] }

// readFolderColumns reads and checks columns.json against the class table
// (nil classes: the folder has no classes.json, classes are class-<id>); a
// missing file gives nil.
func readFolderColumns(p string, classes []manifest.Class) (*Columns, error) {
	if _, err := os.Lstat(p); errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	b, err := safefile.Read(p, folderColumnsFile, maxColumnsBytes)
	if err != nil {
		return nil, err
	}
	if t := bytes.TrimSpace(b); len(t) == 0 || t[0] != '{' {
		return nil, fmt.Errorf(`%s: not a JSON object; expected {"columns": {"NAME": {"kind": "count", "classes": ["CLASS"]}, …}}`, p)
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var c Columns
	if err := dec.Decode(&c); err != nil {
		var syn *json.SyntaxError
		var typ *json.UnmarshalTypeError
		switch {
		case errors.As(err, &syn):
			return nil, fmt.Errorf("%s:%d: %v", p, folderLine(b, syn.Offset), err)
		case errors.As(err, &typ):
			return nil, fmt.Errorf("%s:%d: %q must be %s, not a JSON %s", p, folderLine(b, typ.Offset), typ.Field, folderJSONKind(typ.Type.String()), typ.Value)
		}
		return nil, fmt.Errorf(`%s: %v (columns.json has "glyphs" and "columns"; a column has "kind", "classes", "of" and "type")`, p, err)
	}
	if dec.More() {
		return nil, fmt.Errorf("%s: data after the object", p)
	}
	if c.Columns == nil {
		return nil, fmt.Errorf(`%s: no "columns"`, p)
	}
	known := map[string]bool{}
	var names []string
	for _, cl := range classes {
		if cl.ID != 0 {
			known[cl.Name] = true
			names = append(names, cl.Name)
		}
	}
	checkClass := func(at, name string) error {
		if classes != nil && !known[name] {
			return fmt.Errorf("%s: class %q is not in %s (%s)", at, name, folderClassesFile, strings.Join(names, ", "))
		}
		if classes == nil && !strings.HasPrefix(name, "class-") {
			return fmt.Errorf("%s: class %q: without %s the classes are named class-<id>", at, name, folderClassesFile)
		}
		return nil
	}
	for _, g := range sortedKeys(c.Glyphs) {
		at := fmt.Sprintf("%s: glyphs.%s", p, g)
		if err := checkClass(at, g); err != nil {
			return nil, err
		}
		if ch := c.Glyphs[g]; utf8.RuneCountInString(ch) != 1 || strings.TrimSpace(ch) == "" {
			return nil, fmt.Errorf("%s: %q; a glyph class reads as one visible character", at, ch)
		}
	}
	for _, name := range sortedKeys(c.Columns) {
		col := c.Columns[name]
		at := fmt.Sprintf("%s: columns.%s", p, name)
		if err := checkTargetName(name); err != nil {
			return nil, fmt.Errorf("%s: %w", at, err)
		}
		if name == "id" {
			return nil, fmt.Errorf("%s: the id column names the image; it is no target", at)
		}
		switch {
		case col.Kind == "image":
			if col.Classes != nil || col.Of != "" {
				return nil, fmt.Errorf("%s: an image column (a property of the whole photo, carried as is) takes no classes or of", at)
			}
			if col.Type != "" && col.Type != "number" && col.Type != "text" {
				return nil, fmt.Errorf("%s: type %q; want number or text", at, col.Type)
			}
		case derivedKinds[col.Kind]:
			if col.Type != "" {
				return nil, fmt.Errorf("%s: type is for image columns; a %s column is a %s", at, col.Kind, map[bool]string{true: "text", false: "number"}[col.Kind == "text"])
			}
			for _, cl := range col.Classes {
				if err := checkClass(at+".classes", cl); err != nil {
					return nil, err
				}
			}
			switch col.Kind {
			case "sum", "min", "max", "mean":
				if col.Of != "area" {
					return nil, fmt.Errorf(`%s: a %s column needs "of": "area" (got %q); objects read from a plain folder have no planned size, angle or value, only what their masks measure`, at, col.Kind, col.Of)
				}
			case "text", "number":
				if col.Of != "" {
					return nil, fmt.Errorf("%s: a %s column reads glyphs; it takes no of", at, col.Kind)
				}
				if len(c.Glyphs) == 0 {
					return nil, fmt.Errorf(`%s: a %s column reads glyph classes, but "glyphs" names none (e.g. "glyphs": {"digit-7": "7"})`, at, col.Kind)
				}
				for _, cl := range col.Classes {
					if _, ok := c.Glyphs[cl]; !ok {
						return nil, fmt.Errorf("%s: class %q has no character in \"glyphs\"", at, cl)
					}
				}
			default:
				if col.Of != "" {
					return nil, fmt.Errorf("%s: a count column takes no of", at)
				}
			}
		default:
			return nil, fmt.Errorf("%s: kind %q; want count, sum, min, max, mean, text, number (computed from the masks) or image (carried as is)", at, col.Kind)
		}
	}
	return &c, nil
}

// def is a derived column's target definition; text and number readings
// without classes read every glyph class.
func (c *Columns) def(name string) manifest.TargetDef {
	col := c.Columns[name]
	d := manifest.TargetDef{Name: name, Kind: col.Kind, Classes: col.Classes, Of: col.Of}
	if (col.Kind == "text" || col.Kind == "number") && len(d.Classes) == 0 {
		d.Classes = sortedKeys(c.Glyphs)
	}
	return d
}

// columnType is what a declared column's cells must be: "number", "text"
// or "" (infer).
func (c *Columns) columnType(name string) string {
	if c == nil {
		return ""
	}
	col, ok := c.Columns[name]
	switch {
	case !ok:
		return ""
	case col.Kind == "text":
		return "text"
	case col.Kind == "image":
		return col.Type
	}
	return "number"
}

func sortedKeys[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// glyph is the character class name reads as ("" for none).
func (c *Columns) glyph(class string) string {
	if c == nil {
		return ""
	}
	return c.Glyphs[class]
}

// checkSource checks a source's labels.csv cells of derived columns against
// what its masks give, naming the file, line and column when they differ.
func (c *Columns) checkSource(s *Source, nameOf func(int) string, labels string, line int) error {
	objs := make([]manifest.Object, len(s.Objects))
	copy(objs, s.Objects)
	for i := range objs {
		objs[i].ClassName = nameOf(objs[i].Class)
		objs[i].Glyph = c.glyph(objs[i].ClassName)
	}
	for _, name := range sortedKeys(c.Columns) {
		have, ok := s.Targets[name]
		if !ok || !c.Columns[name].Derived() {
			continue
		}
		d := c.def(name)
		got, err := manifest.EvalTarget(d, objs, nil)
		if err != nil {
			return fmt.Errorf("%s:%d: column %q: %v", labels, line, name, err)
		}
		if !sameCell(have, got) {
			what := d.Kind
			if d.Of != "" {
				what += " of " + d.Of
			}
			if len(d.Classes) > 0 {
				what += " over " + strings.Join(d.Classes, ", ")
			}
			return fmt.Errorf("%s:%d: column %q is %s for id %q, but its masks give %s (%s declares it a %s); fix the cell or the declaration",
				labels, line, name, quoteValue(have), s.ID, quoteValue(got), folderColumnsFile, what)
		}
	}
	return nil
}

// sameCell compares a labels.csv value with the one computed from the
// masks: text exactly, numbers to 6 decimals (the rounding of computed
// means) or, for a cell written with fewer decimals, to half its last digit.
func sameCell(cell, got manifest.Value) bool {
	if cell.IsStr || got.IsStr {
		return cell.IsStr == got.IsStr && cell.Str == got.Str
	}
	d := cell.Num - got.Num
	if d < 0 {
		d = -d
	}
	return d <= 1e-6 || d <= 0.5*decimalStep(cell.Num)
}

// decimalStep is the place value of the last decimal manifest.FormatNumber
// shows for f; whole numbers (and exponent forms) compare to 1e-6.
func decimalStep(f float64) float64 {
	s := manifest.FormatNumber(f)
	i := strings.IndexByte(s, '.')
	if i < 0 || strings.ContainsAny(s, "eE") {
		return 1e-6
	}
	step := 1.0
	for range s[i+1:] {
		step /= 10
	}
	return step
}

func quoteValue(v manifest.Value) string {
	if v.IsStr {
		return fmt.Sprintf("%q", v.Str)
	}
	return v.String()
}
