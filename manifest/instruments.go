package manifest

import (
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"sort"
	"strings"
)

// Instruments are the three controlled-test-set instruments a recipe may
// plant: label noise (mislabel), held-out combinations (hold_out) and
// shortcut bait (bait). They are read here from the normalized recipe that
// dataset.json stores, so verify and stats need nothing but the dataset.
type Instruments struct {
	Mislabel *MislabelSpec `json:"mislabel"`
	HoldOut  *HoldOutSpec  `json:"hold_out"`
	Bait     *BaitSpec     `json:"bait"`
}

// MislabelSpec plants label noise: each sample of Splits is corrupted with
// probability Share, by one of Kinds chosen by their odds.
type MislabelSpec struct {
	Share  float64        `json:"share"`
	Splits []string       `json:"splits"`
	Kinds  []MislabelKind `json:"kinds"`
}

// MislabelKind is one corruption: swap-class, mask-edge, box-jitter,
// target-off or char-swap, with its parameters.
type MislabelKind struct {
	Kind      string      `json:"kind"`
	Odds      float64     `json:"odds"`
	By        [2]float64  `json:"by"`                  // pixels (mask-edge, box-jitter) or units (target-off)
	How       []string    `json:"how,omitempty"`       // mask-edge: dilate, erode, shift
	Targets   []string    `json:"targets,omitempty"`   // target-off, char-swap
	Confusion []Confusion `json:"confusion,omitempty"` // swap-class: which class may become which
	Chars     string      `json:"chars,omitempty"`     // char-swap: the characters a reading may become
}

// Confusion is one entry of a swap-class confusion table: an object of
// Class may be labeled As, with weight Odds among its row's entries.
type Confusion struct {
	Class string  `json:"class"`
	As    string  `json:"as"`
	Odds  float64 `json:"odds"`
}

// HoldOutSpec keeps samples that show any of Combos out of every split but
// Splits.
type HoldOutSpec struct {
	Splits []string       `json:"splits"`
	Combos []HoldOutCombo `json:"combos"`
}

// HoldOutCombo is one held-out combination. Its factor conditions hold on
// one object of Class at once (closed ranges on the recorded values);
// MoreThan holds on the sample's number of objects of Class; Glyphs holds
// when two top-level glyphs next to each other in instance order read it.
type HoldOutCombo struct {
	Name      string         `json:"name"`
	Class     string         `json:"class,omitempty"`
	Color     *[2][3]float64 `json:"color,omitempty"`
	Intensity *[2]float64    `json:"intensity,omitempty"`
	Size      *[2]float64    `json:"size,omitempty"`
	Angle     *[2]float64    `json:"angle,omitempty"`
	MoreThan  *int           `json:"more_than,omitempty"`
	Glyphs    string         `json:"glyphs,omitempty"`
}

// BaitSpec plants a nuisance cue that agrees with Target > Above in Splits
// with the given Strength (the share of samples whose cue is set by the
// target; the others get a fair coin) and, elsewhere, is independent of it
// or reversed.
type BaitSpec struct {
	Target    string   `json:"target"`
	Above     float64  `json:"above"`
	Strength  float64  `json:"strength"`
	Splits    []string `json:"splits"`
	Elsewhere string   `json:"elsewhere"` // independent or reversed
	Cue       BaitCue  `json:"cue"`
}

// BaitCue is what the cue looks like when it is on: a square mark of Size
// pixels and gray level Tone in a Corner (corner-mark), the background
// lifted by Shift levels (background), or the whole image lifted by Shift
// (brightness).
type BaitCue struct {
	Kind   string  `json:"kind"`
	Corner string  `json:"corner,omitempty"`
	Size   int     `json:"size,omitempty"`
	Tone   float64 `json:"tone,omitempty"`
	Shift  float64 `json:"shift,omitempty"`
}

// HeldOutPrefix starts the stratum key of a held-out sample: its stratum is
// "held-out:" + the combination's name, whatever the stratification key.
const HeldOutPrefix = "held-out:"

// ReadInstruments reads the instruments from a normalized recipe (the
// "recipe" of dataset.json); none planted gives a zero Instruments.
func ReadInstruments(recipe json.RawMessage) (*Instruments, error) {
	var in Instruments
	if len(recipe) == 0 {
		return &in, nil
	}
	if err := json.Unmarshal(recipe, &in); err != nil {
		return nil, fmt.Errorf("dataset.json recipe: instruments: %w", err)
	}
	return &in, nil
}

// Mislabel is the label noise planted in one record. The record's own
// objects, targets and masks stay true; this says which corruption was
// planted (Kind) and gives, for every label it changed, the true value
// beside the noisy one.
type Mislabel struct {
	Kind    string                `json:"kind"`
	Objects []NoisyObject         `json:"objects,omitempty"`
	Targets map[string]NoisyValue `json:"targets,omitempty"`
}

// NoisyObject is one object's corrupted labels, true values beside noisy
// ones: a swapped class (TrueClass → Class), a jittered box, or a mask
// edge moved (Edge: dilate or erode by By pixels, or shift by Shift), with
// the noisy mask's area and box as EdgeMask measures them.
type NoisyObject struct {
	Instance      int     `json:"instance"`
	TrueClass     int     `json:"true_class,omitempty"`
	TrueClassName string  `json:"true_class_name,omitempty"`
	Class         int     `json:"class,omitempty"`
	ClassName     string  `json:"class_name,omitempty"`
	Edge          string  `json:"edge,omitempty"`
	By            int     `json:"by,omitempty"`
	Shift         *[2]int `json:"shift,omitempty"`
	TrueBox       *[4]int `json:"true_box_x0y0x1y1,omitempty"`
	Box           *[4]int `json:"box_x0y0x1y1,omitempty"`
	TrueArea      *int    `json:"true_area,omitempty"`
	Area          *int    `json:"area,omitempty"`
}

// NoisyValue is a target's true and noisy value.
type NoisyValue struct {
	True  Value `json:"true"`
	Noisy Value `json:"noisy"`
}

// BaitMark is the bait cue planted in one record: 1 on, 0 off.
type BaitMark struct {
	Cue int `json:"cue"`
}

// Matches reports whether record r shows combination c.
func (c *HoldOutCombo) Matches(r *Record) bool {
	if c.Glyphs != "" {
		want := []rune(c.Glyphs)
		var prev *Object
		for i := range r.Objects {
			o := &r.Objects[i]
			if o.Parent != 0 || o.Glyph == "" {
				continue
			}
			if prev != nil && prev.Glyph == string(want[0]) && o.Glyph == string(want[1]) &&
				(c.Class == "" || (prev.ClassName == c.Class && o.ClassName == c.Class)) {
				return true
			}
			prev = o
		}
		return false
	}
	if c.MoreThan != nil {
		n := 0
		for i := range r.Objects {
			if r.Objects[i].ClassName == c.Class {
				n++
			}
		}
		if n <= *c.MoreThan {
			return false
		}
		if c.Color == nil && c.Intensity == nil && c.Size == nil && c.Angle == nil {
			return true
		}
	}
	for i := range r.Objects {
		if c.matchObject(&r.Objects[i]) {
			return true
		}
	}
	return false
}

func in(v float64, r *[2]float64) bool { return r == nil || (v >= r[0] && v <= r[1]) }

func (c *HoldOutCombo) matchObject(o *Object) bool {
	if o.ClassName != c.Class {
		return false
	}
	if c.Color != nil {
		if o.Color == nil {
			return false
		}
		for k := 0; k < 3; k++ {
			if v := float64(o.Color[k]); v < c.Color[0][k] || v > c.Color[1][k] {
				return false
			}
		}
	}
	if c.Intensity != nil && (o.Intensity == nil || !in(*o.Intensity, c.Intensity)) {
		return false
	}
	return inPlanned(o.Size, c.Size) && inPlanned(o.Angle, c.Angle)
}

// inPlanned is in for a planned factor: an object without one matches no
// range.
func inPlanned(v *float64, r *[2]float64) bool { return r == nil || v != nil && in(*v, r) }

// Match returns the name of the first combination record r shows, "" for
// none.
func (h *HoldOutSpec) Match(r *Record) string {
	if h == nil {
		return ""
	}
	for i := range h.Combos {
		if h.Combos[i].Matches(r) {
			return h.Combos[i].Name
		}
	}
	return ""
}

// AllocateHeldOut is AllocateStrataIDs for a set with held-out samples:
// strata whose key starts with HeldOutPrefix are dealt only to the splits
// named in held (their ratios renormalized among themselves, shuffled from
// the key (seed, 0x401d) so their stream differs from the others'), every
// other stratum by the ratios as usual. The table lists both, in natural
// key order.
func AllocateHeldOut(seed uint64, ids []int32, names []string, sp Splits, held []string) (*Allocation, error) {
	isHeld := make([]bool, len(names))
	var restNames, heldNames []string
	newID := make([]int32, len(names))
	for i, n := range names {
		if strings.HasPrefix(n, HeldOutPrefix) {
			isHeld[i] = true
			newID[i] = int32(len(heldNames))
			heldNames = append(heldNames, n)
		} else {
			newID[i] = int32(len(restNames))
			restNames = append(restNames, n)
		}
	}
	var restIDs, heldIDs []int32
	var restUnits, heldUnits []int
	for u, id := range ids {
		if isHeld[id] {
			heldIDs = append(heldIDs, newID[id])
			heldUnits = append(heldUnits, u)
		} else {
			restIDs = append(restIDs, newID[id])
			restUnits = append(restUnits, u)
		}
	}
	hs := sp
	hs.Ratios = make([]float64, len(sp.Ratios))
	total := 0.0
	for j, n := range sp.Names {
		for _, h := range held {
			if n == h {
				hs.Ratios[j] = sp.Ratios[j]
				total += sp.Ratios[j]
			}
		}
	}
	if total <= 0 {
		return nil, fmt.Errorf("hold_out.splits %s: none of them has a ratio above 0 in %s", strings.Join(held, ", "), sp.Spec)
	}
	for j := range hs.Ratios {
		hs.Ratios[j] /= total
	}
	out := &Allocation{Split: make([]uint8, len(ids)), Counts: make([]int, len(sp.Names))}
	for _, part := range []struct {
		ids   []int32
		names []string
		units []int
		sp    Splits
		seed  uint64
	}{{restIDs, restNames, restUnits, sp, seed}, {heldIDs, heldNames, heldUnits, hs, Key(seed, 0x401d)}} {
		if len(part.names) == 0 {
			continue
		}
		a, err := AllocateStrataIDs(part.seed, part.ids, part.names, part.sp)
		if err != nil {
			return nil, err
		}
		for k, u := range part.units {
			out.Split[u] = a.Split[k]
		}
		for j := range out.Counts {
			out.Counts[j] += a.Counts[j]
		}
		out.Table = append(out.Table, a.Table...)
		out.Thin = append(out.Thin, a.Thin...)
	}
	sort.SliceStable(out.Table, func(a, b int) bool { return NaturalLess(out.Table[a].Key, out.Table[b].Key) })
	sort.SliceStable(out.Thin, func(a, b int) bool { return NaturalLess(out.Thin[a], out.Thin[b]) })
	return out, nil
}

// Edge kinds of the mask-edge corruption.
var EdgeKinds = []string{"dilate", "erode", "shift"}

// EdgeMask returns the noisy pixel set of instance id after a mask-edge
// corruption, one bool per pixel in row order: dilate by k takes every
// pixel within Chebyshev distance k of the instance (a (2k+1)² square
// structuring element; Gonzalez & Woods, Digital Image Processing, ch. 9,
// from memory), erode by k keeps the pixels whose whole (2k+1)² square lies
// in the instance (outside the canvas counts as outside the instance), shift
// moves the instance by (dx, dy) pixels; all clipped to the canvas. It also
// returns the set's area and box [x0, y0, x1, y1) ([0, 0, 0, 0] when empty).
//
// The noisy semantic mask of a record is its semantic mask with the
// instance's pixels outside this set made background (0) and the set's
// pixels made the instance's class.
func EdgeMask(inst *image.Gray16, id int, how string, k int, shift [2]int) (set []bool, area int, box [4]int) {
	b := inst.Bounds()
	w, h := b.Dx(), b.Dy()
	src := make([]bool, w*h)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			src[y*w+x] = int(inst.Gray16At(b.Min.X+x, b.Min.Y+y).Y) == id
		}
	}
	set = make([]bool, w*h)
	at := func(x, y int) bool { return x >= 0 && y >= 0 && x < w && y < h && src[y*w+x] }
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			var v bool
			switch how {
			case "dilate":
				for dy := -k; dy <= k && !v; dy++ {
					for dx := -k; dx <= k && !v; dx++ {
						v = at(x+dx, y+dy)
					}
				}
			case "erode":
				v = true
				for dy := -k; dy <= k && v; dy++ {
					for dx := -k; dx <= k && v; dx++ {
						v = at(x+dx, y+dy)
					}
				}
			case "shift":
				v = at(x-shift[0], y-shift[1])
			}
			set[y*w+x] = v
		}
	}
	box = [4]int{w, h, 0, 0}
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			if set[y*w+x] {
				area++
				box[0], box[1] = min(box[0], x), min(box[1], y)
				box[2], box[3] = max(box[2], x+1), max(box[3], y+1)
			}
		}
	}
	if area == 0 {
		box = [4]int{}
	}
	return set, area, box
}

// Corner kinds of a corner-mark cue.
var Corners = []string{"top-left", "top-right", "bottom-left", "bottom-right"}

// CueRect is the square a corner-mark cue paints on a w×h image.
func (c *BaitCue) CueRect(w, h int) image.Rectangle {
	s := c.Size
	switch c.Corner {
	case "top-right":
		return image.Rect(w-s, 0, w, s)
	case "bottom-left":
		return image.Rect(0, h-s, s, h)
	case "bottom-right":
		return image.Rect(w-s, h-s, w, h)
	}
	return image.Rect(0, 0, s, s)
}

// MeasureCue measures a bait cue from a written image (and, for a
// background cue, its semantic mask): the mean gray level (the mean of R, G
// and B on a color image) of the corner-mark square, of the background
// pixels (mask value 0), or of the whole image. It returns false when there
// is nothing to measure (no background pixel).
func (c *BaitCue) MeasureCue(img image.Image, mask image.Image) (float64, bool) {
	b := img.Bounds()
	r := b
	if c.Kind == "corner-mark" {
		r = c.CueRect(b.Dx(), b.Dy()).Add(b.Min).Intersect(b)
	}
	sum, n := 0.0, 0
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			if c.Kind == "background" {
				if mask == nil {
					return 0, false
				}
				if v, ok := mask.(*image.Paletted); ok {
					if v.ColorIndexAt(x, y) != 0 {
						continue
					}
				} else if color.GrayModel.Convert(mask.At(x, y)).(color.Gray).Y != 0 {
					continue
				}
			}
			sum += gray(img, x, y)
			n++
		}
	}
	if n == 0 {
		return 0, false
	}
	return sum / float64(n), true
}

func gray(m image.Image, x, y int) float64 {
	switch v := m.(type) {
	case *image.Gray:
		return float64(v.GrayAt(x, y).Y)
	case *image.RGBA:
		c := v.RGBAAt(x, y)
		return (float64(c.R) + float64(c.G) + float64(c.B)) / 3
	case *image.NRGBA:
		c := v.NRGBAAt(x, y)
		return (float64(c.R) + float64(c.G) + float64(c.B)) / 3
	}
	r, g, b, _ := m.At(x, y).RGBA()
	return (float64(r>>8) + float64(g>>8) + float64(b>>8)) / 3
}
