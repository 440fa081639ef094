package gen

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"regexp"
	"slices"
	"sort"

	"github.com/trueset/trueset/internal/yamlnode"
	"github.com/trueset/trueset/manifest"
)

// Random streams of the instruments, one per instrument, each keyed by
// (seed, index, stream[, draw]) like the content and geometry streams, so
// planting never moves a draw of a recipe without instruments.
const (
	streamMislabel = 3 // whether and how a sample's labels are corrupted
	streamBait     = 4 // the bait cue's coin
	streamHoldOut  = 5 // which piece of a size or angle range an object's draw falls in
)

// MislabelSpec plants label noise (recipe key mislabel).
type MislabelSpec struct {
	Share  float64        `yaml:"share" json:"share"`
	Splits []string       `yaml:"splits" json:"splits"`
	Kinds  []MislabelKind `yaml:"kinds" json:"kinds"`
}

// MislabelKind is one corruption and its parameters.
type MislabelKind struct {
	Kind      string      `yaml:"kind" json:"kind"`
	Odds      *float64    `yaml:"odds" json:"odds"`
	By        *IntRange   `yaml:"by" json:"by,omitempty"`
	How       []string    `yaml:"how" json:"how,omitempty"`
	Targets   []string    `yaml:"targets" json:"targets,omitempty"`
	Confusion []Confusion `yaml:"confusion" json:"confusion,omitempty"`
	Chars     string      `yaml:"chars" json:"chars,omitempty"`
}

// Confusion says an object of Class may be labeled As, with weight Odds.
type Confusion struct {
	Class string   `yaml:"class" json:"class"`
	As    string   `yaml:"as" json:"as"`
	Odds  *float64 `yaml:"odds" json:"odds"`
}

// HoldOutSpec declares held-out combinations (recipe key hold_out).
type HoldOutSpec struct {
	Splits []string       `yaml:"splits" json:"splits"`
	Combos []HoldOutCombo `yaml:"combos" json:"combos"`
}

// HoldOutCombo is one held-out combination; see manifest.HoldOutCombo.
type HoldOutCombo struct {
	Name      string      `yaml:"name" json:"name"`
	Class     string      `yaml:"class" json:"class,omitempty"`
	Color     *ColorRange `yaml:"color" json:"color,omitempty"`
	Intensity *Range      `yaml:"intensity" json:"intensity,omitempty"`
	Size      *Range      `yaml:"size" json:"size,omitempty"`
	Angle     *Range      `yaml:"angle" json:"angle,omitempty"`
	MoreThan  *int        `yaml:"more_than" json:"more_than,omitempty"`
	Glyphs    string      `yaml:"glyphs" json:"glyphs,omitempty"`
}

// BaitSpec plants shortcut bait (recipe key bait).
type BaitSpec struct {
	Target    string   `yaml:"target" json:"target"`
	Above     float64  `yaml:"above" json:"above"`
	Strength  float64  `yaml:"strength" json:"strength"`
	Splits    []string `yaml:"splits" json:"splits"`
	Elsewhere string   `yaml:"elsewhere" json:"elsewhere"`
	Cue       BaitCue  `yaml:"cue" json:"cue"`
}

// BaitCue is what the bait looks like when it is on.
type BaitCue struct {
	Kind   string   `yaml:"kind" json:"kind"`
	Corner string   `yaml:"corner" json:"corner,omitempty"`
	Size   int      `yaml:"size" json:"size,omitempty"`
	Tone   *float64 `yaml:"tone" json:"tone,omitempty"`
	Shift  float64  `yaml:"shift" json:"shift,omitempty"`
}

var mislabelKinds = []string{"swap-class", "mask-edge", "box-jitter", "target-off", "char-swap"}
var cueKinds = []string{"corner-mark", "background", "brightness"}
var comboName = regexp.MustCompile(`^[a-z0-9][a-z0-9_-]{0,39}$`)

// bands are the held-out size and angle ranges that apply to one object
// spec.
type bands struct{ size, angle [][2]float64 }

// piece is the part of a size or angle range an object's draw is confined
// to: between two neighbouring band ends, so it lies wholly inside or wholly
// outside every band. It is chosen from the hold-out stream with probability
// proportional to its length, so the factor stays uniform over the whole
// range.
type piece struct {
	lo, hi, mid float64
	bands       [][2]float64
}

func (r *Recipe) validateInstruments(d *yamlnode.Decoder) error {
	if r.Mislabel == nil && r.HoldOut == nil && r.Bait == nil {
		return nil
	}
	if err := r.validateMislabel(d); err != nil {
		return err
	}
	if err := r.validateHoldOut(d); err != nil {
		return err
	}
	if err := r.validateBait(d); err != nil {
		return err
	}
	// The manifest's view of the instruments, read from the normalized
	// recipe exactly as verify and stats read it from dataset.json.
	b, err := json.Marshal(struct {
		M *MislabelSpec `json:"mislabel,omitempty"`
		H *HoldOutSpec  `json:"hold_out,omitempty"`
		B *BaitSpec     `json:"bait,omitempty"`
	}{r.Mislabel, r.HoldOut, r.Bait})
	if err != nil {
		return err
	}
	r.inst, err = manifest.ReadInstruments(b)
	return err
}

func (r *Recipe) targetSpec(name string) *TargetSpec {
	for i := range r.Targets {
		if r.Targets[i].Name == name {
			return &r.Targets[i]
		}
	}
	return nil
}

func (r *Recipe) validateMislabel(d *yamlnode.Decoder) error {
	m := r.Mislabel
	if m == nil {
		return nil
	}
	if !(m.Share > 0 && m.Share <= 1) {
		return d.ErrPath("mislabel.share", fnum(m.Share), "want the share of samples to corrupt, in (0, 1]")
	}
	if len(m.Splits) == 0 {
		m.Splits = []string{"train"}
	}
	if len(m.Kinds) == 0 {
		return d.ErrPath("mislabel.kinds", "", "want at least one kind of corruption: %s", list(mislabelKinds))
	}
	total := 0.0
	for i := range m.Kinds {
		k := &m.Kinds[i]
		p := fmt.Sprintf("mislabel.kinds[%d]", i)
		if !oneOf(k.Kind, mislabelKinds) {
			return d.ErrPath(p+".kind", fmt.Sprintf("%q", k.Kind), "want one of %s", list(mislabelKinds))
		}
		if k.Odds == nil {
			one := 1.0
			k.Odds = &one
		}
		if *k.Odds < 0 {
			return d.ErrPath(p+".odds", fnum(*k.Odds), "odds must not be negative")
		}
		total += *k.Odds
		only := func(field string, set bool, kinds ...string) error {
			if set && !oneOf(k.Kind, kinds) {
				return d.ErrPath(p+"."+field, "", "%s belongs to %s", field, list(kinds))
			}
			return nil
		}
		for _, e := range []error{
			only("by", k.By != nil, "mask-edge", "box-jitter", "target-off"),
			only("how", k.How != nil, "mask-edge"),
			only("targets", k.Targets != nil, "target-off", "char-swap"),
			only("confusion", k.Confusion != nil, "swap-class"),
			only("chars", k.Chars != "", "char-swap"),
		} {
			if e != nil {
				return e
			}
		}
		hi := map[string]int{"mask-edge": 8, "box-jitter": 64, "target-off": 1000}[k.Kind]
		if hi > 0 {
			if k.By == nil {
				def := map[string]IntRange{"mask-edge": {Min: 1, Max: 2}, "box-jitter": {Min: 1, Max: 3}, "target-off": {Min: 1, Max: 1}}[k.Kind]
				k.By = &def
			}
			if k.By.Min < 1 || k.By.Max > hi {
				return d.ErrPath(p+".by", fmt.Sprintf("[%d, %d]", k.By.Min, k.By.Max), "want whole numbers in 1..%d", hi)
			}
		}
		switch k.Kind {
		case "swap-class":
			if len(r.Classes) < 2 {
				return d.ErrPath(p+".kind", `"swap-class"`, "swapping classes needs at least two classes")
			}
			for j := range k.Confusion {
				c := &k.Confusion[j]
				cp := fmt.Sprintf("%s.confusion[%d]", p, j)
				for _, f := range [][2]string{{"class", c.Class}, {"as", c.As}} {
					if _, ok := r.classID[f[1]]; !ok {
						return d.ErrPath(cp+"."+f[0], fmt.Sprintf("%q", f[1]), "unknown class")
					}
				}
				if c.Class == c.As {
					return d.ErrPath(cp+".as", fmt.Sprintf("%q", c.As), "a swap needs another class than %q", c.Class)
				}
				if c.Odds == nil {
					one := 1.0
					c.Odds = &one
				}
				if *c.Odds <= 0 {
					return d.ErrPath(cp+".odds", fnum(*c.Odds), "odds must be above 0")
				}
			}
		case "mask-edge":
			if k.How == nil {
				k.How = slices.Clone(manifest.EdgeKinds)
			}
			if len(k.How) == 0 {
				return d.ErrPath(p+".how", "[]", "want one or more of %s", list(manifest.EdgeKinds))
			}
			for j, h := range k.How {
				if !oneOf(h, manifest.EdgeKinds) {
					return d.ErrPath(fmt.Sprintf("%s.how[%d]", p, j), fmt.Sprintf("%q", h), "want one of %s", list(manifest.EdgeKinds))
				}
			}
		case "target-off", "char-swap":
			text := k.Kind == "char-swap"
			if k.Targets == nil {
				for _, t := range r.Targets {
					if (t.Kind == "text") == text {
						k.Targets = append(k.Targets, t.Name)
					}
				}
			}
			if len(k.Targets) == 0 {
				what := "numeric"
				if text {
					what = "text"
				}
				return d.ErrPath(p+".targets", "", "%s needs a %s target, and the recipe has none", k.Kind, what)
			}
			for j, n := range k.Targets {
				t := r.targetSpec(n)
				if t == nil || (t.Kind == "text") != text {
					want := "a numeric target"
					if text {
						want = "a text target"
					}
					return d.ErrPath(fmt.Sprintf("%s.targets[%d]", p, j), fmt.Sprintf("%q", n), "want %s of the recipe", want)
				}
			}
			if text && k.Chars == "" {
				var all []rune
				for _, o := range r.allSpecs() {
					for _, ch := range o.chars {
						if !slices.Contains(all, ch) {
							all = append(all, ch)
						}
					}
				}
				slices.Sort(all)
				k.Chars = string(all)
			}
			if text && len([]rune(k.Chars)) < 2 {
				return d.ErrPath(p+".chars", fmt.Sprintf("%q", k.Chars), "a character swap needs at least two characters to choose from")
			}
		}
	}
	if total <= 0 {
		return d.ErrPath("mislabel.kinds", "", "the odds must add up to more than 0")
	}
	return nil
}

func (r *Recipe) validateHoldOut(d *yamlnode.Decoder) error {
	h := r.HoldOut
	if h == nil {
		return nil
	}
	if len(h.Splits) == 0 {
		h.Splits = []string{"test"}
	}
	if len(h.Combos) == 0 {
		return d.ErrPath("hold_out.combos", "", "want at least one combination to hold out")
	}
	seen := map[string]bool{}
	r.bands = map[*ObjectSpec]*bands{}
	for i := range h.Combos {
		c := &h.Combos[i]
		p := fmt.Sprintf("hold_out.combos[%d]", i)
		if !comboName.MatchString(c.Name) {
			return d.ErrPath(p+".name", fmt.Sprintf("%q", c.Name), "want a name of 1 to 40 lowercase letters, digits, - or _, starting with a letter or digit")
		}
		if seen[c.Name] {
			return d.ErrPath(p+".name", fmt.Sprintf("%q", c.Name), "names must be unique")
		}
		seen[c.Name] = true
		if c.Glyphs != "" {
			g := []rune(c.Glyphs)
			if len(g) != 2 {
				return d.ErrPath(p+".glyphs", fmt.Sprintf("%q", c.Glyphs), "want two characters: a pair read next to each other")
			}
			if c.Color != nil || c.Intensity != nil || c.Size != nil || c.Angle != nil || c.MoreThan != nil {
				return d.ErrPath(p+".glyphs", "", "glyphs stands alone (with class at most)")
			}
			rows := 0
			for li := range r.Layers {
				for _, o := range r.Layers[li].Objects {
					if o.Glyph != nil && (c.Class == "" || o.Class == c.Class) {
						if r.Layers[li].Layout.Kind != "row" {
							return d.ErrPath(p+".glyphs", "", "glyph pairs are read in row layouts only; class %q has glyphs in a %s layout", o.Class, r.Layers[li].Layout.Kind)
						}
						rows++
					}
				}
			}
			if rows == 0 {
				return d.ErrPath(p+".glyphs", "", "no glyphs in a row layout to read the pair from")
			}
			if c.Class != "" {
				if _, ok := r.classID[c.Class]; !ok {
					return d.ErrPath(p+".class", fmt.Sprintf("%q", c.Class), "unknown class")
				}
			}
			continue
		}
		if _, ok := r.classID[c.Class]; !ok {
			return d.ErrPath(p+".class", fmt.Sprintf("%q", c.Class), "want a class of the recipe")
		}
		if c.Color == nil && c.Intensity == nil && c.Size == nil && c.Angle == nil && c.MoreThan == nil {
			return d.ErrPath(p, "", "want a factor to hold out with the class: color, intensity, size, angle, more_than (or glyphs)")
		}
		if c.Color != nil && r.Canvas.Mode != "rgb" {
			return d.ErrPath(p+".color", "", "color needs canvas.mode rgb; a gray canvas takes intensity")
		}
		if c.Intensity != nil && r.Canvas.Mode == "rgb" {
			return d.ErrPath(p+".intensity", "", "intensity is for gray canvases; an rgb canvas takes color")
		}
		if c.MoreThan != nil && *c.MoreThan < 0 {
			return d.ErrPath(p+".more_than", fmt.Sprint(*c.MoreThan), "want a count of 0 or more")
		}
		if c.Size == nil && c.Angle == nil {
			continue
		}
		for li := range r.Layers {
			for oi := range r.Layers[li].Objects {
				o := &r.Layers[li].Objects[oi]
				for pi := range o.Parts {
					if o.Parts[pi].Class == c.Class {
						return d.ErrPath(p+".class", fmt.Sprintf("%q", c.Class), "size and angle are held out for top-level objects; class %q is also a part, whose size and angle follow its parent", c.Class)
					}
				}
				if o.Class != c.Class {
					continue
				}
				if c.Size != nil && r.Layers[li].Layout.Kind == "row" {
					return d.ErrPath(p+".size", "", "a row layout draws one size for the whole row; hold out size in scatter or grid layouts")
				}
				b := r.bands[o]
				if b == nil {
					b = &bands{}
					r.bands[o] = b
				}
				if c.Size != nil {
					b.size = append(b.size, [2]float64{c.Size.Min, c.Size.Max})
				}
				if c.Angle != nil {
					b.angle = append(b.angle, [2]float64{c.Angle.Min, c.Angle.Max})
				}
			}
		}
	}
	return nil
}

func (r *Recipe) validateBait(d *yamlnode.Decoder) error {
	b := r.Bait
	if b == nil {
		return nil
	}
	t := r.targetSpec(b.Target)
	if t == nil || t.Kind == "text" {
		return d.ErrPath("bait.target", fmt.Sprintf("%q", b.Target), "want a numeric target of the recipe")
	}
	if !r.contentDecides(*t) {
		return d.ErrPath("bait.target", fmt.Sprintf("%q", b.Target), "bait needs a target that content decides (a count, a value aggregate or a row reading), known before the image is drawn")
	}
	if b.Strength < 0 || b.Strength > 1 {
		return d.ErrPath("bait.strength", fnum(b.Strength), "want a strength in 0..1")
	}
	if len(b.Splits) == 0 {
		b.Splits = []string{"train"}
	}
	if b.Elsewhere == "" {
		b.Elsewhere = "independent"
	}
	if !oneOf(b.Elsewhere, []string{"independent", "reversed"}) {
		return d.ErrPath("bait.elsewhere", fmt.Sprintf("%q", b.Elsewhere), "want independent or reversed")
	}
	c := &b.Cue
	if !oneOf(c.Kind, cueKinds) {
		return d.ErrPath("bait.cue.kind", fmt.Sprintf("%q", c.Kind), "want one of %s", list(cueKinds))
	}
	if c.Kind == "corner-mark" {
		if c.Corner == "" {
			c.Corner = "top-left"
		}
		if !oneOf(c.Corner, manifest.Corners) {
			return d.ErrPath("bait.cue.corner", fmt.Sprintf("%q", c.Corner), "want one of %s", list(manifest.Corners))
		}
		if c.Size == 0 {
			c.Size = 4
		}
		if c.Size < 1 || c.Size > min(r.Canvas.Width, r.Canvas.Height) {
			return d.ErrPath("bait.cue.size", fmt.Sprint(c.Size), "want a mark of 1..%d pixels", min(r.Canvas.Width, r.Canvas.Height))
		}
		if c.Tone == nil {
			w := 255.0
			c.Tone = &w
		}
		if *c.Tone < 0 || *c.Tone > 255 || *c.Tone != float64(int(*c.Tone)) {
			return d.ErrPath("bait.cue.tone", fnum(*c.Tone), "want a gray level, a whole number in 0..255")
		}
		if c.Shift != 0 {
			return d.ErrPath("bait.cue.shift", "", "shift belongs to the background and brightness cues")
		}
		return nil
	}
	if c.Corner != "" || c.Size != 0 || c.Tone != nil {
		return d.ErrPath("bait.cue", "", "corner, size and tone belong to the corner-mark cue")
	}
	if c.Shift == 0 {
		c.Shift = 40
	}
	if c.Shift < -255 || c.Shift > 255 || c.Shift != float64(int(c.Shift)) {
		return d.ErrPath("bait.cue.shift", fnum(c.Shift), "want whole gray levels in -255..255, not 0")
	}
	return nil
}

// checkInstrumentSplits refuses instrument splits the run's ratios lack.
func (r *Recipe) checkInstrumentSplits(sp manifest.Splits) error {
	check := func(field string, names []string) error {
		for i, n := range names {
			if !slices.Contains(sp.Names, n) {
				return &RecipeError{File: r.fileName(), Path: fmt.Sprintf("%s[%d]", field, i), Value: fmt.Sprintf("%q", n),
					Msg: fmt.Sprintf("no split %q in %s", n, sp.Spec)}
			}
		}
		return nil
	}
	if r.Mislabel != nil {
		if err := check("mislabel.splits", r.Mislabel.Splits); err != nil {
			return err
		}
	}
	if r.Bait != nil {
		if err := check("bait.splits", r.Bait.Splits); err != nil {
			return err
		}
	}
	if r.HoldOut != nil {
		if err := check("hold_out.splits", r.HoldOut.Splits); err != nil {
			return err
		}
		for _, n := range r.HoldOut.Splits {
			if sp.Ratios[slices.Index(sp.Names, n)] > 0 {
				return nil
			}
		}
		return &RecipeError{File: r.fileName(), Path: "hold_out.splits", Msg: fmt.Sprintf("none of %v has a ratio above 0 in %s: the held-out samples would have nowhere to go", r.HoldOut.Splits, sp.Spec)}
	}
	return nil
}

func (r *Recipe) fileName() string {
	if r.file == "" {
		return "preset " + r.Name
	}
	return r.file
}

// drawPieces confines each held-out factor's draw to one piece of its range,
// chosen from the hold-out stream (seed, index, streamHoldOut, draw).
func (r *Recipe) drawPieces(seed uint64, index, draw int, objs []ObjectPlan) {
	if len(r.bands) == 0 {
		return
	}
	rng := manifest.RNG(seed, uint64(index), streamHoldOut, uint64(draw))
	for i := range objs {
		b := r.bands[objs[i].Spec]
		if b == nil {
			continue
		}
		if len(b.size) > 0 {
			objs[i].sizePiece = choosePiece(rng, objs[i].Spec.Size, b.size)
		}
		if len(b.angle) > 0 {
			objs[i].anglePiece = choosePiece(rng, *objs[i].Spec.Angle, b.angle)
		}
	}
}

func choosePiece(rng *rand.Rand, r Range, bs [][2]float64) *piece {
	if r.Max <= r.Min {
		return nil // a fixed value: nothing to choose
	}
	pts := []float64{r.Min, r.Max}
	for _, b := range bs {
		for _, e := range b {
			if e > r.Min && e < r.Max {
				pts = append(pts, e)
			}
		}
	}
	sort.Float64s(pts)
	pts = slices.Compact(pts)
	u := r.Min + rng.Float64()*(r.Max-r.Min)
	k := 0
	for k+2 < len(pts) && u >= pts[k+1] {
		k++
	}
	lo, hi := pts[k], pts[k+1]
	return &piece{lo: lo, hi: hi, mid: (lo + hi) / 2, bands: bs}
}

// drawIn draws uniformly from r, or from p when the factor is held out; a
// draw whose recorded (rounded) value would fall on the other side of a band
// end than the piece is drawn again.
func drawIn(rng *rand.Rand, r Range, p *piece) float64 {
	if p == nil {
		return uni(rng, r)
	}
	side := func(v float64) uint64 {
		var s uint64
		for i, b := range p.bands {
			if v >= b[0] && v <= b[1] {
				s |= 1 << i
			}
		}
		return s
	}
	want := side(p.mid)
	for t := 0; t < 64; t++ {
		v := p.lo + rng.Float64()*(p.hi-p.lo)
		if side(manifest.Round(v, 3)) == want {
			return v
		}
	}
	return p.mid
}

// heldOutOf names the held-out combination a content draw shows ("" for
// none), judged on the record view of the content, as verify judges the
// written record.
func (r *Recipe) heldOutOf(objs []ObjectPlan) string {
	if r.inst == nil || r.inst.HoldOut == nil {
		return ""
	}
	table := r.ClassTable()
	rec := &manifest.Record{Objects: make([]manifest.Object, len(objs))}
	for i := range objs {
		o := &objs[i]
		mo := manifest.Object{Instance: i + 1, Class: o.Class, ClassName: table[o.Class].Name, Parent: o.Parent, Shape: o.Kind}
		if o.Kind == "glyph" {
			mo.Glyph = string(o.Glyph)
		}
		if r.Canvas.Mode == "rgb" {
			t := o.Tone
			mo.Color = &t
		} else {
			v := float64(o.Tone[0])
			mo.Intensity = &v
		}
		mo.Size = manifest.Factor(manifest.Round(o.Spec.Size.Min, 3))
		if o.sizePiece != nil {
			mo.Size = manifest.Factor(o.sizePiece.mid)
		}
		if o.Spec.Angle != nil {
			mo.Angle = manifest.Factor(manifest.Round(o.Spec.Angle.Min, 3))
		}
		if o.anglePiece != nil {
			mo.Angle = manifest.Factor(o.anglePiece.mid)
		}
		rec.Objects[i] = mo
	}
	return r.inst.HoldOut.Match(rec)
}

// allocate deals the samples to splits: with held-out combinations, their
// strata go only to hold_out.splits (manifest.AllocateHeldOut).
func (r *Recipe) allocate(seed uint64, ids []int32, names []string, sp manifest.Splits) (*manifest.Allocation, error) {
	if r.HoldOut == nil {
		return manifest.AllocateStrataIDs(seed, ids, names, sp)
	}
	return manifest.AllocateHeldOut(seed, ids, names, sp, r.HoldOut.Splits)
}

// stratum is key's stratum of a content draw, or the held-out stratum.
func (r *Recipe) heldOutStratum(objs []ObjectPlan) string {
	if n := r.heldOutOf(objs); n != "" {
		return manifest.HeldOutPrefix + n
	}
	return ""
}

// cue decides the bait cue of sample index: in the bait's splits it follows
// the target with probability strength (otherwise a fair coin); elsewhere it
// is the coin, or, reversed, the opposite of the target with probability
// strength. Both draws are always taken from (seed, index, streamBait).
func (rd *Renderer) cue(seed uint64, index int, content []ObjectPlan) bool {
	b := rd.r.Bait
	if b == nil {
		return false
	}
	rng := manifest.RNG(seed, uint64(index), streamBait)
	u, coin := rng.Float64(), rng.Uint64()&1 == 1
	y := rd.r.contentTargets(content)[b.Target].Num > b.Above
	split := ""
	if rd.splitOf != nil {
		split = rd.splitOf(index)
	}
	switch {
	case split != "" && slices.Contains(b.Splits, split):
		if u < b.Strength {
			return y
		}
	case split != "" && b.Elsewhere == "reversed":
		if u < b.Strength {
			return !y
		}
	}
	return coin
}

// paintCue paints an on cue: before the objects (phase 0) the background
// cue lifts every pixel; after them (phase 1) the brightness cue lifts every
// pixel and the corner mark fills its square. Levels are clamped to 0..255.
func (rd *Renderer) paintCue(phase int, pix []uint8, stride, bpp, w, h int) {
	c := &rd.r.Bait.Cue
	lift := func() {
		d := int(c.Shift)
		for y := 0; y < h; y++ {
			row := pix[y*stride : y*stride+w*bpp]
			for i := range row {
				if bpp == 4 && i%4 == 3 {
					continue
				}
				row[i] = uint8(max(0, min(255, int(row[i])+d)))
			}
		}
	}
	switch {
	case phase == 0 && c.Kind == "background", phase == 1 && c.Kind == "brightness":
		lift()
	case phase == 1 && c.Kind == "corner-mark":
		q := rd.r.inst.Bait.Cue.CueRect(w, h)
		t := uint8(*c.Tone)
		for y := q.Min.Y; y < q.Max.Y; y++ {
			for x := q.Min.X; x < q.Max.X; x++ {
				off := y*stride + x*bpp
				pix[off] = t
				if bpp == 4 {
					pix[off+1], pix[off+2] = t, t
				}
			}
		}
	}
}

// plant adds the instruments to a rendered sample's record: the held-out
// combination it shows, its bait cue, and (in mislabel's splits, with
// probability share) one corruption with true values beside noisy ones.
func (rd *Renderer) plant(seed uint64, index int, p *Plan, content []ObjectPlan, s *Sample) error {
	r := rd.r
	rec := &s.Record
	if r.HoldOut != nil {
		rec.HeldOut = r.heldOutOf(content)
	}
	if r.Bait != nil {
		rec.Bait = &manifest.BaitMark{}
		if p.Cue {
			rec.Bait.Cue = 1
		}
	}
	if r.Mislabel == nil || rd.splitOf == nil || !slices.Contains(r.Mislabel.Splits, rd.splitOf(index)) {
		return nil
	}
	m, err := r.mislabel(manifest.RNG(seed, uint64(index), streamMislabel), p, s)
	rec.Mislabel = m
	return err
}

func pickOdds(rng *rand.Rand, odds []float64) int {
	total := 0.0
	for _, o := range odds {
		total += o
	}
	u := rng.Float64() * total
	for i, o := range odds {
		if u < o {
			return i
		}
		u -= o
	}
	return len(odds) - 1
}

// mislabel draws whether the sample is corrupted and how. A kind that finds
// nothing to corrupt (no object, an empty reading) leaves the sample clean.
func (r *Recipe) mislabel(rng *rand.Rand, p *Plan, s *Sample) (*manifest.Mislabel, error) {
	m := r.Mislabel
	if rng.Float64() >= m.Share {
		return nil, nil
	}
	odds := make([]float64, len(m.Kinds))
	for i, k := range m.Kinds {
		odds[i] = *k.Odds
	}
	k := &m.Kinds[pickOdds(rng, odds)]
	rec := &s.Record
	objs := rec.Objects
	out := &manifest.Mislabel{Kind: k.Kind}
	table := r.ClassTable()
	switch k.Kind {
	case "swap-class":
		// Candidates: objects whose class has somewhere to go.
		var cands []int
		for i := range objs {
			if len(r.swapsOf(k, objs[i].ClassName)) > 0 {
				cands = append(cands, i)
			}
		}
		if len(cands) == 0 {
			return nil, nil
		}
		i := cands[rng.IntN(len(cands))]
		to := r.swapsOf(k, objs[i].ClassName)
		w := make([]float64, len(to))
		for j := range to {
			w[j] = to[j].odds
		}
		nc := r.classID[to[pickOdds(rng, w)].as]
		noisy := slices.Clone(objs)
		noisy[i].Class, noisy[i].ClassName = nc, table[nc].Name
		out.Objects = []manifest.NoisyObject{{Instance: objs[i].Instance, TrueClass: objs[i].Class, TrueClassName: objs[i].ClassName, Class: nc, ClassName: table[nc].Name}}
		nt, err := r.targets(p, noisy, r.Targets)
		if err != nil {
			return nil, err
		}
		out.Targets = changed(rec.Targets, nt)
	case "mask-edge":
		if len(objs) == 0 {
			return nil, nil
		}
		o := &objs[rng.IntN(len(objs))]
		how := k.How[rng.IntN(len(k.How))]
		by := uniInt(rng, k.By.Min, k.By.Max)
		dir := [8][2]int{{1, 0}, {1, 1}, {0, 1}, {-1, 1}, {-1, 0}, {-1, -1}, {0, -1}, {1, -1}}[rng.IntN(8)]
		no := manifest.NoisyObject{Instance: o.Instance, Edge: how}
		var sh [2]int
		if how == "shift" {
			sh = [2]int{dir[0] * by, dir[1] * by}
			no.Shift = &sh
		} else {
			no.By = by
		}
		_, area, box := manifest.EdgeMask(s.Instances, o.Instance, how, by, sh)
		tb, ta := o.Box, o.Area
		no.TrueBox, no.TrueArea, no.Box, no.Area = &tb, &ta, &box, &area
		out.Objects = []manifest.NoisyObject{no}
	case "box-jitter":
		if len(objs) == 0 {
			return nil, nil
		}
		for i := range objs {
			tb := objs[i].Box
			var d [4]int
			for j := range d {
				d[j] = uniInt(rng, k.By.Min, k.By.Max)
				if rng.IntN(2) == 0 {
					d[j] = -d[j]
				}
			}
			nb := [4]int{tb[0] + d[0], tb[1] + d[1], tb[2] + d[2], tb[3] + d[3]}
			for a := 0; a < 2; a++ { // an empty box grows instead
				if nb[a] >= nb[a+2] {
					nb[a], nb[a+2] = tb[a]-abs(d[a]), tb[a+2]+abs(d[a+2])
				}
			}
			out.Objects = append(out.Objects, manifest.NoisyObject{Instance: objs[i].Instance, TrueBox: &tb, Box: &nb})
		}
	case "target-off":
		name := k.Targets[rng.IntN(len(k.Targets))]
		by := float64(uniInt(rng, k.By.Min, k.By.Max))
		if rng.IntN(2) == 0 {
			by = -by
		}
		tv := rec.Targets[name]
		nv := tv.Num + by
		if nv < 0 && tv.Num >= 0 { // a count never goes below 0
			nv = tv.Num - by
		}
		out.Targets = map[string]manifest.NoisyValue{name: {True: tv, Noisy: manifest.Number(nv)}}
	case "char-swap":
		var names []string
		for _, n := range k.Targets {
			if rec.Targets[n].Str != "" {
				names = append(names, n)
			}
		}
		if len(names) == 0 {
			return nil, nil
		}
		name := names[rng.IntN(len(names))]
		tv := rec.Targets[name]
		rs := []rune(tv.Str)
		at := rng.IntN(len(rs))
		var others []rune
		for _, ch := range k.Chars {
			if ch != rs[at] {
				others = append(others, ch)
			}
		}
		if len(others) == 0 {
			return nil, nil
		}
		rs[at] = others[rng.IntN(len(others))]
		out.Targets = map[string]manifest.NoisyValue{name: {True: tv, Noisy: manifest.Text(string(rs))}}
	}
	return out, nil
}

func abs(x int) int { return max(x, -x) }

type swap struct {
	as   string
	odds float64
}

// swapsOf lists the classes an object of class may be swapped to: the
// confusion rows for it, or, without a confusion table, every other class
// alike.
func (r *Recipe) swapsOf(k *MislabelKind, class string) []swap {
	var out []swap
	if k.Confusion == nil {
		for _, c := range r.Classes {
			if c.Name != class {
				out = append(out, swap{c.Name, 1})
			}
		}
		return out
	}
	for _, c := range k.Confusion {
		if c.Class == class {
			out = append(out, swap{c.As, *c.Odds})
		}
	}
	return out
}

// changed lists the targets whose noisy value differs from the true one.
func changed(truth, noisy map[string]manifest.Value) map[string]manifest.NoisyValue {
	out := map[string]manifest.NoisyValue{}
	for n, v := range noisy {
		if t := truth[n]; t != v {
			out[n] = manifest.NoisyValue{True: t, Noisy: v}
		}
	}
	if len(out) == 0 {
		return nil
	}
	return out
}
