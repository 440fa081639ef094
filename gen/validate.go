package gen

import (
	"fmt"
	"math"
	"path/filepath"
	"reflect"
	"strings"
	"unicode"
	"unicode/utf8"

	"github.com/trueset/trueset/internal/yamlnode"
	"github.com/trueset/trueset/manifest"
)

// Bounds that keep any recipe's cost finite.
const (
	MaxRecipeBytes  = 1 << 20
	MaxCanvasSide   = 4096
	MaxCanvasPixels = 4096 * 4096
	MaxObjects      = 1000 // per scene, parts included
	MaxClasses      = 254  // ids 1..254; 255 is kept for "ignore"
	// MaxNameBytes bounds class and target names: with MaxObjects objects a
	// record stays far below manifest.MaxRecordBytes, the most a reader takes.
	MaxNameBytes = 64
	MaxChars     = 4096
)

// Shape kinds.
var shapeKinds = []string{"circle", "ellipse", "rectangle", "rounded-rectangle", "triangle", "polygon", "star", "ring", "cross", "bar"}

var targetKinds = []string{"count", "sum", "min", "max", "mean", "text", "number"}
var targetAttrs = []string{"value", "area", "size", "angle"}

func reflectValue(r *Recipe) reflect.Value { return reflect.ValueOf(r).Elem() }

func oneOf(s string, allowed []string) bool {
	for _, a := range allowed {
		if s == a {
			return true
		}
	}
	return false
}

func list(allowed []string) string { return strings.Join(allowed, ", ") }

// validate checks the decoded recipe, fills defaults and resolves classes and
// fonts. Every error names the field path and where it was written.
func (r *Recipe) validate(d *yamlnode.Decoder) error {
	if r.file != "" {
		r.dir = filepath.Dir(r.file)
	}
	if r.Name == "" {
		return d.ErrPath("name", "", "a recipe needs a name")
	}
	c := &r.Canvas
	if c.Width < 1 || c.Width > MaxCanvasSide {
		return d.ErrPath("canvas.width", fmt.Sprint(c.Width), "want a width in 1..%d pixels", MaxCanvasSide)
	}
	if c.Height < 1 || c.Height > MaxCanvasSide {
		return d.ErrPath("canvas.height", fmt.Sprint(c.Height), "want a height in 1..%d pixels", MaxCanvasSide)
	}
	if c.Mode == "" {
		c.Mode = "gray"
	}
	if c.Mode == "grey" {
		return d.ErrPath("canvas.mode", `"grey"`, "trueset spells it gray; want gray or rgb")
	}
	if c.Mode != "gray" && c.Mode != "rgb" {
		return d.ErrPath("canvas.mode", fmt.Sprintf("%q", c.Mode), "want gray or rgb")
	}
	if c.Antialias == nil {
		t := true
		c.Antialias = &t
	}
	if err := r.validateBackground(d); err != nil {
		return err
	}

	if len(r.Classes) == 0 {
		return d.ErrPath("classes", "", "a recipe needs at least one class")
	}
	if len(r.Classes) > MaxClasses {
		return d.ErrPath("classes", fmt.Sprint(len(r.Classes)), "at most %d classes", MaxClasses)
	}
	r.classID = map[string]int{}
	for i, cl := range r.Classes {
		p := fmt.Sprintf("classes[%d]", i)
		if cl.Name == "" || cl.Name == "background" {
			return d.ErrPath(p+".name", fmt.Sprintf("%q", cl.Name), "want a class name other than \"background\" (id 0 is background)")
		}
		if len(cl.Name) > MaxNameBytes || strings.IndexFunc(cl.Name, unicode.IsControl) >= 0 || !utf8.ValidString(cl.Name) {
			return d.ErrPath(p+".name", fmt.Sprintf("%.40q", cl.Name), "want a class name of at most %d bytes of text without control characters (every record repeats it)", MaxNameBytes)
		}
		if _, dup := r.classID[cl.Name]; dup {
			return d.ErrPath(p+".name", fmt.Sprintf("%q", cl.Name), "class names must be unique")
		}
		if len(cl.Color) != 3 {
			return d.ErrPath(p+".color", fmt.Sprint(cl.Color), "want a palette color [r, g, b]")
		}
		for _, v := range cl.Color {
			if v < 0 || v > 255 {
				return d.ErrPath(p+".color", fmt.Sprint(cl.Color), "color channels are whole numbers in 0..255")
			}
		}
		r.classID[cl.Name] = i + 1
	}

	if len(r.Layers) == 0 {
		return d.ErrPath("layers", "", "a recipe needs at least one layer of objects")
	}
	r.fonts = map[string]*Font{}
	maxObjects := 0
	for li := range r.Layers {
		n, err := r.validateLayer(d, li)
		if err != nil {
			return err
		}
		maxObjects += n
	}
	if maxObjects > MaxObjects {
		return d.ErrPath("layers", fmt.Sprint(maxObjects), "a scene may hold at most %d objects (parts included); the counts allow more", MaxObjects)
	}
	if err := r.validateTargets(d); err != nil {
		return err
	}
	if err := r.validateSplit(d); err != nil {
		return err
	}
	return r.validateInstruments(d)
}

func (r *Recipe) validateSplit(d *yamlnode.Decoder) error {
	sp := r.Split
	if sp == nil {
		return nil
	}
	if sp.Ratios != "" {
		if _, err := manifest.ParseSplits(sp.Ratios); err != nil {
			return d.ErrPath("split.ratios", fmt.Sprintf("%q", sp.Ratios), "%v", err)
		}
	}
	if err := r.CheckStratify(sp.Stratify); err != nil {
		return d.ErrPath("split.stratify", fmt.Sprintf("%q", sp.Stratify), "%v", err)
	}
	if b := sp.Balance; b != nil {
		var t *TargetSpec
		for i := range r.Targets {
			if r.Targets[i].Name == b.Target {
				t = &r.Targets[i]
			}
		}
		if t == nil {
			return d.ErrPath("split.balance.target", fmt.Sprintf("%q", b.Target), "no such target")
		}
		if !r.contentDecides(*t) {
			return d.ErrPath("split.balance.target", fmt.Sprintf("%q", b.Target), "balance needs a target that content decides (a count, a value aggregate or a row reading), not one that depends on geometry")
		}
		if len(b.Values) == 0 || len(b.Values) > 1000 {
			return d.ErrPath("split.balance.values", "", "want 1 to 1000 values to balance")
		}
		seen := map[string]bool{}
		for i, v := range b.Values {
			if seen[v] {
				return d.ErrPath(fmt.Sprintf("split.balance.values[%d]", i), v, "values must be unique")
			}
			seen[v] = true
		}
	}
	return nil
}

func (r *Recipe) validateBackground(d *yamlnode.Decoder) error {
	b := &r.Background
	if b.Kind == "" {
		b.Kind = "solid"
	}
	kinds := []string{"solid", "gradient", "noise"}
	if !oneOf(b.Kind, kinds) {
		return d.ErrPath("background.kind", fmt.Sprintf("%q", b.Kind), "want one of %s", list(kinds))
	}
	if err := r.checkTone(d, "background", b.Intensity, b.Color, false); err != nil {
		return err
	}
	if b.Intensity == nil && b.Color == nil {
		b.Intensity = &Range{Min: 0, Max: 0}
	}
	switch b.Kind {
	case "gradient":
		if err := r.checkTone(d, "background", b.EndIntensity, b.EndColor, true); err != nil {
			return err
		}
		if b.EndIntensity == nil && b.EndColor == nil {
			return d.ErrPath("background.end_intensity", "", "a gradient needs an end tone: end_intensity (or end_color for rgb)")
		}
		if (b.EndIntensity == nil) != (b.Intensity == nil) {
			return d.ErrPath("background.end_intensity", "", "give the gradient's start and end as the same kind: intensity with end_intensity, or color with end_color")
		}
		if b.Angle == nil {
			b.Angle = &Range{Min: 0, Max: 360}
		}
	case "noise":
		if b.Cell == nil {
			b.Cell = &Range{Min: 8, Max: 16}
		}
		if b.Cell.Min < 1 {
			return d.ErrPath("background.cell", fmt.Sprint(b.Cell.Min), "the noise cell size is at least 1 pixel")
		}
	}
	if b.Kind != "gradient" && (b.EndIntensity != nil || b.EndColor != nil || b.Angle != nil) {
		return d.ErrPath("background", "", "end_intensity, end_color and angle belong to kind gradient")
	}
	if b.Kind != "noise" && b.Cell != nil {
		return d.ErrPath("background.cell", "", "cell belongs to kind noise")
	}
	return nil
}

// checkTone validates an intensity/color pair at prefix.
func (r *Recipe) checkTone(d *yamlnode.Decoder, prefix string, in *Range, col *ColorRange, end bool) error {
	iname, cname := "intensity", "color"
	if end {
		iname, cname = "end_intensity", "end_color"
	}
	if in != nil && col != nil {
		return d.ErrPath(prefix+"."+cname, "", "give %s or %s, not both", iname, cname)
	}
	if in != nil && (in.Min < 0 || in.Max > 255) {
		return d.ErrPath(prefix+"."+iname, fmt.Sprintf("[%s, %s]", fnum(in.Min), fnum(in.Max)), "intensities are in 0..255")
	}
	if col != nil && r.Canvas.Mode != "rgb" {
		return d.ErrPath(prefix+"."+cname, "", "color needs canvas.mode rgb; a gray canvas takes %s", iname)
	}
	return nil
}

func (r *Recipe) validateLayer(d *yamlnode.Decoder, li int) (int, error) {
	L := &r.Layers[li]
	p := fmt.Sprintf("layers[%d]", li)
	lay := &L.Layout
	kinds := []string{"scatter", "row", "grid"}
	if lay.Kind == "" {
		lay.Kind = "scatter"
	}
	if !oneOf(lay.Kind, kinds) {
		return 0, d.ErrPath(p+".layout.kind", fmt.Sprintf("%q", lay.Kind), "want one of %s", list(kinds))
	}
	W, H := float64(r.Canvas.Width), float64(r.Canvas.Height)
	if lay.Region == nil {
		lay.Region = []float64{0, 0, W, H}
	}
	if len(lay.Region) != 4 || lay.Region[0] < 0 || lay.Region[1] < 0 || lay.Region[2] > W || lay.Region[3] > H || lay.Region[0] >= lay.Region[2] || lay.Region[1] >= lay.Region[3] {
		return 0, d.ErrPath(p+".layout.region", fmt.Sprint(lay.Region), "want [x0, y0, x1, y1] inside the %gx%g canvas with x0 < x1 and y0 < y1", W, H)
	}
	if lay.MaxOverlap < 0 || lay.MaxOverlap > 1 {
		return 0, d.ErrPath(p+".layout.max_overlap", fnum(lay.MaxOverlap), "want a fraction in 0..1")
	}
	if lay.MinGap < 0 {
		return 0, d.ErrPath(p+".layout.min_gap", fnum(lay.MinGap), "want a gap of 0 or more pixels")
	}
	if lay.MinGap > 0 && lay.MaxOverlap > 0 {
		return 0, d.ErrPath(p+".layout.min_gap", fnum(lay.MinGap), "min_gap applies only when max_overlap is 0")
	}
	if lay.LeastShown == nil {
		v := 0.5
		lay.LeastShown = &v
	}
	if *lay.LeastShown < 0 || *lay.LeastShown > 1 {
		return 0, d.ErrPath(p+".layout.least_shown", fnum(*lay.LeastShown), "want a fraction in 0..1")
	}
	if lay.LeastPixels == nil {
		v := 4
		lay.LeastPixels = &v
	}
	if *lay.LeastPixels < 1 {
		return 0, d.ErrPath(p+".layout.least_pixels", fmt.Sprint(*lay.LeastPixels), "want at least 1 pixel (an invisible object is never kept)")
	}
	switch lay.Kind {
	case "row":
		if lay.Spacing == nil {
			lay.Spacing = &Range{Min: 0, Max: 0}
		}
		if lay.BaselineJitter < 0 {
			return 0, d.ErrPath(p+".layout.baseline_jitter", fnum(lay.BaselineJitter), "want 0 or more pixels")
		}
	case "grid":
		if lay.Rows < 1 || lay.Cols < 1 || lay.Rows*lay.Cols > MaxObjects {
			return 0, d.ErrPath(p+".layout.rows", fmt.Sprintf("%dx%d", lay.Rows, lay.Cols), "a grid needs rows ≥ 1 and cols ≥ 1 with at most %d cells", MaxObjects)
		}
		if lay.Jitter < 0 {
			return 0, d.ErrPath(p+".layout.jitter", fnum(lay.Jitter), "want 0 or more pixels")
		}
	}
	if lay.Kind != "row" && (lay.Spacing != nil || lay.BaselineJitter != 0) {
		return 0, d.ErrPath(p+".layout", "", "spacing and baseline_jitter belong to layout kind row")
	}
	if lay.Kind != "grid" && (lay.Rows != 0 || lay.Cols != 0 || lay.Jitter != 0) {
		return 0, d.ErrPath(p+".layout", "", "rows, cols and jitter belong to layout kind grid")
	}
	if len(L.Objects) == 0 {
		return 0, d.ErrPath(p+".objects", "", "a layer needs at least one object entry")
	}
	total := 0
	maxCount := 0
	for oi := range L.Objects {
		op := fmt.Sprintf("%s.objects[%d]", p, oi)
		o := &L.Objects[oi]
		if err := r.validateObject(d, o, op, false, lay); err != nil {
			return 0, err
		}
		if lay.Kind == "row" && o.Glyph == nil {
			return 0, d.ErrPath(op+".shape", o.Shape, "a row layout reads glyphs left to right; use glyph objects here or another layout")
		}
		per := 1
		for _, part := range o.Parts {
			per += part.Count.Max
		}
		total += o.Count.Max * per
		maxCount += o.Count.Max
	}
	if lay.Kind == "grid" && maxCount > lay.Rows*lay.Cols {
		return 0, d.ErrPath(p+".objects", fmt.Sprint(maxCount), "the counts allow more objects than the grid's %d cells", lay.Rows*lay.Cols)
	}
	return total, nil
}

func (r *Recipe) validateObject(d *yamlnode.Decoder, o *ObjectSpec, p string, part bool, lay *Layout) error {
	id, ok := r.classID[o.Class]
	if !ok {
		var names []string
		for _, c := range r.Classes {
			names = append(names, c.Name)
		}
		return d.ErrPath(p+".class", fmt.Sprintf("%q", o.Class), "unknown class; declared classes: %s", list(names))
	}
	o.classID = id
	if (o.Shape == "") == (o.Glyph == nil) {
		return d.ErrPath(p+".shape", o.Shape, "give exactly one of shape or glyph")
	}
	if o.Shape != "" && !oneOf(o.Shape, shapeKinds) {
		return d.ErrPath(p+".shape", fmt.Sprintf("%q", o.Shape), "unknown shape; want one of %s", list(shapeKinds))
	}
	if o.Count.Max > MaxObjects {
		return d.ErrPath(p+".count", fmt.Sprint(o.Count.Max), "at most %d objects per scene", MaxObjects)
	}
	W, H := float64(r.Canvas.Width), float64(r.Canvas.Height)
	if o.Size.Min <= 0 {
		return d.ErrPath(p+".size", fnum(o.Size.Min), "sizes must be greater than 0")
	}
	if o.Aspect == nil {
		o.Aspect = &Range{Min: 1, Max: 1}
	}
	if o.Aspect.Min <= 0 || o.Aspect.Max > 20 {
		return d.ErrPath(p+".aspect", fmt.Sprintf("[%s, %s]", fnum(o.Aspect.Min), fnum(o.Aspect.Max)), "aspect (width / height) must be in (0, 20]")
	}
	if o.Angle == nil {
		o.Angle = &Range{Min: 0, Max: 0}
	}
	if o.Angle.Min < -3600 || o.Angle.Max > 3600 {
		return d.ErrPath(p+".angle", fmt.Sprintf("[%s, %s]", fnum(o.Angle.Min), fnum(o.Angle.Max)), "angles are degrees within ±3600")
	}
	if part {
		if o.Size.Max > 1 {
			return d.ErrPath(p+".size", fnum(o.Size.Max), "a part's size is a fraction of its parent's size, in (0, 1]")
		}
		if o.Arrangement == "" {
			o.Arrangement = "scatter"
		}
		arr := []string{"pips", "scatter"}
		if !oneOf(o.Arrangement, arr) {
			return d.ErrPath(p+".arrangement", fmt.Sprintf("%q", o.Arrangement), "want one of %s", list(arr))
		}
		if o.Arrangement == "pips" && o.Count.Max > 6 {
			return d.ErrPath(p+".count", fmt.Sprint(o.Count.Max), "the pips arrangement holds 1 to 6 parts, as on a die face")
		}
		if len(o.Parts) > 0 {
			return d.ErrPath(p+".parts", "", "parts cannot have parts of their own")
		}
	} else {
		if o.Arrangement != "" {
			return d.ErrPath(p+".arrangement", o.Arrangement, "arrangement belongs to parts")
		}
		if o.Glyph == nil {
			if big := o.Size.Max * math.Max(1, o.Aspect.Max); big > W || o.Size.Max > H {
				return d.ErrPath(p+".size", fnum(o.Size.Max), "objects up to %s×%s pixels do not fit the %g×%g canvas", fnum(o.Size.Max*o.Aspect.Max), fnum(o.Size.Max), W, H)
			}
		}
	}
	if err := r.checkTone(d, p, o.Intensity, o.Color, false); err != nil {
		return err
	}
	if o.Intensity == nil && o.Color == nil {
		o.Intensity = &Range{Min: 255, Max: 255}
	}
	if err := r.validateShapeParams(d, o, p); err != nil {
		return err
	}
	if o.Glyph != nil {
		if err := r.validateGlyph(d, o, p, part); err != nil {
			return err
		}
	}
	if o.Value != nil {
		switch o.Value.From {
		case "parts":
			if len(o.Parts) == 0 {
				return d.ErrPath(p+".value", "\"parts\"", "value \"parts\" counts the object's parts, but it has none")
			}
		case "digit":
			if o.Glyph == nil {
				return d.ErrPath(p+".value", "\"digit\"", "value \"digit\" needs a glyph object")
			}
			for _, ch := range o.chars {
				if ch < '0' || ch > '9' {
					return d.ErrPath(p+".glyph.chars", fmt.Sprintf("%q", string(ch)), "value \"digit\" needs glyph chars that are all digits 0-9")
				}
			}
		}
	}
	for i := range o.Parts {
		if err := r.validateObject(d, &o.Parts[i], fmt.Sprintf("%s.parts[%d]", p, i), true, lay); err != nil {
			return err
		}
	}
	return nil
}

func (r *Recipe) validateShapeParams(d *yamlnode.Decoder, o *ObjectSpec, p string) error {
	unit := func(name string, rg **Range, def Range, lo, hi float64) error {
		if *rg == nil {
			*rg = &def
			return nil
		}
		if (*rg).Min < lo || (*rg).Max > hi {
			return d.ErrPath(p+"."+name, fmt.Sprintf("[%s, %s]", fnum((*rg).Min), fnum((*rg).Max)), "want values in [%s, %s]", fnum(lo), fnum(hi))
		}
		return nil
	}
	allow := map[string][]string{
		"sides":     {"polygon", "star"},
		"inner":     {"ring", "star"},
		"corner":    {"rounded-rectangle"},
		"thickness": {"cross"},
	}
	set := map[string]bool{"sides": o.Sides != nil, "inner": o.Inner != nil, "corner": o.Corner != nil, "thickness": o.Thickness != nil}
	for _, name := range []string{"sides", "inner", "corner", "thickness"} {
		if set[name] && !oneOf(o.Shape, allow[name]) {
			return d.ErrPath(p+"."+name, "", "%s applies to shapes %s, not %q", name, list(allow[name]), o.Shape)
		}
	}
	switch o.Shape {
	case "polygon", "star":
		if o.Sides == nil {
			def := IntRange{Min: 5, Max: 5}
			if o.Shape == "polygon" {
				def = IntRange{Min: 6, Max: 6}
			}
			o.Sides = &def
		}
		if o.Sides.Min < 3 || o.Sides.Max > 64 {
			return d.ErrPath(p+".sides", fmt.Sprintf("[%d, %d]", o.Sides.Min, o.Sides.Max), "want 3 to 64 sides or points")
		}
		if o.Shape == "star" {
			return unit("inner", &o.Inner, Range{Min: 0.45, Max: 0.45}, 0.05, 0.95)
		}
	case "ring":
		return unit("inner", &o.Inner, Range{Min: 0.5, Max: 0.5}, 0.05, 0.95)
	case "rounded-rectangle":
		return unit("corner", &o.Corner, Range{Min: 0.25, Max: 0.25}, 0, 0.5)
	case "cross":
		return unit("thickness", &o.Thickness, Range{Min: 0.3, Max: 0.3}, 0.05, 0.95)
	}
	return nil
}

func (r *Recipe) validateGlyph(d *yamlnode.Decoder, o *ObjectSpec, p string, part bool) error {
	g := o.Glyph
	if g.Font != "" && g.File != "" {
		return d.ErrPath(p+".glyph.file", g.File, "give glyph.font or glyph.file, not both")
	}
	if g.Font == "" && g.File == "" {
		g.Font = "goregular"
	}
	key := "font:" + g.Font
	if g.File != "" {
		key = "file:" + g.File
	}
	f := r.fonts[key]
	if f == nil {
		var err error
		var where string
		f, where, err = openFont(g, r.dir)
		if err != nil {
			if g.File != "" {
				return d.ErrPath(p+".glyph.file", where, "%v", err)
			}
			return d.ErrPath(p+".glyph.font", fmt.Sprintf("%q", g.Font), "%v; built-in fonts: %s", err, list(FontNames()))
		}
		r.fonts[key] = f
	}
	o.font = f
	if g.Chars == "" {
		return d.ErrPath(p+".glyph.chars", "", "want at least one character")
	}
	// The bound is on the characters as written, repeats included, so it
	// holds whatever the font covers.
	if n := utf8.RuneCountInString(g.Chars); n > MaxChars {
		return d.ErrPath(p+".glyph.chars", fmt.Sprintf("%d characters", n), "at most %d characters", MaxChars)
	}
	seen := map[rune]bool{}
	o.chars = o.chars[:0]
	for _, ch := range g.Chars {
		if unicode.IsSpace(ch) || !unicode.IsPrint(ch) {
			return d.ErrPath(p+".glyph.chars", fmt.Sprintf("%q", ch), "characters must be printable and not blank")
		}
		if seen[ch] {
			continue
		}
		seen[ch] = true
		if _, err := f.glyph(ch); err != nil {
			return d.ErrPath(p+".glyph.chars", fmt.Sprintf("%q", string(ch)), "%v", err)
		}
		o.chars = append(o.chars, ch)
	}
	if !part {
		W, H := float64(r.Canvas.Width), float64(r.Canvas.Height)
		// A glyph's ink stays within its em box, scaled by size (ppem).
		if o.Size.Max > H || o.Size.Max*o.Aspect.Max > W {
			return d.ErrPath(p+".size", fnum(o.Size.Max), "glyphs of em size %s do not fit the %g×%g canvas", fnum(o.Size.Max), W, H)
		}
	}
	return nil
}

func (r *Recipe) validateTargets(d *yamlnode.Decoder) error {
	names := map[string]bool{}
	for i := range r.Targets {
		t := &r.Targets[i]
		p := fmt.Sprintf("targets[%d]", i)
		if t.Name == "" || strings.ContainsAny(t.Name, " \t\n,=") {
			return d.ErrPath(p+".name", fmt.Sprintf("%q", t.Name), "want a target name without spaces, commas or '='")
		}
		if len(t.Name) > MaxNameBytes || strings.IndexFunc(t.Name, unicode.IsControl) >= 0 || !utf8.ValidString(t.Name) {
			return d.ErrPath(p+".name", fmt.Sprintf("%.40q", t.Name), "want a target name of at most %d bytes of text without control characters", MaxNameBytes)
		}
		if names[t.Name] {
			return d.ErrPath(p+".name", fmt.Sprintf("%q", t.Name), "target names must be unique")
		}
		names[t.Name] = true
		if !oneOf(t.Kind, targetKinds) {
			return d.ErrPath(p+".kind", fmt.Sprintf("%q", t.Kind), "want one of %s", list(targetKinds))
		}
		for j, c := range t.Classes {
			if _, ok := r.classID[c]; !ok {
				return d.ErrPath(fmt.Sprintf("%s.classes[%d]", p, j), fmt.Sprintf("%q", c), "unknown class")
			}
		}
		switch t.Kind {
		case "sum", "min", "max", "mean":
			if !oneOf(t.Of, targetAttrs) {
				return d.ErrPath(p+".of", fmt.Sprintf("%q", t.Of), "a %s target needs of: one of %s", t.Kind, list(targetAttrs))
			}
			if t.Of == "value" && !r.anyValue(t.Classes) {
				return d.ErrPath(p+".of", "\"value\"", "no object of these classes has a value")
			}
		default:
			if t.Of != "" {
				return d.ErrPath(p+".of", t.Of, "of belongs to sum, min, max and mean targets")
			}
		}
		if t.Kind == "text" || t.Kind == "number" {
			glyphs := 0
			for _, o := range r.allSpecs() {
				if !r.inClasses(o.classID, t.Classes) {
					continue
				}
				if o.Glyph == nil {
					return d.ErrPath(p+".classes", "", "a %s target reads glyphs, but class %q has shapes; name glyph classes only", t.Kind, o.Class)
				}
				glyphs++
				if t.Kind == "number" {
					for _, ch := range o.chars {
						if ch < '0' || ch > '9' {
							return d.ErrPath(p+".kind", "\"number\"", "a number target reads digits, but class %q may draw %q", o.Class, string(ch))
						}
					}
				}
			}
			if glyphs == 0 {
				return d.ErrPath(p+".classes", "", "a %s target needs glyph objects to read", t.Kind)
			}
		}
	}
	return nil
}

func (r *Recipe) inClasses(id int, names []string) bool {
	if len(names) == 0 {
		return true
	}
	for _, n := range names {
		if r.classID[n] == id {
			return true
		}
	}
	return false
}

func (r *Recipe) anyValue(classes []string) bool {
	for _, o := range r.allSpecs() {
		if o.Value != nil && r.inClasses(o.classID, classes) {
			return true
		}
	}
	return false
}

// allSpecs lists every object and part spec in order.
func (r *Recipe) allSpecs() []*ObjectSpec {
	var out []*ObjectSpec
	for li := range r.Layers {
		for oi := range r.Layers[li].Objects {
			o := &r.Layers[li].Objects[oi]
			out = append(out, o)
			for pi := range o.Parts {
				out = append(out, &o.Parts[pi])
			}
		}
	}
	return out
}
