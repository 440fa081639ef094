package manifest

import (
	"bytes"
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
	// Instruments (manifest/instruments.go), each absent unless the recipe
	// plants it: the held-out combination a sample shows, the label noise
	// planted in it (true values beside noisy ones) and its bait cue.
	HeldOut  string    `json:"held_out,omitempty"`
	Mislabel *Mislabel `json:"mislabel,omitempty"`
	Bait     *BaitMark `json:"bait,omitempty"`
	// StaleTargets names the targets an augmented copy carries over
	// unchanged although it lost, cut or dropped objects, so they may be
	// false (undeclared labels.csv columns, accepted with
	// --accept-stale-columns). Absent otherwise.
	StaleTargets []string `json:"stale_targets,omitempty"`

	// line is the record's manifest line, marshaled by a worker
	// (RunOrdered) so the ordered writer only copies it; nil = marshal
	// in Append.
	line []byte
}

// Object is one instance in a sample. Instance, Class, Parent, Box, Area,
// Shown, MeasuredCenter and MeasuredSize are measured from the masks; the
// rest are the plan's factors, present only where a plan set them (objects
// read from a plain folder have none: no zeros stand for "unknown").
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

	Shape     string      `json:"shape"`            // shape name, or "glyph"
	Glyph     string      `json:"glyph,omitempty"`  // the character, for glyphs
	Font      string      `json:"font,omitempty"`   // font name, for glyphs
	Center    *[2]float64 `json:"center,omitempty"` // plan center in pixels
	Size      *float64    `json:"size,omitempty"`   // plan size in pixels (height; em size for glyphs)
	Aspect    *float64    `json:"aspect,omitempty"` // width / height
	Angle     *float64    `json:"angle,omitempty"`  // degrees, clockwise on screen
	Intensity *float64    `json:"intensity,omitempty"`
	Color     *[3]uint8   `json:"color,omitempty"`
	Value     *float64    `json:"value,omitempty"`

	// MeasuredCenter is the centroid of the object's mask pixels;
	// MeasuredSize the [major, minor] axes of the ellipse with the same
	// second moments (manifest.Moments). Both from the instance mask.
	MeasuredCenter [2]float64 `json:"measured_center"`
	MeasuredSize   [2]float64 `json:"measured_size"`
}

// Factor returns a pointer to f, for the planned factors.
func Factor(f float64) *float64 { return &f }

// Lineage records where an augmented sample came from and what was done to
// it: the steps of each phase of the plan that applied, in order, with their
// drawn parameters, and the matrix the geometry steps composed into.
type Lineage struct {
	Source   string       `json:"source"`
	Geometry []LineageOp  `json:"geometry"`
	Pixels   []LineageOp  `json:"pixels"`
	Matrix   [6]float64   `json:"matrix"`
	Cuts     *LineageCuts `json:"cuts,omitempty"`
}

// LineageCuts says what the plan's cut policy did to a copy: how many times
// it was drawn again because a crop or turn cut an object below least_shown,
// and how many objects were dropped in the end. Absent when both are 0.
type LineageCuts struct {
	Redraws int `json:"redraws"`
	Dropped int `json:"dropped"`
}

// LineageOp is one applied step, written as one JSON object: "do" (the
// plan's name of the step), "pick" (the index of the step a pick chose, when
// a pick chose it), then the drawn parameters in the order they were drawn,
// each a JSON number, boolean, string, or a list or object of these.
type LineageOp struct {
	Do     string
	Pick   *int
	Params []LineageParam
}

// LineageParam is one drawn parameter. Value is what encoding/json gives
// for a JSON value: float64, bool, string, []any or map[string]any.
type LineageParam struct {
	Name  string
	Value any
}

// Get returns the parameter called name.
func (o *LineageOp) Get(name string) (any, bool) {
	for _, p := range o.Params {
		if p.Name == name {
			return p.Value, true
		}
	}
	return nil, false
}

// Num returns a numeric parameter, 0 when it is absent or not a number.
func (o *LineageOp) Num(name string) float64 {
	v, _ := o.Get(name)
	f, _ := v.(float64)
	return f
}

// Bool returns a boolean parameter, false when it is absent.
func (o *LineageOp) Bool(name string) bool {
	v, _ := o.Get(name)
	b, _ := v.(bool)
	return b
}

// Str returns a string parameter, "" when it is absent.
func (o *LineageOp) Str(name string) string {
	v, _ := o.Get(name)
	s, _ := v.(string)
	return s
}

// Set replaces the parameter called name, or appends it.
func (o *LineageOp) Set(name string, v any) {
	for i := range o.Params {
		if o.Params[i].Name == name {
			o.Params[i].Value = v
			return
		}
	}
	o.Params = append(o.Params, LineageParam{name, v})
}

// MarshalJSON writes {"do": ..., "pick": ..., parameters in order}.
func (o LineageOp) MarshalJSON() ([]byte, error) {
	b := []byte(`{"do":`)
	s, err := json.Marshal(o.Do)
	if err != nil {
		return nil, err
	}
	b = append(b, s...)
	if o.Pick != nil {
		b = append(b, fmt.Sprintf(`,"pick":%d`, *o.Pick)...)
	}
	for _, p := range o.Params {
		if p.Name == "do" || p.Name == "pick" {
			return nil, fmt.Errorf("lineage step %s: parameter name %q is reserved", o.Do, p.Name)
		}
		k, err := json.Marshal(p.Name)
		if err != nil {
			return nil, err
		}
		v, err := json.Marshal(p.Value)
		if err != nil {
			return nil, fmt.Errorf("lineage step %s: parameter %s: %w", o.Do, p.Name, err)
		}
		b = append(append(append(append(b, ','), k...), ':'), v...)
	}
	return append(b, '}'), nil
}

// UnmarshalJSON reads what MarshalJSON writes, keeping the parameters'
// order.
func (o *LineageOp) UnmarshalJSON(b []byte) error {
	dec := json.NewDecoder(bytes.NewReader(b))
	if t, err := dec.Token(); err != nil || t != json.Delim('{') {
		return fmt.Errorf("a lineage step must be a JSON object")
	}
	*o = LineageOp{}
	seen := map[string]bool{}
	for dec.More() {
		t, err := dec.Token()
		if err != nil {
			return err
		}
		key, _ := t.(string)
		if seen[key] {
			return fmt.Errorf("lineage step: key %q given twice", key)
		}
		seen[key] = true
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return err
		}
		switch key {
		case "do":
			if err := json.Unmarshal(raw, &o.Do); err != nil {
				return fmt.Errorf("lineage step: do: %w", err)
			}
		case "pick":
			var i int
			if err := json.Unmarshal(raw, &i); err != nil {
				return fmt.Errorf("lineage step: pick: %w", err)
			}
			o.Pick = &i
		default:
			var v any
			if err := json.Unmarshal(raw, &v); err != nil {
				return fmt.Errorf("lineage step: %s: %w", key, err)
			}
			o.Params = append(o.Params, LineageParam{key, v})
		}
	}
	if o.Do == "" {
		return fmt.Errorf("lineage step without do")
	}
	return nil
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
