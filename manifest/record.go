package manifest

import (
	"encoding/json"
	"fmt"
	"math"
)

// Format names the on-disk layout version written into dataset.json.
const Format = "trueset-dataset/2"

// Record is one sample: one line of manifest.jsonl.
type Record struct {
	ID        string            `json:"id"`
	Index     int               `json:"index"`
	Split     string            `json:"split"`
	Group     string            `json:"group"`
	Stratum   string            `json:"stratum"`
	Width     int               `json:"width"`
	Height    int               `json:"height"`
	Image     string            `json:"image"`
	Mask      string            `json:"mask"`
	Instances string            `json:"instances"`
	SHA256    map[string]string `json:"sha256"`
	Objects   []Object          `json:"objects"`
	Targets   map[string]Value  `json:"targets"`
	Lineage   *Lineage          `json:"lineage,omitempty"`
}

// Object is one instance in a sample. Instance, Class, Parent, Box, Area and
// Shown are measured from the masks; the rest are the plan's factors.
type Object struct {
	Instance  int    `json:"instance"`
	Class     int    `json:"class"`
	ClassName string `json:"class_name"`
	Parent    int    `json:"parent,omitempty"` // instance id of the parent object, 0 = none
	Box       [4]int `json:"box_x0y0x1y1"`     // [x0, y0, x1, y1], x1 and y1 exclusive; not [x, y, w, h]
	Area      int    `json:"area"`             // visible mask pixels
	// Shown is the object's shown share: Area divided by the pixels the
	// object would cover alone.
	Shown float64 `json:"shown"`

	Shape     string     `json:"shape"`           // shape name, or "glyph"
	Glyph     string     `json:"glyph,omitempty"` // the character, for glyphs
	Font      string     `json:"font,omitempty"`  // font name, for glyphs
	Center    [2]float64 `json:"center"`          // plan center in pixels
	Size      float64    `json:"size"`            // plan size in pixels (height; em size for glyphs)
	Aspect    float64    `json:"aspect"`          // width / height
	Angle     float64    `json:"angle"`           // degrees, clockwise on screen
	Intensity *float64   `json:"intensity,omitempty"`
	Color     *[3]uint8  `json:"color,omitempty"`
	Value     *float64   `json:"value,omitempty"`
}

// Lineage records where an augmented sample came from.
type Lineage struct {
	Source string      `json:"source"`
	Ops    []LineageOp `json:"ops"`
	Affine [6]float64  `json:"affine"`
}

// LineageOp is one applied augmentation step with its drawn parameters.
type LineageOp struct {
	Op     string             `json:"op"`
	Params map[string]float64 `json:"params,omitempty"`
}

// Value is a target value: a number or a string.
type Value struct {
	Num   float64
	Str   string
	IsStr bool
}

// Number returns a numeric target value.
func Number(f float64) Value { return Value{Num: f} }

// Text returns a string target value.
func Text(s string) Value { return Value{Str: s, IsStr: true} }

// String formats the value for tables and strata keys.
func (v Value) String() string {
	if v.IsStr {
		return v.Str
	}
	return FormatNumber(v.Num)
}

// FormatNumber prints integers without a fraction and others with up to 6
// significant decimals.
func FormatNumber(f float64) string {
	if f == math.Trunc(f) && math.Abs(f) < 1e15 {
		return fmt.Sprintf("%d", int64(f))
	}
	return fmt.Sprintf("%.6g", f)
}

// MarshalJSON writes a number or a string.
func (v Value) MarshalJSON() ([]byte, error) {
	if v.IsStr {
		return json.Marshal(v.Str)
	}
	if math.IsNaN(v.Num) || math.IsInf(v.Num, 0) {
		return nil, fmt.Errorf("target value %v is not a finite number", v.Num)
	}
	return json.Marshal(v.Num)
}

// UnmarshalJSON reads a number or a string.
func (v *Value) UnmarshalJSON(b []byte) error {
	if len(b) > 0 && b[0] == '"' {
		v.IsStr = true
		return json.Unmarshal(b, &v.Str)
	}
	v.IsStr = false
	return json.Unmarshal(b, &v.Num)
}

// Class is one entry of the class table. Id 0 is background. Flip and
// MaxRotate declare which transforms keep the class's label: Flip false
// means a mirrored object is no longer of this class (a mirrored glyph);
// MaxRotate bounds the turn in degrees that keeps it (a 6 turned over reads
// 9). Absent means any transform keeps the label.
type Class struct {
	ID        int      `json:"id"`
	Name      string   `json:"name"`
	Color     [3]uint8 `json:"color"`
	Flip      *bool    `json:"flip,omitempty"`
	MaxRotate *float64 `json:"max_rotate,omitempty"`
}

// TargetDef says how a target is computed from a record's objects, so that
// verify can check it and augment can recompute it: Kind is count, sum, min,
// max, mean (over Of: value, area, size or angle), text or number (the
// glyphs left to right); Classes restricts it (empty = all classes).
type TargetDef struct {
	Name    string   `json:"name"`
	Kind    string   `json:"kind"`
	Classes []string `json:"classes,omitempty"`
	Of      string   `json:"of,omitempty"`
}

// Round rounds f to the given number of decimals; records store plan factors
// rounded so manifests stay readable.
func Round(f float64, decimals int) float64 {
	p := math.Pow(10, float64(decimals))
	r := math.Round(f*p) / p
	if r == 0 {
		return 0 // no negative zero in JSON
	}
	return r
}
