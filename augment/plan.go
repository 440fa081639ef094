package augment

import (
	"encoding/json"
	"fmt"
	"reflect"
	"sort"
	"strings"

	"go.yaml.in/yaml/v3"

	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/internal/yamlnode"
)

// Range is a closed interval; a single number fixes it.
type Range = yamlnode.Range

// IntRange is a closed integer interval.
type IntRange = yamlnode.IntRange

// UsageError is a refusal of what the user asked for, not of an input
// file's content: a plan that would break a class's declared invariance or
// cut a reading, a --split the input does not have. The command maps it to
// exit 2.
type UsageError struct{ Err error }

func (e *UsageError) Error() string { return e.Err.Error() }
func (e *UsageError) Unwrap() error { return e.Err }

func usageErrorf(format string, args ...any) error {
	return &UsageError{fmt.Errorf(format, args...)}
}

// PlanError is a refused plan file: file, line, column, field path, value.
type PlanError = yamlnode.Error

// Bounds of a plan.
const (
	MaxPlanBytes = 1 << 20
	MaxSteps     = 200
	MaxSide      = 4096 // output canvas side
)

// Plan is an augmentation plan in two phases. Geometry's moves compose into
// one affine matrix applied once (to the image by Sampling, to the masks by
// nearest neighbour); Pixels' steps then run on the warped image in plan
// order. Each step applies with a chance and draws its parameters from
// ranges. The YAML syntax is schema/plan.schema.json.
type Plan struct {
	Name        string   `yaml:"name" json:"name"`
	Description string   `yaml:"description" json:"description,omitempty"`
	Geometry    Geometry `yaml:"geometry" json:"geometry"`
	Pixels      []Step   `yaml:"pixels" json:"pixels,omitempty"`

	dec *yamlnode.Decoder // where each field was written, for errors found after parsing
}

// Geometry is the plan's first phase: how the composed matrix samples the
// source, what it shows beyond it, what happens to objects it cuts, and the
// moves that compose into it.
type Geometry struct {
	Sampling string  `yaml:"sampling" json:"sampling"` // bilinear (default) or bicubic
	Outside  Outside `yaml:"outside" json:"outside"`
	Cuts     Cuts    `yaml:"cuts" json:"cuts"`
	Moves    []Step  `yaml:"moves" json:"moves,omitempty"`
}

// Outside is what the warp shows beyond the source: in the image (a tone,
// the border extended, or the image mirrored at its border) and in the class
// mask (background or ignore).
type Outside struct {
	Image   string `yaml:"image" json:"image"` // tone (default), extend or mirror
	Tone    Tone   `yaml:"tone" json:"tone"`
	Classes string `yaml:"classes" json:"classes"` // background or ignore
}

// Tone is a gray level 0..255, or [r, g, b] when RGB is set.
type Tone struct {
	Level float64
	RGB   []int
}

// DecodeNode reads a number or [r, g, b].
func (t *Tone) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	switch n.Kind {
	case yaml.ScalarNode:
		f, err := yamlnode.ScalarFloat(n)
		if err != nil {
			return d.ErrAt(n, path, yamlnode.Show(n), "%v: want a gray level 0..255 or [r, g, b]", err)
		}
		t.Level, t.RGB = f, nil
		return nil
	case yaml.SequenceNode:
		rgb := make([]int, len(n.Content))
		for i, c := range n.Content {
			v, err := yamlnode.ScalarInt(c)
			if err != nil {
				return d.ErrAt(c, path, yamlnode.Show(n), "channel %d: %v; want [r, g, b] with channels 0..255", i, err)
			}
			rgb[i] = v
		}
		t.Level, t.RGB = 0, rgb
		return nil
	}
	return d.ErrAt(n, path, yamlnode.Show(n), "want a gray level 0..255 or [r, g, b], found %s", yamlnode.KindName(n))
}

// MarshalJSON writes the level or [r, g, b].
func (t Tone) MarshalJSON() ([]byte, error) {
	if t.RGB != nil {
		return json.Marshal(t.RGB)
	}
	return []byte(yamlnode.FormatFloat(t.Level)), nil
}

// Cuts is the policy for objects a crop or a turn cuts.
type Cuts struct {
	Policy     string   `yaml:"policy" json:"policy"` // redraw (default), drop or keep
	LeastShown *float64 `yaml:"least_shown" json:"least_shown"`
	Tries      int      `yaml:"tries" json:"tries"`
}

// Step is one step of either phase; which fields apply depends on Do (see
// stepFields).
type Step struct {
	Do         string    `yaml:"do" json:"do"`
	Chance     *float64  `yaml:"chance" json:"chance"`
	Axis       string    `yaml:"axis" json:"axis,omitempty"`
	Angle      *Range    `yaml:"angle" json:"angle,omitempty"`
	GrowCanvas bool      `yaml:"grow_canvas" json:"grow_canvas,omitempty"`
	Zoom       *Range    `yaml:"zoom" json:"zoom,omitempty"`
	Shift      *Range    `yaml:"shift" json:"shift,omitempty"`
	Slant      *Range    `yaml:"slant" json:"slant,omitempty"`
	Area       *Range    `yaml:"area" json:"area,omitempty"`
	Aspect     *Range    `yaml:"aspect" json:"aspect,omitempty"`
	Size       *Range    `yaml:"size" json:"size,omitempty"`
	To         []int     `yaml:"to" json:"to,omitempty"`
	Sigma      *Range    `yaml:"sigma" json:"sigma,omitempty"`
	Fraction   *Range    `yaml:"fraction" json:"fraction,omitempty"`
	Photons    *Range    `yaml:"photons" json:"photons,omitempty"`
	Delta      *Range    `yaml:"delta" json:"delta,omitempty"`
	Factor     *Range    `yaml:"factor" json:"factor,omitempty"`
	Gamma      *Range    `yaml:"gamma" json:"gamma,omitempty"`
	Quality    *IntRange `yaml:"quality" json:"quality,omitempty"`
	Count      *IntRange `yaml:"count" json:"count,omitempty"`
	Tone       *Range    `yaml:"tone" json:"tone,omitempty"`
	Classes    string    `yaml:"classes" json:"classes,omitempty"`
	From       []Step    `yaml:"from" json:"from,omitempty"`
	Odds       []float64 `yaml:"odds" json:"odds,omitempty"`
}

// stepFields lists, per op, the fields it takes (do and chance always).
var stepFields = map[string][]string{
	"flip":            {"axis"},
	"rotate":          {"angle", "grow_canvas"},
	"warp":            {"zoom", "shift", "slant"},
	"crop":            {"area", "aspect", "size", "to"},
	"resize":          {"to"},
	"pick":            {"from", "odds"},
	"gaussian-noise":  {"sigma"},
	"salt-and-pepper": {"fraction"},
	"shot-noise":      {"photons"},
	"speckle":         {"sigma"},
	"blur":            {"sigma"},
	"brightness":      {"delta"},
	"contrast":        {"factor"},
	"gamma":           {"gamma"},
	"hue":             {"angle"},
	"saturation":      {"factor"},
	"jpeg":            {"quality"},
	"cutout":          {"count", "size", "tone", "classes"},
}

// Geometric reports whether op moves pixels (and so masks): such an op
// belongs under geometry.moves, the others under pixels. pick belongs to
// both.
func Geometric(op string) bool {
	switch op {
	case "flip", "rotate", "warp", "crop", "resize":
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

// sectionOps lists the ops a section takes, pick last.
func sectionOps(geometry bool) []string {
	var out []string
	for _, k := range opNames() {
		if k != "pick" && Geometric(k) == geometry {
			out = append(out, k)
		}
	}
	return append(out, "pick")
}

// The names of earlier plan syntax, and what trueset calls them now. A
// global yamlnode.Renamed entry would be wrong for recipes (whose objects
// have an angle, a scale and so on), so they live here.
var (
	planHints = map[string]string{
		"steps":         `a plan has two sections now: geometry.moves (flip, rotate, warp, crop, resize) and pixels (the other steps)`,
		"interpolation": `trueset spells it geometry.sampling`,
		"fill":          `trueset spells it geometry.outside (image: tone, extend or mirror; tone: a gray level or [r, g, b])`,
		"mask_fill":     `trueset spells it geometry.outside.classes`,
		"cut":           `trueset spells it geometry.cuts`,
		"sampling":      `it belongs under geometry:`,
		"outside":       `it belongs under geometry:`,
		"cuts":          `it belongs under geometry:`,
		"moves":         `it belongs under geometry:`,
	}
	geometryHints = map[string]string{
		"steps":         `trueset spells it moves (pixel steps go under the top-level pixels:)`,
		"interpolation": `trueset spells it sampling`,
		"fill":          `trueset spells it outside (image: tone, extend or mirror; tone: a gray level or [r, g, b])`,
		"mask_fill":     `trueset spells it outside.classes`,
		"cut":           `trueset spells it cuts`,
		"pixels":        `pixels is a top-level section, beside geometry`,
	}
	outsideHints = map[string]string{
		"mode":      `trueset spells it image (tone, extend or mirror)`,
		"intensity": `trueset spells it tone`,
		"color":     `trueset spells it tone ([r, g, b])`,
		"fill":      `trueset spells it image (tone, extend or mirror)`,
	}
	cutsHints = map[string]string{
		"min_visible": `trueset spells it least_shown`,
		"retries":     `trueset spells it tries`,
	}
	// stepHints: an old field name and its new one, for the ops that take it.
	stepHints = map[string]string{
		"op":        "do",
		"degrees":   "angle",
		"expand":    "grow_canvas",
		"scale":     "zoom",
		"translate": "shift",
		"shear":     "slant",
		"output":    "to",
		"value":     "tone",
		"masks":     "classes",
		"steps":     "from",
		"weights":   "odds",
	}
	opHints = map[string]string{
		"one-of": "pick (with from and odds)",
		"affine": "warp (with zoom, shift and slant)",
	}
	// valueHints: values of earlier versions.
	outsideImageHints = map[string]string{"constant": "tone", "edge": "extend", "reflect": "mirror"}
)

// fieldsOf lists the yaml names of a struct type's fields.
func fieldsOf(t reflect.Type) map[string]bool {
	out := map[string]bool{}
	for i := 0; i < t.NumField(); i++ {
		if n := yamlnode.FieldName(t.Field(i)); n != "" {
			out[n] = true
		}
	}
	return out
}

func subPath(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

// decodeHinted decodes mapping n into v (a type without DecodeNode) after
// refusing the keys of earlier versions with what trueset calls them now;
// other unknown keys get yamlnode's own refusal (allowed fields, did you
// mean).
func decodeHinted(d *yamlnode.Decoder, n *yaml.Node, path string, v reflect.Value, hints map[string]string) error {
	if n.Kind == yaml.MappingNode {
		known := fieldsOf(v.Type())
		for i := 0; i+1 < len(n.Content); i += 2 {
			k := n.Content[i]
			if hint, ok := hints[k.Value]; ok && !known[k.Value] {
				return d.ErrAt(k, subPath(path, k.Value), "", "unknown field %q: %s", k.Value, hint)
			}
		}
	}
	return d.Decode(n, v, path)
}

type (
	planPlain     Plan
	geometryPlain Geometry
	outsidePlain  Outside
	cutsPlain     Cuts
	stepPlain     Step
)

// DecodeNode decodes a plan, naming the fields of earlier versions.
func (p *Plan) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	return decodeHinted(d, n, path, reflect.ValueOf((*planPlain)(p)).Elem(), planHints)
}

// DecodeNode decodes the geometry section, naming the fields of earlier
// versions.
func (g *Geometry) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	return decodeHinted(d, n, path, reflect.ValueOf((*geometryPlain)(g)).Elem(), geometryHints)
}

// DecodeNode decodes geometry.outside, naming the fields of earlier versions.
func (o *Outside) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	return decodeHinted(d, n, path, reflect.ValueOf((*outsidePlain)(o)).Elem(), outsideHints)
}

// DecodeNode decodes geometry.cuts, naming the fields of earlier versions.
func (c *Cuts) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	return decodeHinted(d, n, path, reflect.ValueOf((*cutsPlain)(c)).Elem(), cutsHints)
}

// DecodeNode decodes one step. It reads do first, so that a step in the
// wrong section, a pick inside a pick, and a field the op does not take are
// refused naming that op, its section and its own fields only.
func (s *Step) DecodeNode(d *yamlnode.Decoder, n *yaml.Node, path string) error {
	geometry := strings.HasPrefix(path, "geometry.")
	section := "pixels"
	if geometry {
		section = "geometry.moves"
	}
	nested := strings.Contains(path, ".from[")
	if n.Kind != yaml.MappingNode {
		return d.ErrAt(n, path, yamlnode.Show(n), "want a step (a mapping with do: and its fields), found %s", yamlnode.KindName(n))
	}
	var doKey, doVal *yaml.Node
	for i := 0; i+1 < len(n.Content); i += 2 {
		if n.Content[i].Value == "do" {
			doKey, doVal = n.Content[i], n.Content[i+1]
			break
		}
	}
	if doKey == nil {
		for i := 0; i+1 < len(n.Content); i += 2 {
			if k := n.Content[i]; k.Value == "op" {
				return d.ErrAt(k, path+".op", "", "unknown field \"op\": trueset spells it \"do\"")
			}
		}
		return d.ErrAt(n, path+".do", "", "a step needs do: one of %s", strings.Join(sectionOps(geometry), ", "))
	}
	dp := path + ".do"
	if doVal.Kind != yaml.ScalarNode || doVal.Tag != "!!str" {
		return d.ErrAt(doVal, dp, yamlnode.Show(doVal), "want the name of a step, one of %s", strings.Join(sectionOps(geometry), ", "))
	}
	op := doVal.Value
	fields, ok := stepFields[op]
	switch {
	case !ok && opHints[op] != "":
		return d.ErrAt(doVal, dp, fmt.Sprintf("%q", op), "trueset calls this step %s", opHints[op])
	case !ok:
		hint := ""
		if near := yamlnode.Nearest(op, sectionOps(geometry)); near != "" {
			hint = fmt.Sprintf(" (did you mean %q?)", near)
		}
		return d.ErrAt(doVal, dp, fmt.Sprintf("%q", op), "unknown step%s; under %s: one of %s", hint, section, strings.Join(sectionOps(geometry), ", "))
	case op == "pick" && nested:
		return d.ErrAt(n, path, "", "pick cannot hold another pick")
	case op != "pick" && Geometric(op) && !geometry:
		return d.ErrAt(doVal, dp, fmt.Sprintf("%q", op), "%s moves pixels (and masks with them), so it belongs under geometry.moves, not pixels", op)
	case op != "pick" && !Geometric(op) && geometry:
		return d.ErrAt(doVal, dp, fmt.Sprintf("%q", op), "%s changes pixel values only, so it belongs under pixels, not geometry.moves", op)
	}
	allowed := map[string]bool{"do": true, "chance": true}
	for _, f := range fields {
		allowed[f] = true
	}
	takes := func() string {
		if len(fields) == 0 {
			return "do and chance"
		}
		return strings.Join(fields, ", ") + " (and do, chance)"
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := n.Content[i]
		name := k.Value
		if allowed[name] {
			continue
		}
		sp := path + "." + name
		if to, ok := stepHints[name]; ok && allowed[to] {
			return d.ErrAt(k, sp, "", "unknown field %q: trueset spells it %q", name, to)
		}
		if to, ok := yamlnode.Renamed[name]; ok && allowed[to] {
			return d.ErrAt(k, sp, "", "unknown field %q: trueset spells it %q", name, to)
		}
		other := false
		for _, fs := range stepFields {
			for _, f := range fs {
				other = other || f == name
			}
		}
		if other {
			return d.ErrAt(k, sp, "", "%s does not take %s; it takes %s", op, name, takes())
		}
		cands := append([]string{"do", "chance"}, fields...)
		hint := ""
		if near := yamlnode.Nearest(name, cands); near != "" {
			hint = fmt.Sprintf(" (did you mean %q?)", near)
		}
		return d.ErrAt(k, sp, "", "unknown field %q for %s%s; %s takes %s", name, op, hint, op, takes())
	}
	return d.Decode(n, reflect.ValueOf((*stepPlain)(s)).Elem(), path)
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
	if err := yamlnode.OneDocument(file, "plan", data); err != nil {
		return nil, err
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
	p.dec = d
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
	b, err := safefile.Read(path, "plan", MaxPlanBytes)
	if err != nil {
		return nil, &PlanError{File: path, Msg: safefile.Msg(err)}
	}
	return ParsePlan(path, b)
}

// CheckCanvas refuses, before any work, a plan whose moves can make a canvas
// side over MaxSide from a w×h source (a rotate with grow_canvas), naming the
// plan file, the step path and its line; source names the source.
func (p *Plan) CheckCanvas(w, h int, source string) error {
	_, _, over, side := p.canvasBound(w, h)
	if over == "" {
		return nil
	}
	msg := fmt.Sprintf("rotate with grow_canvas can make a side of %d pixels from %s (%d×%d); at most %d a side: narrow the angle, drop grow_canvas or resize first", side, source, w, h, MaxSide)
	if p.dec == nil {
		return &PlanError{File: p.Name, Path: over, Msg: msg}
	}
	return p.dec.ErrPath(over, "", "%s", msg)
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
	g := &p.Geometry
	switch g.Sampling {
	case "":
		g.Sampling = "bilinear"
	case "bilinear", "bicubic":
	default:
		return d.ErrPath("geometry.sampling", fmt.Sprintf("%q", g.Sampling), "want bilinear or bicubic")
	}
	o := &g.Outside
	switch o.Image {
	case "":
		o.Image = "tone"
	case "tone", "extend", "mirror":
	default:
		if to, ok := outsideImageHints[o.Image]; ok {
			return d.ErrPath("geometry.outside.image", fmt.Sprintf("%q", o.Image), "trueset calls it %s; want tone, extend or mirror", to)
		}
		return d.ErrPath("geometry.outside.image", fmt.Sprintf("%q", o.Image), "want tone (a fixed gray level or color), extend (the border pixels repeated) or mirror (the image mirrored at its border)")
	}
	if o.Tone.RGB != nil {
		if len(o.Tone.RGB) != 3 {
			return d.ErrPath("geometry.outside.tone", fmt.Sprint(o.Tone.RGB), "want a gray level or [r, g, b]")
		}
		for _, c := range o.Tone.RGB {
			if c < 0 || c > 255 {
				return d.ErrPath("geometry.outside.tone", fmt.Sprint(o.Tone.RGB), "channels are 0..255")
			}
		}
	} else if o.Tone.Level < 0 || o.Tone.Level > 255 {
		return d.ErrPath("geometry.outside.tone", yamlnode.FormatFloat(o.Tone.Level), "want a gray level in 0..255 or [r, g, b]")
	}
	switch o.Classes {
	case "":
		// Extended or mirrored pixels show copies of objects the masks
		// cannot name, so they are marked "ignore" unless asked otherwise.
		o.Classes = "background"
		if o.Image != "tone" {
			o.Classes = "ignore"
		}
	case "background", "ignore":
	default:
		return d.ErrPath("geometry.outside.classes", fmt.Sprintf("%q", o.Classes), "want background or ignore")
	}
	c := &g.Cuts
	switch c.Policy {
	case "":
		c.Policy = "redraw"
	case "redraw", "drop", "keep":
	case "resample":
		return d.ErrPath("geometry.cuts.policy", fmt.Sprintf("%q", c.Policy), "trueset calls it redraw; want redraw, drop or keep")
	default:
		return d.ErrPath("geometry.cuts.policy", fmt.Sprintf("%q", c.Policy), "want redraw (draw the copy again until every object keeps least_shown), drop (remove cut objects and update counts) or keep")
	}
	if c.LeastShown == nil {
		v := 0.5
		c.LeastShown = &v
	}
	if *c.LeastShown < 0 || *c.LeastShown > 1 {
		return d.ErrPath("geometry.cuts.least_shown", yamlnode.FormatFloat(*c.LeastShown), "want a fraction in 0..1")
	}
	if c.Tries == 0 {
		c.Tries = 20
	}
	if c.Tries < 1 || c.Tries > 1000 {
		return d.ErrPath("geometry.cuts.tries", fmt.Sprint(c.Tries), "want 1..1000")
	}
	if len(g.Moves) == 0 && len(p.Pixels) == 0 {
		at := "pixels"
		if !d.Written(at) {
			at = "geometry.moves"
		}
		if !d.Written(at) {
			at = ""
		}
		return d.ErrPath(at, "", "a plan needs at least one step, under geometry.moves or pixels")
	}
	n := 0
	if err := validateSteps(d, g.Moves, "geometry.moves", &n); err != nil {
		return err
	}
	return validateSteps(d, p.Pixels, "pixels", &n)
}

// validateSteps checks steps already decoded by Step.DecodeNode (which
// refused unknown ops, ops of the other section, nested picks and fields an
// op does not take), fills in defaults and counts them against MaxSteps.
func validateSteps(d *yamlnode.Decoder, steps []Step, path string, n *int) error {
	for i := range steps {
		s := &steps[i]
		sp := fmt.Sprintf("%s[%d]", path, i)
		*n++
		if *n > MaxSteps {
			return d.ErrPath(sp, "", "at most %d steps in a plan (both sections, counting those inside pick)", MaxSteps)
		}
		if _, ok := stepFields[s.Do]; !ok {
			// Step.DecodeNode refuses these; a Plan built in Go may not
			// have gone through it.
			return d.ErrPath(sp+".do", fmt.Sprintf("%q", s.Do), "unknown step; want one of %s", strings.Join(opNames(), ", "))
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
		if s.Do == "pick" {
			if len(s.From) == 0 {
				return d.ErrPath(sp+".from", "", "pick needs from: the steps to choose from")
			}
			if s.Odds == nil {
				for range s.From {
					s.Odds = append(s.Odds, 1)
				}
			}
			if len(s.Odds) != len(s.From) {
				return d.ErrPath(sp+".odds", fmt.Sprint(s.Odds), "want one odds value per step in from (%d)", len(s.From))
			}
			total := 0.0
			for _, w := range s.Odds {
				if w < 0 {
					return d.ErrPath(sp+".odds", fmt.Sprint(s.Odds), "odds must not be negative")
				}
				total += w
			}
			if total <= 0 {
				return d.ErrPath(sp+".odds", fmt.Sprint(s.Odds), "odds must add up to more than 0")
			}
			if err := validateSteps(d, s.From, sp+".from", n); err != nil {
				return err
			}
		}
	}
	return nil
}

func validateStep(d *yamlnode.Decoder, s *Step, sp string) error {
	need := func(name string, r *Range, lo, hi float64) error {
		if r == nil {
			return d.ErrPath(sp+"."+name, "", "%s needs %s", s.Do, name)
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
	to := func(required bool) error {
		if s.To == nil {
			if required {
				return d.ErrPath(sp+".to", "", "%s needs to: [width, height]", s.Do)
			}
			return nil
		}
		if len(s.To) != 2 || s.To[0] < 1 || s.To[1] < 1 || s.To[0] > MaxSide || s.To[1] > MaxSide {
			return d.ErrPath(sp+".to", fmt.Sprint(s.To), "want [width, height] with sides in 1..%d", MaxSide)
		}
		return nil
	}
	switch s.Do {
	case "flip":
		switch s.Axis {
		case "horizontal", "vertical":
		case "":
			return d.ErrPath(sp+".axis", "", "flip needs axis: horizontal or vertical")
		default:
			return d.ErrPath(sp+".axis", fmt.Sprintf("%q", s.Axis), "want horizontal or vertical")
		}
	case "rotate":
		return need("angle", s.Angle, -3600, 3600)
	case "warp":
		if s.Zoom == nil && s.Shift == nil && s.Slant == nil {
			return d.ErrPath(sp, "", "warp needs zoom, shift or slant")
		}
		if err := opt("zoom", &s.Zoom, Range{Min: 1, Max: 1}, 0.05, 20); err != nil {
			return err
		}
		if err := opt("shift", &s.Shift, Range{Min: 0, Max: 0}, -MaxSide, MaxSide); err != nil {
			return err
		}
		return opt("slant", &s.Slant, Range{Min: 0, Max: 0}, -60, 60)
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
		return to(false)
	case "resize":
		return to(true)
	case "gaussian-noise", "speckle", "blur":
		hi := 255.0
		if s.Do == "speckle" {
			hi = 5
		}
		if s.Do == "blur" {
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
		return need("angle", s.Angle, -360, 360)
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
		if err := opt("tone", &s.Tone, Range{Min: 0, Max: 0}, 0, 255); err != nil {
			return err
		}
		switch s.Classes {
		case "":
			s.Classes = "keep"
		case "keep", "ignore":
		default:
			return d.ErrPath(sp+".classes", fmt.Sprintf("%q", s.Classes), "want keep (masks unchanged) or ignore (cut pixels become the ignore id)")
		}
	}
	return nil
}
