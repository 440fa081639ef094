package gen

import (
	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/internal/yamlnode"
	"github.com/trueset/trueset/manifest"
	"slices"

	"bytes"
	"fmt"
	"sort"
	"strconv"

	"go.yaml.in/yaml/v3"
)

// RecipeError is a refused recipe: file, line, column, field path, the bad
// value and what is allowed.
type RecipeError = yamlnode.Error

// Recipe is a parsed, validated scene description. Field tags are the YAML
// names; schema/recipe.schema.json describes the same syntax.
type Recipe struct {
	Name        string       `yaml:"name" json:"name"`
	Description string       `yaml:"description" json:"description,omitempty"`
	Canvas      Canvas       `yaml:"canvas" json:"canvas"`
	Background  Background   `yaml:"background" json:"background"`
	Classes     []ClassSpec  `yaml:"classes" json:"classes"`
	Layers      []Layer      `yaml:"layers" json:"layers"`
	Targets     []TargetSpec `yaml:"targets" json:"targets"`
	Split       *SplitSpec   `yaml:"split" json:"split,omitempty"`
	// Instruments (gen/instruments.go): planted label noise, held-out
	// combinations and shortcut bait.
	Mislabel *MislabelSpec `yaml:"mislabel" json:"mislabel,omitempty"`
	HoldOut  *HoldOutSpec  `yaml:"hold_out" json:"hold_out,omitempty"`
	Bait     *BaitSpec     `yaml:"bait" json:"bait,omitempty"`

	inst    *manifest.Instruments  // the instruments as manifest reads them
	bands   map[*ObjectSpec]*bands // held-out size and angle ranges per spec
	file    string
	fonts   map[string]*Font // by font name or file
	classID map[string]int
	dir     string
}

// Canvas is the image size and pixel format.
type Canvas struct {
	Width     int    `yaml:"width" json:"width"`
	Height    int    `yaml:"height" json:"height"`
	Mode      string `yaml:"mode" json:"mode"` // gray (default) or rgb
	Antialias *bool  `yaml:"antialias" json:"antialias"`
}

// Background fills the canvas before objects are drawn.
type Background struct {
	Kind         string      `yaml:"kind" json:"kind"` // solid, gradient or noise
	Intensity    *Range      `yaml:"intensity" json:"intensity,omitempty"`
	Color        *ColorRange `yaml:"color" json:"color,omitempty"`
	EndIntensity *Range      `yaml:"end_intensity" json:"end_intensity,omitempty"`
	EndColor     *ColorRange `yaml:"end_color" json:"end_color,omitempty"`
	Angle        *Range      `yaml:"angle" json:"angle,omitempty"`
	Cell         *Range      `yaml:"cell" json:"cell,omitempty"`
}

// ClassSpec names a class and its palette color; ids follow list order from 1.
type ClassSpec struct {
	Name  string `yaml:"name" json:"name"`
	Color []int  `yaml:"color" json:"color"`
}

// Layer is a group of objects placed by one layout; later layers draw on top.
type Layer struct {
	Layout  Layout       `yaml:"layout" json:"layout"`
	Objects []ObjectSpec `yaml:"objects" json:"objects"`
}

// Layout says where a layer's objects go.
type Layout struct {
	Kind           string    `yaml:"kind" json:"kind"` // scatter, row or grid
	Region         []float64 `yaml:"region" json:"region,omitempty"`
	MaxOverlap     float64   `yaml:"max_overlap" json:"max_overlap"`
	MinGap         float64   `yaml:"min_gap" json:"min_gap"`
	LeastShown     *float64  `yaml:"least_shown" json:"least_shown"`
	LeastPixels    *int      `yaml:"least_pixels" json:"least_pixels"`
	Spacing        *Range    `yaml:"spacing" json:"spacing,omitempty"`
	BaselineJitter float64   `yaml:"baseline_jitter" json:"baseline_jitter,omitempty"`
	Rows           int       `yaml:"rows" json:"rows,omitempty"`
	Cols           int       `yaml:"cols" json:"cols,omitempty"`
	Jitter         float64   `yaml:"jitter" json:"jitter,omitempty"`
}

// ObjectSpec describes the objects of one class in a layer, or the parts
// inside a parent object.
type ObjectSpec struct {
	Class       string       `yaml:"class" json:"class"`
	Shape       string       `yaml:"shape" json:"shape,omitempty"`
	Glyph       *GlyphSpec   `yaml:"glyph" json:"glyph,omitempty"`
	Count       Count        `yaml:"count" json:"count"`
	Size        Range        `yaml:"size" json:"size"`
	Aspect      *Range       `yaml:"aspect" json:"aspect"`
	Angle       *Range       `yaml:"angle" json:"angle"`
	Intensity   *Range       `yaml:"intensity" json:"intensity,omitempty"`
	Color       *ColorRange  `yaml:"color" json:"color,omitempty"`
	Sides       *IntRange    `yaml:"sides" json:"sides,omitempty"`
	Inner       *Range       `yaml:"inner" json:"inner,omitempty"`
	Corner      *Range       `yaml:"corner" json:"corner,omitempty"`
	Thickness   *Range       `yaml:"thickness" json:"thickness,omitempty"`
	Value       *ValueSpec   `yaml:"value" json:"value,omitempty"`
	Arrangement string       `yaml:"arrangement" json:"arrangement,omitempty"` // parts only: pips or scatter
	Parts       []ObjectSpec `yaml:"parts" json:"parts,omitempty"`

	classID int
	font    *Font
	chars   []rune
}

// GlyphSpec draws characters from a font.
type GlyphSpec struct {
	Font  string `yaml:"font" json:"font,omitempty"` // a Go font name, see FontNames
	File  string `yaml:"file" json:"file,omitempty"` // or a TTF/OTF file, relative to the recipe
	Chars string `yaml:"chars" json:"chars"`
}

// TargetSpec is a named aggregate over a sample's objects.
type TargetSpec struct {
	Name    string   `yaml:"name" json:"name"`
	Kind    string   `yaml:"kind" json:"kind"` // count, sum, min, max, mean, text, number
	Classes []string `yaml:"classes" json:"classes,omitempty"`
	Of      string   `yaml:"of" json:"of,omitempty"` // value, area, size, angle
}

// SplitSpec sets how samples are dealt to splits; command-line flags
// override it.
type SplitSpec struct {
	Ratios          string       `yaml:"ratios" json:"ratios,omitempty"`     // "train=0.8,val=0.1,test=0.1"
	Stratify        string       `yaml:"stratify" json:"stratify,omitempty"` // target name, class:NAME or classes
	RequireCoverage bool         `yaml:"require_coverage" json:"require_coverage,omitempty"`
	Balance         *BalanceSpec `yaml:"balance" json:"balance,omitempty"`
}

// BalanceSpec asks for equal numbers of samples per value of a target.
type BalanceSpec struct {
	Target string   `yaml:"target" json:"target"`
	Values []string `yaml:"values" json:"values"` // as the target prints them, e.g. 1, 2, 3
}

// Range is a closed interval [Min, Max]; a single number means Min = Max.
type Range = yamlnode.Range

// IntRange is a closed integer interval.
type IntRange = yamlnode.IntRange

func fnum(f float64) string { return yamlnode.FormatFloat(f) }

// Count is how many objects a spec yields: fixed, a uniform range, or a
// weighted choice {count: weight}.
type Count struct {
	Min, Max int
	Values   []int     // weighted form: the counts
	Weights  []float64 // and their weights
}

func (c *Count) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	if n.Kind == yaml.MappingNode {
		for i := 0; i+1 < len(n.Content); i += 2 {
			k, v := n.Content[i], n.Content[i+1]
			ki, err := yamlnode.ScalarInt(k)
			if k.Tag == "!!str" { // JSON form: {"2": 1}
				ki, err = strconv.Atoi(k.Value)
			}
			if err != nil {
				return d.ErrAt(k, path, yamlnode.Show(k), "weighted count: each key is a count; %v", err)
			}
			w, err := yamlnode.ScalarFloat(v)
			if err != nil {
				return d.ErrAt(v, path+"."+k.Value, yamlnode.Show(v), "weighted count: each weight %v", err)
			}
			if ki < 0 {
				return d.ErrAt(k, path, yamlnode.Show(k), "a count must not be negative")
			}
			if slices.Contains(c.Values, ki) {
				return d.ErrAt(k, path, yamlnode.Show(k), "weighted count: count %d is given twice; give each count once", ki)
			}
			if w < 0 {
				return d.ErrAt(v, path+"."+k.Value, yamlnode.Show(v), "a weight must not be negative")
			}
			c.Values = append(c.Values, ki)
			c.Weights = append(c.Weights, w)
		}
		total := 0.0
		for _, w := range c.Weights {
			total += w
		}
		if total <= 0 {
			return d.ErrAt(n, path, "", "weighted count: the weights must add up to more than 0")
		}
		c.Min, c.Max = c.Values[0], c.Values[0]
		for _, v := range c.Values {
			c.Min, c.Max = min(c.Min, v), max(c.Max, v)
		}
		return nil
	}
	var r IntRange
	if err := r.DecodeNode(d, n, path); err != nil {
		return err
	}
	if r.Min < 0 {
		return d.ErrAt(n, path, yamlnode.Show(n), "a count must not be negative")
	}
	c.Min, c.Max = r.Min, r.Max
	return nil
}

// MarshalJSON writes [min, max] or {"count": weight, ...}.
func (c Count) MarshalJSON() ([]byte, error) {
	if c.Values == nil {
		return []byte(fmt.Sprintf("[%d,%d]", c.Min, c.Max)), nil
	}
	idx := make([]int, len(c.Values))
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return c.Values[idx[a]] < c.Values[idx[b]] })
	var b bytes.Buffer
	b.WriteByte('{')
	for j, i := range idx {
		if j > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, "\"%d\":%s", c.Values[i], fnum(c.Weights[i]))
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

// ColorRange draws each RGB channel uniformly between From and To; a single
// [r, g, b] means a fixed color.
type ColorRange struct{ From, To [3]float64 }

func (c *ColorRange) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	triple := func(m *yaml.Node) ([3]float64, error) {
		var t [3]float64
		if m.Kind != yaml.SequenceNode || len(m.Content) != 3 {
			return t, d.ErrAt(m, path, yamlnode.Show(m), "want [r, g, b] with three numbers in 0..255")
		}
		for i, e := range m.Content {
			f, err := yamlnode.ScalarFloat(e)
			if err != nil || f < 0 || f > 255 {
				return t, d.ErrAt(e, path, yamlnode.Show(m), "color channels are numbers in 0..255")
			}
			t[i] = f
		}
		return t, nil
	}
	if n.Kind == yaml.SequenceNode && len(n.Content) == 2 && n.Content[0].Kind == yaml.SequenceNode {
		a, err := triple(n.Content[0])
		if err != nil {
			return err
		}
		b, err := triple(n.Content[1])
		if err != nil {
			return err
		}
		for i := range a {
			if a[i] > b[i] {
				return d.ErrAt(n, path, yamlnode.Show(n), "channel %d: from %s is greater than to %s; want [[r, g, b], [r, g, b]] with each from ≤ to", i, fnum(a[i]), fnum(b[i]))
			}
		}
		c.From, c.To = a, b
		return nil
	}
	t, err := triple(n)
	if err != nil {
		return d.ErrAt(n, path, yamlnode.Show(n), "want [r, g, b] or [[r, g, b], [r, g, b]] with channels in 0..255")
	}
	c.From, c.To = t, t
	return nil
}

// MarshalJSON writes [[r,g,b],[r,g,b]].
func (c ColorRange) MarshalJSON() ([]byte, error) {
	return []byte(fmt.Sprintf("[[%s,%s,%s],[%s,%s,%s]]", fnum(c.From[0]), fnum(c.From[1]), fnum(c.From[2]), fnum(c.To[0]), fnum(c.To[1]), fnum(c.To[2]))), nil
}

// ValueSpec gives an object a numeric value: "parts" (its number of parts),
// "digit" (its glyph's digit), or a number range drawn as whole numbers.
type ValueSpec struct {
	From  string // "parts", "digit" or "" for a range
	Range IntRange
}

func (v *ValueSpec) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	if n.Kind == yaml.ScalarNode && n.Tag == "!!str" {
		switch n.Value {
		case "parts", "digit":
			v.From = n.Value
			return nil
		}
		return d.ErrAt(n, path, yamlnode.Show(n), "want \"parts\", \"digit\", a whole number or [min, max]")
	}
	return v.Range.DecodeNode(d, n, path)
}

// MarshalJSON writes the source name or the range.
func (v ValueSpec) MarshalJSON() ([]byte, error) {
	if v.From != "" {
		return []byte(strconv.Quote(v.From)), nil
	}
	return v.Range.MarshalJSON()
}

// ParseRecipe parses and validates recipe YAML. file names the recipe in
// errors and is the folder font files are resolved against ("" = current).
func ParseRecipe(file string, data []byte) (*Recipe, error) {
	if len(data) > MaxRecipeBytes {
		return nil, &RecipeError{File: file, Msg: fmt.Sprintf("recipe is %d bytes; at most %d allowed", len(data), MaxRecipeBytes)}
	}
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return nil, yamlSyntaxError(file, err)
	}
	if root.Kind == 0 || len(root.Content) == 0 {
		return nil, &RecipeError{File: file, Msg: "recipe is empty"}
	}
	if err := yamlnode.OneDocument(file, "recipe", data); err != nil {
		return nil, err
	}
	d := yamlnode.NewDecoder(file)
	r := &Recipe{file: file}
	if err := d.Decode(&root, reflectValue(r), ""); err != nil {
		return nil, err
	}
	if err := r.validate(d); err != nil {
		return nil, err
	}
	return r, nil
}

// LoadRecipe reads and parses a recipe file.
func LoadRecipe(path string) (*Recipe, error) {
	b, err := safefile.Read(path, "recipe", MaxRecipeBytes)
	if err != nil {
		return nil, &RecipeError{File: path, Msg: safefile.Msg(err)}
	}
	return ParseRecipe(path, b)
}

func yamlSyntaxError(file string, err error) error {
	var line int
	msg := err.Error()
	if _, scanErr := fmt.Sscanf(msg, "yaml: line %d:", &line); scanErr == nil {
		if i := bytes.IndexByte([]byte(msg), ':'); i >= 0 {
			rest := msg[len(fmt.Sprintf("yaml: line %d:", line)):]
			return &RecipeError{File: file, Line: line, Column: 1, Msg: "YAML syntax:" + rest}
		}
	}
	return &RecipeError{File: file, Msg: msg}
}
