// Package yamlnode decodes YAML documents into Go structs node by node, so
// that every refusal names the file, line, column, field path, the bad value
// and what is allowed. Recipes (package gen) and augmentation plans (package
// augment) share it; it imports nothing of ours.
package yamlnode

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"reflect"
	"sort"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"
)

// Error is a refused recipe: it names the file, line, column, the field
// path, the bad value and what is allowed.
type Error struct {
	File   string
	Line   int
	Column int
	Path   string // e.g. layers[0].objects[1].size
	Value  string // the offending value as written, may be empty
	Msg    string // what is wrong and what is allowed
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d:%d", e.Line, e.Column)
	}
	b.WriteString(": ")
	if e.Path != "" {
		b.WriteString(e.Path)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	if e.Value != "" {
		fmt.Fprintf(&b, " (got %s)", e.Value)
	}
	return b.String()
}

// pos is a line and column in the recipe file.
type pos struct{ line, col int }

// decoder turns a YAML node tree into recipe structs, rejecting unknown
// fields and wrong types, and remembers where every field path was written.
type Decoder struct {
	file string
	at   map[string]pos
}

// NewDecoder returns a Decoder whose errors name file.
func NewDecoder(file string) *Decoder { return &Decoder{file: file, at: map[string]pos{}} }

// File is the name errors carry.
func (d *Decoder) File() string { return d.file }

// Written reports whether the document gave a value at path (null included).
func (d *Decoder) Written(path string) bool {
	_, ok := d.at[path]
	return ok
}

// NodeDecoder is implemented by recipe types with a flexible YAML form (a
// scalar or a [min, max] pair, say).
type NodeDecoder interface {
	DecodeNode(d *Decoder, n *yaml.Node, path string) error
}

func (d *Decoder) ErrAt(n *yaml.Node, path, value, format string, args ...any) *Error {
	e := &Error{File: d.file, Path: path, Value: value, Msg: fmt.Sprintf(format, args...)}
	if n != nil {
		e.Line, e.Column = n.Line, n.Column
	} else if p, ok := d.at[path]; ok {
		e.Line, e.Column = p.line, p.col
	}
	return e
}

// errPath reports an error at a field path recorded during decoding; when the
// path was not written (a missing field) it falls back to its parent.
func (d *Decoder) ErrPath(path, value, format string, args ...any) *Error {
	p := path
	for {
		if at, ok := d.at[p]; ok {
			e := d.ErrAt(nil, path, value, format, args...)
			e.Line, e.Column = at.line, at.col
			return e
		}
		if p == "" {
			break
		}
		i := strings.LastIndexAny(p, ".[")
		if i < 0 {
			i = 0 // a missing top-level field: fall back to the document
		}
		p = p[:i]
	}
	return d.ErrAt(nil, path, value, format, args...)
}

func Show(n *yaml.Node) string {
	switch n.Kind {
	case yaml.ScalarNode:
		if n.Tag == "!!str" {
			return strconv.Quote(n.Value)
		}
		return n.Value
	case yaml.SequenceNode:
		parts := make([]string, 0, len(n.Content))
		for _, c := range n.Content {
			parts = append(parts, Show(c))
		}
		s := "[" + strings.Join(parts, ", ") + "]"
		if len(s) > 60 {
			s = s[:57] + "...]"
		}
		return s
	case yaml.MappingNode:
		return "a mapping"
	case yaml.AliasNode:
		return "an alias"
	}
	return "nothing"
}

func KindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.ScalarNode:
		switch n.Tag {
		case "!!int":
			return "an integer"
		case "!!float":
			return "a number"
		case "!!bool":
			return "a boolean"
		case "!!null":
			return "null"
		}
		return "a string"
	case yaml.SequenceNode:
		return "a list"
	case yaml.MappingNode:
		return "a mapping"
	}
	return "an alias"
}

var nodeDecoderType = reflect.TypeOf((*NodeDecoder)(nil)).Elem()

func (d *Decoder) Decode(n *yaml.Node, v reflect.Value, path string) error {
	if n.Kind == yaml.DocumentNode && len(n.Content) == 1 {
		n = n.Content[0]
	}
	if n.Kind == yaml.AliasNode {
		return d.ErrAt(n, path, "", "YAML aliases are not allowed; write the value out")
	}
	d.at[path] = pos{n.Line, n.Column}
	if v.Kind() == reflect.Pointer {
		if n.Tag == "!!null" {
			return nil
		}
		if v.IsNil() {
			v.Set(reflect.New(v.Type().Elem()))
		}
		return d.Decode(n, v.Elem(), path)
	}
	if v.CanAddr() && v.Addr().Type().Implements(nodeDecoderType) {
		return v.Addr().Interface().(NodeDecoder).DecodeNode(d, n, path)
	}
	switch v.Kind() {
	case reflect.Struct:
		return d.decodeStruct(n, v, path)
	case reflect.Slice:
		if n.Kind != yaml.SequenceNode {
			return d.ErrAt(n, path, Show(n), "want a list, found %s", KindName(n))
		}
		s := reflect.MakeSlice(v.Type(), len(n.Content), len(n.Content))
		for i, c := range n.Content {
			if err := d.Decode(c, s.Index(i), fmt.Sprintf("%s[%d]", path, i)); err != nil {
				return err
			}
		}
		v.Set(s)
		return nil
	case reflect.String:
		if n.Kind != yaml.ScalarNode || n.Tag == "!!null" {
			return d.ErrAt(n, path, Show(n), "want a string, found %s", KindName(n))
		}
		v.SetString(n.Value)
		return nil
	case reflect.Bool:
		if n.Kind != yaml.ScalarNode || n.Tag != "!!bool" {
			return d.ErrAt(n, path, Show(n), "want true or false, found %s", KindName(n))
		}
		b, _ := strconv.ParseBool(strings.ToLower(n.Value))
		v.SetBool(b)
		return nil
	case reflect.Int:
		i, err := ScalarInt(n)
		if err != nil {
			return d.ErrAt(n, path, Show(n), "%v", err)
		}
		v.SetInt(int64(i))
		return nil
	case reflect.Float64:
		f, err := ScalarFloat(n)
		if err != nil {
			return d.ErrAt(n, path, Show(n), "%v", err)
		}
		v.SetFloat(f)
		return nil
	}
	return d.ErrAt(n, path, "", "internal: cannot decode into %s", v.Type())
}

func ScalarInt(n *yaml.Node) (int, error) {
	if n.Kind != yaml.ScalarNode || (n.Tag != "!!int" && n.Tag != "!!float") {
		return 0, fmt.Errorf("want an integer, found %s", KindName(n))
	}
	f, err := strconv.ParseFloat(n.Value, 64)
	if err != nil {
		i, err2 := strconv.ParseInt(n.Value, 0, 64)
		if err2 != nil {
			return 0, fmt.Errorf("want an integer, found %s", KindName(n))
		}
		f = float64(i)
	}
	if f != float64(int64(f)) || f > 1<<31 || f < -(1<<31) {
		return 0, fmt.Errorf("want a whole number within ±2^31")
	}
	return int(f), nil
}

func ScalarFloat(n *yaml.Node) (float64, error) {
	if n.Kind != yaml.ScalarNode || (n.Tag != "!!int" && n.Tag != "!!float") {
		return 0, fmt.Errorf("want a number, found %s", KindName(n))
	}
	f, err := strconv.ParseFloat(n.Value, 64)
	if err != nil {
		i, err2 := strconv.ParseInt(n.Value, 0, 64)
		if err2 != nil {
			return 0, fmt.Errorf("want a number, found %s", KindName(n))
		}
		f = float64(i)
	}
	if f != f || f > 1e12 || f < -1e12 {
		return 0, fmt.Errorf("want a finite number within ±1e12")
	}
	return f, nil
}

// FieldName is the YAML name of a struct field ("" when it has none).
func FieldName(f reflect.StructField) string {
	tag := f.Tag.Get("yaml")
	if tag == "-" {
		return ""
	}
	if i := strings.IndexByte(tag, ','); i >= 0 {
		tag = tag[:i]
	}
	return tag
}

func (d *Decoder) decodeStruct(n *yaml.Node, v reflect.Value, path string) error {
	if n.Kind != yaml.MappingNode {
		return d.ErrAt(n, path, Show(n), "want a mapping, found %s", KindName(n))
	}
	t := v.Type()
	fields := map[string]int{}
	var names []string
	for i := 0; i < t.NumField(); i++ {
		if name := FieldName(t.Field(i)); name != "" {
			fields[name] = i
			names = append(names, name)
		}
	}
	seen := map[string]bool{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, val := n.Content[i], n.Content[i+1]
		sub := k.Value
		if path != "" {
			sub = path + "." + k.Value
		}
		idx, ok := fields[k.Value]
		if !ok {
			if to, ok := Renamed[k.Value]; ok {
				if _, here := fields[to]; here {
					return d.ErrAt(k, sub, "", "unknown field %q: trueset spells it %q", k.Value, to)
				}
			}
			sorted := append([]string(nil), names...)
			sort.Strings(sorted)
			hint := ""
			if near := Nearest(k.Value, sorted); near != "" {
				hint = fmt.Sprintf(" (did you mean %q?)", near)
			}
			return d.ErrAt(k, sub, "", "unknown field %q%s; allowed here: %s", k.Value, hint, strings.Join(sorted, ", "))
		}
		if seen[k.Value] {
			return d.ErrAt(k, sub, "", "field %q is given twice", k.Value)
		}
		seen[k.Value] = true
		if err := d.Decode(val, v.Field(idx), sub); err != nil {
			return err
		}
		if (val.Kind == yaml.MappingNode || val.Kind == yaml.SequenceNode) && val.Line != k.Line {
			// A block mapping or list starts below its key; an error about
			// the field as a whole points at the key.
			d.at[sub] = pos{k.Line, k.Column}
		}
	}
	return nil
}

// OneDocument refuses a file holding more than one YAML document (a second
// document after "---" would otherwise be ignored), naming the line where the
// second one starts. what names the kind of file ("recipe", "plan").
func OneDocument(file, what string, data []byte) error {
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var first, second yaml.Node
	if err := dec.Decode(&first); err != nil {
		return nil // the caller reports syntax errors of the first document
	}
	switch err := dec.Decode(&second); {
	case errors.Is(err, io.EOF):
		return nil
	case err != nil:
		return &Error{File: file, Msg: fmt.Sprintf("a %s is one YAML document; what follows the first is not valid YAML: %v", what, err)}
	}
	return &Error{File: file, Line: second.Line, Column: second.Column, Msg: fmt.Sprintf("a %s is one YAML document; a second one starts here (remove the \"---\" line and what follows, or merge it into the first)", what)}
}

// Renamed maps spellings trueset does not use (the other English spelling,
// and names of earlier versions) to the one it does, so a refusal can name
// the right field.
var Renamed = map[string]string{
	"colour":      "color",
	"end_colour":  "end_color",
	"centre":      "center",
	"grey":        "gray",
	"min_visible": "least_shown",
	"min_pixels":  "least_pixels",
}

// Nearest returns the candidate within edit distance 2 of s (and closer
// than half its length), or "" when none is that close.
func Nearest(s string, candidates []string) string {
	best, bestD := "", 3
	for _, c := range candidates {
		if d := editDistance(s, c); d < bestD && 2*d < len(s) {
			best, bestD = c, d
		}
	}
	return best
}

// editDistance is the optimal string alignment distance between a and b:
// insertions, deletions, substitutions and transpositions of neighbours
// each cost 1 (Damerau 1964; the restricted form, no substring edited twice).
func editDistance(a, b string) int {
	d := make([][]int, len(a)+1)
	for i := range d {
		d[i] = make([]int, len(b)+1)
		d[i][0] = i
	}
	for j := range d[0] {
		d[0][j] = j
	}
	for i := 1; i <= len(a); i++ {
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			d[i][j] = min(d[i-1][j]+1, d[i][j-1]+1, d[i-1][j-1]+cost)
			if i > 1 && j > 1 && a[i-1] == b[j-2] && a[i-2] == b[j-1] {
				d[i][j] = min(d[i][j], d[i-2][j-2]+1)
			}
		}
	}
	return d[len(a)][len(b)]
}
