package augment

import (
	"encoding/json"
	"fmt"
	"os"
	"reflect"
	"sort"
	"strings"

	"go.yaml.in/yaml/v3"

	"github.com/trueset/trueset/internal/yamlnode"
)

// Range is a closed interval; a single number fixes it.
type Range = yamlnode.Range

// IntRange is a closed integer interval.
type IntRange = yamlnode.IntRange

// PlanError is a refused plan file: file, line, column, field path, value.
type PlanError = yamlnode.Error

// Bounds of a plan.
const (
	MaxPlanBytes = 1 << 20
	MaxSteps     = 200
	MaxSide      = 4096 // output canvas side
)

// Plan is an augmentation plan: an ordered list of steps, each applied with a
// chance and drawing its parameters from ranges. Geometric steps compose into
// one affine matrix applied once; photometric steps then run on the warped
// image in plan order. The YAML syntax is schema/plan.schema.json.
type Plan struct {
	Name          string   `yaml:"name" json:"name"`
	Description   string   `yaml:"description" json:"description,omitempty"`
	Interpolation string   `yaml:"interpolation" json:"interpolation"` // bilinear (default) or bicubic
	Fill          FillSpec `yaml:"fill" json:"fill"`
	MaskFill      string   `yaml:"mask_fill" json:"mask_fill"` // background or ignore
	Cut           CutSpec  `yaml:"cut" json:"cut"`
	Steps         []Step   `yaml:"steps" json:"steps"`
}

// FillSpec is what the image shows outside the source after a warp.
type FillSpec struct {
	Mode      string  `yaml:"mode" json:"mode"` // constant (default), edge or reflect
	Intensity float64 `yaml:"intensity" json:"intensity"`
	Color    []int   `yaml:"color" json:"color,omitempty"`
}

// CutSpec is the policy for objects a crop or a turn cuts.
type CutSpec struct {
	Policy     string   `yaml:"policy" json:"policy"` // resample (default), drop or keep
	LeastShown *float64 `yaml:"least_shown" json:"least_shown"`
	Tries      int      `yaml:"tries" json:"tries"`
}

// Step is one plan step; which fields apply depends on Op (see stepFields).
type Step struct {
	Op        string    `yaml:"op" json:"op"`
	Chance    *float64  `yaml:"chance" json:"chance"`
	Axis      string    `yaml:"axis" json:"axis,omitempty"`
	Degrees   *Range    `yaml:"degrees" json:"degrees,omitempty"`
	Expand    bool      `yaml:"expand" json:"expand,omitempty"`
	Scale     *Range    `yaml:"scale" json:"scale,omitempty"`
	Translate *Range    `yaml:"translate" json:"translate,omitempty"`
	Shear     *Range    `yaml:"shear" json:"shear,omitempty"`
	Area      *Range    `yaml:"area" json:"area,omitempty"`
	Aspect    *Range    `yaml:"aspect" json:"aspect,omitempty"`
	Size      *Range    `yaml:"size" json:"size,omitempty"`
	Output    []int     `yaml:"output" json:"output,omitempty"`
	Sigma     *Range    `yaml:"sigma" json:"sigma,omitempty"`
	Fraction  *Range    `yaml:"fraction" json:"fraction,omitempty"`
	Photons   *Range    `yaml:"photons" json:"photons,omitempty"`
	Delta     *Range    `yaml:"delta" json:"delta,omitempty"`
	Factor    *Range    `yaml:"factor" json:"factor,omitempty"`
	Gamma     *Range    `yaml:"gamma" json:"gamma,omitempty"`
	Quality   *IntRange `yaml:"quality" json:"quality,omitempty"`
	Count     *IntRange `yaml:"count" json:"count,omitempty"`
	Value     *Range    `yaml:"value" json:"value,omitempty"`
	Masks     string    `yaml:"masks" json:"masks,omitempty"`
	Steps     []Step    `yaml:"steps" json:"steps,omitempty"`
	Weights   []float64 `yaml:"weights" json:"weights,omitempty"`
}

// stepFields lists, per op, the fields it takes (op and chance always).
var stepFields = map[string][]string{
	"flip":            {"axis"},
	"rotate":          {"degrees", "expand"},
	"affine":          {"scale", "translate", "shear"},
	"crop":            {"area", "aspect", "size", "output"},
	"resize":          {"output"},
	"one-of":          {"steps", "weights"},
	"gaussian-noise":  {"sigma"},
	"salt-and-pepper": {"fraction"},
	"shot-noise":      {"photons"},
	"speckle":         {"sigma"},
	"blur":            {"sigma"},
	"brightness":      {"delta"},
	"contrast":        {"factor"},
	"gamma":           {"gamma"},
	"hue":             {"degrees"},
	"saturation":      {"factor"},
	"jpeg":            {"quality"},
	"cutout":          {"count", "size", "value", "masks"},
}

// Geometric reports whether op moves pixels (and so masks).
func Geometric(op string) bool {
	switch op {
	case "flip", "rotate", "affine", "crop", "resize":
		return true
	}
	return false
}

func opNames() []string {
	var out []string
	for k := range stepFields {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// ParsePlan parses and validates plan YAML; file names it in errors.
func ParsePlan(file string, data []byte) (*Plan, error) {
	if len(data) > MaxPlanBytes {
		return nil, &PlanError{File: file, Msg: fmt.Sprintf("plan is %d bytes; at most %d allowed", len(data), MaxPlanBytes)}
	}
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return nil, planSyntaxError(file, err)
	}
	if root.Kind == 0 || len(root.Content) == 0 {
		return nil, &PlanError{File: file, Msg: "plan is empty"}
	}
	d := yamlnode.NewDecoder(file)
	p := &Plan{}
	if err := d.Decode(&root, reflect.ValueOf(p).Elem(), ""); err != nil {
		return nil, err
	}
	if err := p.validate(d); err != nil {
		return nil, err
	}
	return p, nil
}

// planSyntaxError carries the line yaml.v3 names ("yaml: line N: ...") into
// the error's Line, as recipes do.
func planSyntaxError(file string, err error) *PlanError {
	msg := strings.TrimPrefix(err.Error(), "yaml: ")
	var line int
	if _, scanErr := fmt.Sscanf(msg, "line %d:", &line); scanErr == nil && line > 0 {
		rest := strings.TrimPrefix(msg, fmt.Sprintf("line %d:", line))
		return &PlanError{File: file, Line: line, Column: 1, Msg: "YAML syntax:" + rest}
	}
	return &PlanError{File: file, Msg: "YAML syntax: " + msg}
}

// LoadPlan reads and parses a plan file.
func LoadPlan(path string) (*Plan, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, &PlanError{File: path, Msg: err.Error()}
	}
	if st.Size() > MaxPlanBytes {
		return nil, &PlanError{File: path, Msg: fmt.Sprintf("plan is %d bytes; at most %d allowed", st.Size(), MaxPlanBytes)}
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, &PlanError{File: path, Msg: err.Error()}
	}
	return ParsePlan(path, b)
}

// JSON returns the normalized plan (defaults filled in) as compact JSON.
func (p *Plan) JSON() []byte {
	b, _ := json.Marshal(p)
	return b
}

func (p *Plan) validate(d *yamlnode.Decoder) error {
	if p.Name == "" {
		return d.ErrPath("name", "", "a plan needs a name")
	}
	switch p.Interpolation {
	case "":
		p.Interpolation = "bilinear"
	case "bilinear", "bicubic":
	default:
		return d.ErrPath("interpolation", fmt.Sprintf("%q", p.Interpolation), "want bilinear or bicubic")
	}
	f := &p.Fill
	switch f.Mode {
	case "":
		f.Mode = "constant"
	case "constant", "edge", "reflect":
	default:
		return d.ErrPath("fill.mode", fmt.Sprintf("%q", f.Mode), "want constant, edge or reflect")
	}
	if f.Intensity < 0 || f.Intensity > 255 {
		return d.ErrPath("fill.intensity", yamlnode.FormatFloat(f.Intensity), "want 0..255")
	}
	if f.Color != nil {
		if len(f.Color) != 3 {
			return d.ErrPath("fill.color", fmt.Sprint(f.Color), "want [r, g, b]")
		}
		for _, c := range f.Color {
			if c < 0 || c > 255 {
				return d.ErrPath("fill.color", fmt.Sprint(f.Color), "channels are 0..255")
			}
		}
	}
	switch p.MaskFill {
	case "":
		// Reflected or repeated pixels show copies of objects the masks
		// cannot name, so they are marked "ignore" unless asked otherwise.
		p.MaskFill = "background"
		if f.Mode != "constant" {
			p.MaskFill = "ignore"
		}
	case "background", "ignore":
	default:
		return d.ErrPath("mask_fill", fmt.Sprintf("%q", p.MaskFill), "want background or ignore")
	}
	c := &p.Cut
	switch c.Policy {
	case "":
		c.Policy = "resample"
	case "resample", "drop", "keep":
	default:
		return d.ErrPath("cut.policy", fmt.Sprintf("%q", c.Policy), "want resample (redraw until every object keeps least_shown), drop (remove cut objects and update counts) or keep")
	}
	if c.LeastShown == nil {
		v := 0.5
		c.LeastShown = &v
	}
	if *c.LeastShown < 0 || *c.LeastShown > 1 {
		return d.ErrPath("cut.least_shown", yamlnode.FormatFloat(*c.LeastShown), "want a fraction in 0..1")
	}
	if c.Tries == 0 {
		c.Tries = 20
	}
	if c.Tries < 1 || c.Tries > 1000 {
		return d.ErrPath("cut.tries", fmt.Sprint(c.Tries), "want 1..1000")
	}
	if len(p.Steps) == 0 {
		return d.ErrPath("steps", "", "a plan needs at least one step")
	}
	n := 0
	return validateSteps(d, p.Steps, "steps", &n, false)
}

func validateSteps(d *yamlnode.Decoder, steps []Step, path string, n *int, nested bool) error {
	for i := range steps {
		s := &steps[i]
		sp := fmt.Sprintf("%s[%d]", path, i)
		*n++
		if *n > MaxSteps {
			return d.ErrPath(sp, "", "at most %d steps in a plan", MaxSteps)
		}
		fields, ok := stepFields[s.Op]
		if !ok {
			return d.ErrPath(sp+".op", fmt.Sprintf("%q", s.Op), "unknown step; want one of %s", strings.Join(opNames(), ", "))
		}
		if err := checkStepFields(d, s, sp, fields); err != nil {
			return err
		}
		if s.Chance == nil {
			one := 1.0
			s.Chance = &one
		}
		if *s.Chance < 0 || *s.Chance > 1 {
			return d.ErrPath(sp+".chance", yamlnode.FormatFloat(*s.Chance), "want a probability in 0..1")
		}
		if err := validateStep(d, s, sp); err != nil {
			return err
		}
		if s.Op == "one-of" {
			if nested {
				return d.ErrPath(sp, "", "one-of cannot hold another one-of")
			}
			if len(s.Steps) == 0 {
				return d.ErrPath(sp+".steps", "", "one-of needs steps to choose from")
			}
			if s.Weights == nil {
				for range s.Steps {
					s.Weights = append(s.Weights, 1)
				}
			}
			if len(s.Weights) != len(s.Steps) {
				return d.ErrPath(sp+".weights", fmt.Sprint(s.Weights), "want one weight per step (%d)", len(s.Steps))
			}
			total := 0.0
			for _, w := range s.Weights {
				if w < 0 {
					return d.ErrPath(sp+".weights", fmt.Sprint(s.Weights), "weights must not be negative")
				}
				total += w
			}
			if total <= 0 {
				return d.ErrPath(sp+".weights", fmt.Sprint(s.Weights), "weights must add up to more than 0")
			}
			if err := validateSteps(d, s.Steps, sp+".steps", n, true); err != nil {
				return err
			}
		}
	}
	return nil
}

// checkStepFields refuses fields that do not belong to the step's op.
func checkStepFields(d *yamlnode.Decoder, s *Step, sp string, allowed []string) error {
	ok := map[string]bool{"op": true, "chance": true}
	for _, f := range allowed {
		ok[f] = true
	}
	// Presence, not the value: "expand: false" or "sigma: ~" on a flip is
	// refused too.
	t := reflect.TypeOf(*s)
	for i := 0; i < t.NumField(); i++ {
		name := yamlnode.FieldName(t.Field(i))
		if name == "" || ok[name] || !d.Written(sp+"."+name) {
			continue
		}
		return d.ErrPath(sp+"."+name, "", "%s does not take %s; it takes %s", s.Op, name, strings.Join(allowed, ", "))
	}
	return nil
}

func validateStep(d *yamlnode.Decoder, s *Step, sp string) error {
	need := func(name string, r *Range, lo, hi float64) error {
		if r == nil {
			return d.ErrPath(sp+"."+name, "", "%s needs %s", s.Op, name)
		}
		if r.Min < lo || r.Max > hi {
			return d.ErrPath(sp+"."+name, fmt.Sprintf("[%s, %s]", yamlnode.FormatFloat(r.Min), yamlnode.FormatFloat(r.Max)), "want values in [%s, %s]", yamlnode.FormatFloat(lo), yamlnode.FormatFloat(hi))
		}
		return nil
	}
	opt := func(name string, r **Range, def Range, lo, hi float64) error {
		if *r == nil {
			*r = &def
			return nil
		}
		return need(name, *r, lo, hi)
	}
	output := func(required bool) error {
		if s.Output == nil {
			if required {
				return d.ErrPath(sp+".output", "", "%s needs output: [width, height]", s.Op)
			}
			return nil
		}
		if len(s.Output) != 2 || s.Output[0] < 1 || s.Output[1] < 1 || s.Output[0] > MaxSide || s.Output[1] > MaxSide {
			return d.ErrPath(sp+".output", fmt.Sprint(s.Output), "want [width, height] with sides in 1..%d", MaxSide)
		}
		return nil
	}
	switch s.Op {
	case "flip":
		if s.Axis != "horizontal" && s.Axis != "vertical" {
			return d.ErrPath(sp+".axis", fmt.Sprintf("%q", s.Axis), "want horizontal or vertical")
		}
	case "rotate":
		return need("degrees", s.Degrees, -3600, 3600)
	case "affine":
		if s.Scale == nil && s.Translate == nil && s.Shear == nil {
			return d.ErrPath(sp, "", "affine needs scale, translate or shear")
		}
		if err := opt("scale", &s.Scale, Range{Min: 1, Max: 1}, 0.05, 20); err != nil {
			return err
		}
		if err := opt("translate", &s.Translate, Range{Min: 0, Max: 0}, -MaxSide, MaxSide); err != nil {
			return err
		}
		return opt("shear", &s.Shear, Range{Min: 0, Max: 0}, -60, 60)
	case "crop":
		if (s.Area == nil) == (s.Size == nil) {
			return d.ErrPath(sp, "", "crop needs area (a fraction of the image) or size (the crop width in pixels), not both")
		}
		if s.Area != nil {
			if err := need("area", s.Area, 0.001, 1); err != nil {
				return err
			}
			if s.Area.Min <= 0 {
				return d.ErrPath(sp+".area", "", "area must be above 0")
			}
		} else if err := need("size", s.Size, 1, MaxSide); err != nil {
			return err
		}
		if s.Aspect != nil {
			if err := need("aspect", s.Aspect, 0.05, 20); err != nil {
				return err
			}
		}
		return output(false)
	case "resize":
		return output(true)
	case "gaussian-noise", "speckle", "blur":
		hi := 255.0
		if s.Op == "speckle" {
			hi = 5
		}
		if s.Op == "blur" {
			hi = 50
		}
		return need("sigma", s.Sigma, 0, hi)
	case "salt-and-pepper":
		return need("fraction", s.Fraction, 0, 1)
	case "shot-noise":
		if err := need("photons", s.Photons, 0.001, 1e9); err != nil {
			return err
		}
	case "brightness":
		return need("delta", s.Delta, -255, 255)
	case "contrast", "saturation":
		return need("factor", s.Factor, 0, 20)
	case "gamma":
		return need("gamma", s.Gamma, 0.01, 20)
	case "hue":
		return need("degrees", s.Degrees, -360, 360)
	case "jpeg":
		if s.Quality == nil || s.Quality.Min < 1 || s.Quality.Max > 100 {
			return d.ErrPath(sp+".quality", "", "jpeg needs quality in 1..100")
		}
	case "cutout":
		if s.Count == nil {
			s.Count = &IntRange{Min: 1, Max: 1}
		}
		if s.Count.Min < 0 || s.Count.Max > 100 {
			return d.ErrPath(sp+".count", "", "want 0..100 rectangles")
		}
		if err := need("size", s.Size, 1, MaxSide); err != nil {
			return err
		}
		if err := opt("value", &s.Value, Range{Min: 0, Max: 0}, 0, 255); err != nil {
			return err
		}
		switch s.Masks {
		case "":
			s.Masks = "keep"
		case "keep", "ignore":
		default:
			return d.ErrPath(sp+".masks", fmt.Sprintf("%q", s.Masks), "want keep (masks unchanged) or ignore (cut pixels become the ignore id)")
		}
	}
	return nil
}
