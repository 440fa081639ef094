package gen

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"github.com/trueset/trueset/manifest"
)

// RNG streams of one sample.
const (
	streamContent  = 1 // counts, characters, tones, values: fixed for a sample
	streamGeometry = 2 // positions, sizes, angles, background: redrawn per attempt
)

// MaxAttempts bounds how often one sample's geometry is redrawn before the
// sample fails; MaxTries bounds the position draws for one object.
const (
	MaxAttempts = 40
	MaxTries    = 200
)

// Plan is everything about one sample decided before any pixel exists. It is
// a pure function of (recipe, seed, index, attempt).
type Plan struct {
	Index      int
	Attempt    int
	Cue        bool // the bait cue is on (gen/instruments.go)
	Background BackgroundPlan
	Objects    []ObjectPlan // draw order; instance id = position + 1
}

// BackgroundPlan fixes the background of one sample.
type BackgroundPlan struct {
	Kind      string
	A, B      [3]uint8 // start and end tones (gray uses [0])
	Angle     float64  // gradient direction, degrees
	Cell      float64  // noise cell size in pixels
	NoiseSeed uint64
}

// ObjectPlan is one object's class and factors.
type ObjectPlan struct {
	Spec   *ObjectSpec
	Class  int
	Layer  int
	Parent int // instance id of the parent, 0 = none
	Kind   string
	Glyph  rune
	Tone   [3]uint8
	Value  *float64

	CX, CY, Size, Aspect, Angle float64
	Sides                       int
	Inner, Corner, Thickness    float64

	order       float64 // reading order within its layer
	sizePiece   *piece  // held-out size and angle: the piece drawn from (gen/instruments.go)
	anglePiece  *piece
	LeastShown  float64
	LeastPixels int
}

// LayoutError is a layout that could not be satisfied within the bounded
// number of attempts.
type LayoutError struct {
	Index      int
	Layer      int
	Field      string // the layout field that could not be met ("" = the layout as a whole)
	Constraint string
}

// Path is the recipe field the error is about.
func (e *LayoutError) Path() string {
	p := fmt.Sprintf("layers[%d].layout", e.Layer)
	if e.Field != "" {
		p += "." + e.Field
	}
	return p
}

func (e *LayoutError) Error() string {
	return fmt.Sprintf("sample %d: layers[%d]: %s (gave up after %d attempts)", e.Index, e.Layer, e.Constraint, MaxAttempts)
}

func uni(rng *rand.Rand, r Range) float64 {
	if r.Max == r.Min {
		return r.Min
	}
	return r.Min + rng.Float64()*(r.Max-r.Min)
}

func uniInt(rng *rand.Rand, lo, hi int) int {
	if hi <= lo {
		return lo
	}
	return lo + rng.IntN(hi-lo+1)
}

func drawCount(rng *rand.Rand, c Count) int {
	if c.Values == nil {
		return uniInt(rng, c.Min, c.Max)
	}
	total := 0.0
	for _, w := range c.Weights {
		total += w
	}
	u := rng.Float64() * total
	for i, w := range c.Weights {
		if u < w {
			return c.Values[i]
		}
		u -= w
	}
	return c.Values[len(c.Values)-1]
}

func drawTone(rng *rand.Rand, in *Range, col *ColorRange) [3]uint8 {
	if col != nil {
		var t [3]uint8
		for i := range t {
			t[i] = uint8(math.Round(uni(rng, Range{Min: col.From[i], Max: col.To[i]})))
		}
		return t
	}
	v := uint8(math.Round(uni(rng, *in)))
	return [3]uint8{v, v, v}
}

// MaxContentDraws bounds the redraws of a balanced sample's content.
const MaxContentDraws = 2000

// Content draws what a sample contains — counts, classes, characters, tones
// and values — from the sample's content stream. It does not depend on the
// geometry attempt, so strata computed from it are fixed before rendering.
// With split.balance, the content is redrawn (draw d uses stream (content, d))
// until the balanced target takes the value dealt to this index.
func (r *Recipe) Content(seed uint64, index int) ([]ObjectPlan, error) {
	want, ok := r.balanceWant(seed, index)
	if !ok {
		return r.drawContent(seed, index, 0), nil
	}
	b := r.Split.Balance
	for d := 0; d < MaxContentDraws; d++ {
		objs := r.drawContent(seed, index, d)
		if got := r.contentTargets(objs)[b.Target]; got.String() == want {
			return objs, nil
		}
	}
	return nil, fmt.Errorf("sample %d: split.balance: no content with %s = %s in %d draws; can the recipe's counts and values reach it?", index, b.Target, want, MaxContentDraws)
}

// balanceWant returns the balanced target value dealt to index: indices come
// in blocks of len(values), and each block holds every value once, in an
// order shuffled by (seed, block). So any count of samples has each value
// within one of count/len(values), and no global table is needed.
func (r *Recipe) balanceWant(seed uint64, index int) (string, bool) {
	if r.Split == nil || r.Split.Balance == nil {
		return "", false
	}
	vals := r.Split.Balance.Values
	k := len(vals)
	perm := manifest.RNG(seed, 0xba1a, uint64(index/k)).Perm(k)
	return vals[perm[index%k]], true
}

func (r *Recipe) drawContent(seed uint64, index, draw int) []ObjectPlan {
	rng := manifest.RNG(seed, uint64(index), streamContent, uint64(draw))
	var objs []ObjectPlan
	for li := range r.Layers {
		lay := &r.Layers[li].Layout
		for oi := range r.Layers[li].Objects {
			spec := &r.Layers[li].Objects[oi]
			n := drawCount(rng, spec.Count)
			for k := 0; k < n; k++ {
				parent := r.contentOne(rng, spec, li, lay)
				objs = append(objs, parent)
				pid := len(objs)
				nparts := 0
				for pi := range spec.Parts {
					ps := &spec.Parts[pi]
					m := drawCount(rng, ps.Count)
					for j := 0; j < m; j++ {
						child := r.contentOne(rng, ps, li, lay)
						child.Parent = pid
						objs = append(objs, child)
					}
					nparts += m
				}
				if spec.Value != nil && spec.Value.From == "parts" {
					v := float64(nparts)
					objs[pid-1].Value = &v
				}
			}
		}
	}
	r.drawPieces(seed, index, draw, objs)
	return objs
}

func (r *Recipe) contentOne(rng *rand.Rand, spec *ObjectSpec, layer int, lay *Layout) ObjectPlan {
	o := ObjectPlan{Spec: spec, Class: spec.classID, Layer: layer, Kind: spec.Shape,
		LeastShown: *lay.LeastShown, LeastPixels: *lay.LeastPixels}
	if spec.Glyph != nil {
		o.Kind = "glyph"
		o.Glyph = spec.chars[rng.IntN(len(spec.chars))]
	}
	o.Tone = drawTone(rng, spec.Intensity, spec.Color)
	if spec.Sides != nil {
		o.Sides = uniInt(rng, spec.Sides.Min, spec.Sides.Max)
	}
	if spec.Inner != nil {
		o.Inner = uni(rng, *spec.Inner)
	}
	if spec.Corner != nil {
		o.Corner = uni(rng, *spec.Corner)
	}
	if spec.Thickness != nil {
		o.Thickness = uni(rng, *spec.Thickness)
	}
	if v := spec.Value; v != nil {
		switch v.From {
		case "digit":
			f := float64(o.Glyph - '0')
			o.Value = &f
		case "":
			f := float64(uniInt(rng, v.Range.Min, v.Range.Max))
			o.Value = &f
		}
	}
	return o
}

// Plan decides every factor of sample index for the given attempt. A
// LayoutError means the attempt's geometry could not satisfy the layout;
// callers retry with the next attempt.
func (r *Recipe) Plan(seed uint64, index, attempt int) (*Plan, error) {
	objs, err := r.Content(seed, index)
	if err != nil {
		return nil, err
	}
	return r.placeContent(seed, index, attempt, objs)
}

// placeContent draws the geometry of attempt for a content draw; objs is
// updated in place and becomes the plan's objects.
func (r *Recipe) placeContent(seed uint64, index, attempt int, objs []ObjectPlan) (*Plan, error) {
	p := &Plan{Index: index, Attempt: attempt, Objects: objs}
	rng := manifest.RNG(seed, uint64(index), streamGeometry, uint64(attempt))
	p.Background = r.planBackground(rng)
	start := 0
	for li := range r.Layers {
		end := start
		for end < len(p.Objects) && p.Objects[end].Layer == li {
			end++
		}
		if err := r.placeLayer(rng, li, p.Objects, start, end); err != nil {
			return nil, &LayoutError{Index: index, Layer: li, Constraint: err.Error()}
		}
		start = end
	}
	return p, nil
}

func (r *Recipe) planBackground(rng *rand.Rand) BackgroundPlan {
	b := &r.Background
	bp := BackgroundPlan{Kind: b.Kind}
	bp.A = drawTone(rng, b.Intensity, b.Color)
	switch b.Kind {
	case "gradient":
		bp.B = drawTone(rng, b.EndIntensity, b.EndColor)
		bp.Angle = uni(rng, *b.Angle)
	case "noise":
		// The lattice spans the whole range: A and B are its ends.
		bp.A, bp.B = toneEnds(b.Intensity, b.Color)
		bp.Cell = uni(rng, *b.Cell)
		bp.NoiseSeed = rng.Uint64()
	}
	return bp
}

func toneEnds(in *Range, col *ColorRange) (a, b [3]uint8) {
	if col != nil {
		for i := range a {
			a[i], b[i] = uint8(math.Round(col.From[i])), uint8(math.Round(col.To[i]))
		}
		return
	}
	lo, hi := uint8(math.Round(in.Min)), uint8(math.Round(in.Max))
	return [3]uint8{lo, lo, lo}, [3]uint8{hi, hi, hi}
}

// box is an oriented rectangle: center, unit axis u (v = u rotated 90°) and
// half extents.
type box struct {
	cx, cy, ux, uy, hw, hh float64
}

// localHalf returns the half extents of an object's local box (before
// rotation): for glyphs the scaled ink bounds.
func (o *ObjectPlan) localHalf() (hw, hh float64) {
	if o.Kind == "glyph" {
		g := o.Spec.font.glyphs[o.Glyph]
		s := o.Size / o.Spec.font.UPEM
		return (g.Bounds[2] - g.Bounds[0]) * s * o.Aspect / 2, (g.Bounds[3] - g.Bounds[1]) * s / 2
	}
	return o.Size * o.Aspect / 2, o.Size / 2
}

func (o *ObjectPlan) box() box {
	hw, hh := o.localHalf()
	s, c := math.Sincos(o.Angle * math.Pi / 180)
	return box{o.CX, o.CY, c, s, hw, hh}
}

// extent returns the half width and height of the box's axis-aligned bounds.
func (b box) extent() (ex, ey float64) {
	return math.Abs(b.ux)*b.hw + math.Abs(b.uy)*b.hh, math.Abs(b.uy)*b.hw + math.Abs(b.ux)*b.hh
}

// separated is the separating-axis test for two rectangles, each grown by g/2:
// true when some face normal of either box separates them.
func separated(a, b box, g float64) bool {
	dx, dy := b.cx-a.cx, b.cy-a.cy
	axes := [4][2]float64{{a.ux, a.uy}, {-a.uy, a.ux}, {b.ux, b.uy}, {-b.uy, b.ux}}
	for _, ax := range axes {
		ra := math.Abs(a.hw*(a.ux*ax[0]+a.uy*ax[1])) + math.Abs(a.hh*(-a.uy*ax[0]+a.ux*ax[1]))
		rb := math.Abs(b.hw*(b.ux*ax[0]+b.uy*ax[1])) + math.Abs(b.hh*(-b.uy*ax[0]+b.ux*ax[1]))
		if math.Abs(dx*ax[0]+dy*ax[1]) > ra+rb+g {
			return true
		}
	}
	return false
}

func (b box) contains(x, y float64) bool {
	dx, dy := x-b.cx, y-b.cy
	return math.Abs(dx*b.ux+dy*b.uy) <= b.hw && math.Abs(-dx*b.uy+dy*b.ux) <= b.hh
}

// overlapFraction estimates the share of the smaller box covered by the other
// on an 8×8 grid of sample points.
func overlapFraction(a, b box) float64 {
	if a.hw*a.hh > b.hw*b.hh {
		a, b = b, a
	}
	in := 0
	for i := 0; i < 8; i++ {
		for j := 0; j < 8; j++ {
			lx := ((float64(i)+0.5)/8*2 - 1) * a.hw
			ly := ((float64(j)+0.5)/8*2 - 1) * a.hh
			if b.contains(a.cx+lx*a.ux-ly*a.uy, a.cy+lx*a.uy+ly*a.ux) {
				in++
			}
		}
	}
	return float64(in) / 64
}

func (r *Recipe) placeLayer(rng *rand.Rand, li int, objs []ObjectPlan, start, end int) error {
	lay := &r.Layers[li].Layout
	// Top-level objects of the layer, in order; parts follow their parent.
	var tops []int
	for i := start; i < end; i++ {
		if objs[i].Parent == 0 {
			tops = append(tops, i)
		}
	}
	var err error
	switch lay.Kind {
	case "scatter":
		err = r.placeScatter(rng, lay, objs, tops)
	case "row":
		err = r.placeRow(rng, lay, objs, tops)
	case "grid":
		err = r.placeGrid(rng, lay, objs, tops)
	}
	if err != nil {
		return err
	}
	for i := start; i < end; i++ {
		if objs[i].Parent == 0 && lay.Kind != "row" {
			objs[i].order = objs[i].CX
		}
	}
	return r.placeParts(rng, objs, start, end)
}

func drawShape(rng *rand.Rand, o *ObjectPlan) {
	o.Size = drawIn(rng, o.Spec.Size, o.sizePiece)
	o.Aspect = uni(rng, *o.Spec.Aspect)
	o.Angle = drawIn(rng, *o.Spec.Angle, o.anglePiece)
	if o.Kind == "circle" {
		o.Aspect = 1
	}
}

func (r *Recipe) placeScatter(rng *rand.Rand, lay *Layout, objs []ObjectPlan, tops []int) error {
	reg := lay.Region
	var placed []box
	for n, i := range tops {
		o := &objs[i]
		ok := false
		for try := 0; try < MaxTries && !ok; try++ {
			drawShape(rng, o)
			bx := o.box()
			ex, ey := bx.extent()
			if reg[2]-reg[0] < 2*ex || reg[3]-reg[1] < 2*ey {
				continue
			}
			bx.cx = reg[0] + ex + rng.Float64()*(reg[2]-reg[0]-2*ex)
			bx.cy = reg[1] + ey + rng.Float64()*(reg[3]-reg[1]-2*ey)
			ok = true
			for _, q := range placed {
				if lay.MaxOverlap == 0 {
					if !separated(bx, q, lay.MinGap) {
						ok = false
						break
					}
				} else if !separated(bx, q, 0) && overlapFraction(bx, q) > lay.MaxOverlap {
					ok = false
					break
				}
			}
			if ok {
				o.CX, o.CY = bx.cx, bx.cy
				placed = append(placed, bx)
			}
		}
		if !ok {
			return fmt.Errorf("scatter: could not place object %d of %d (class %q) with max_overlap %s and min_gap %s inside region %v in %d tries", n+1, len(tops), o.Spec.Class, fnum(lay.MaxOverlap), fnum(lay.MinGap), lay.Region, MaxTries)
		}
	}
	return nil
}

func (r *Recipe) placeGrid(rng *rand.Rand, lay *Layout, objs []ObjectPlan, tops []int) error {
	reg := lay.Region
	cells := rng.Perm(lay.Rows * lay.Cols)
	cw := (reg[2] - reg[0]) / float64(lay.Cols)
	ch := (reg[3] - reg[1]) / float64(lay.Rows)
	for n, i := range tops {
		o := &objs[i]
		drawShape(rng, o)
		c := cells[n]
		o.CX = reg[0] + (float64(c%lay.Cols)+0.5)*cw + (rng.Float64()*2-1)*lay.Jitter
		o.CY = reg[1] + (float64(c/lay.Cols)+0.5)*ch + (rng.Float64()*2-1)*lay.Jitter
	}
	return nil
}

// placeRow sets glyphs on a common baseline, left to right: each pen position
// is the previous one plus the previous glyph's advance (from the font's hmtx
// table, scaled by size/unitsPerEm) plus a spacing drawn from layout.spacing.
func (r *Recipe) placeRow(rng *rand.Rand, lay *Layout, objs []ObjectPlan, tops []int) error {
	if len(tops) == 0 {
		return nil
	}
	reg := lay.Region
	u := rng.Float64() // one size draw for the whole row
	pens := make([]float64, len(tops))
	pen := 0.0
	top, bottom := math.Inf(1), math.Inf(-1)
	for n, i := range tops {
		o := &objs[i]
		sp := o.Spec
		o.Size = sp.Size.Min + u*(sp.Size.Max-sp.Size.Min)
		o.Aspect = sp.Aspect.Min + u*(sp.Aspect.Max-sp.Aspect.Min)
		o.Angle = drawIn(rng, *sp.Angle, o.anglePiece)
		g := sp.font.glyphs[o.Glyph]
		s := o.Size / sp.font.UPEM
		if n > 0 {
			pen += uni(rng, *lay.Spacing)
		}
		pens[n] = pen
		pen += g.Advance * s * o.Aspect
		top = math.Min(top, g.Bounds[1]*s)
		bottom = math.Max(bottom, g.Bounds[3]*s)
	}
	first, last := &objs[tops[0]], &objs[tops[len(tops)-1]]
	fg, lg := first.Spec.font.glyphs[first.Glyph], last.Spec.font.glyphs[last.Glyph]
	left := fg.Bounds[0] * first.Size / first.Spec.font.UPEM * first.Aspect
	right := pens[len(pens)-1] + lg.Bounds[2]*last.Size/last.Spec.font.UPEM*last.Aspect
	J := lay.BaselineJitter
	x0, x1 := reg[0]-left, reg[2]-right
	y0, y1 := reg[1]-top+J, reg[3]-bottom-J
	if x1 < x0 || y1 < y0 {
		return fmt.Errorf("row: %d glyphs of size %s need %.1f×%.1f pixels, more than region %v", len(tops), fnum(first.Size), right-left, bottom-top+2*J, lay.Region)
	}
	startX := x0 + rng.Float64()*(x1-x0)
	baseline := y0 + rng.Float64()*(y1-y0)
	for n, i := range tops {
		o := &objs[i]
		g := o.Spec.font.glyphs[o.Glyph]
		s := o.Size / o.Spec.font.UPEM
		by := baseline + (rng.Float64()*2-1)*J
		// The center is the ink-box center; rotation turns about it.
		o.CX = startX + pens[n] + (g.Bounds[0]+g.Bounds[2])/2*s*o.Aspect
		o.CY = by + (g.Bounds[1]+g.Bounds[3])/2*s
		o.order = float64(n)
	}
	return nil
}

// pipSpots are die-face positions in a unit square centered on 0, for 1..6
// pips (the layout printed on standard six-sided dice).
var pipSpots = [7][][2]float64{
	{},
	{{0, 0}},
	{{-1, -1}, {1, 1}},
	{{-1, -1}, {0, 0}, {1, 1}},
	{{-1, -1}, {1, -1}, {-1, 1}, {1, 1}},
	{{-1, -1}, {1, -1}, {0, 0}, {-1, 1}, {1, 1}},
	{{-1, -1}, {1, -1}, {-1, 0}, {1, 0}, {-1, 1}, {1, 1}},
}

const pipOffset = 0.27 // of the parent's width and height

// placeParts places each parent's parts in the parent's own frame, so they
// move and turn with it.
func (r *Recipe) placeParts(rng *rand.Rand, objs []ObjectPlan, start, end int) error {
	for i := start; i < end; {
		if objs[i].Parent != 0 {
			i++
			continue
		}
		par := &objs[i]
		j := i + 1
		for j < end && objs[j].Parent == i+1 {
			j++
		}
		kids := objs[i+1 : j]
		phw, phh := par.localHalf()
		frame := Place(par.CX, par.CY, 1, 1, par.Angle)
		// group kids by spec for the pips arrangement
		for a := 0; a < len(kids); {
			b := a
			for b < len(kids) && kids[b].Spec == kids[a].Spec {
				b++
			}
			group := kids[a:b]
			var placed []box
			for n := range group {
				k := &group[n]
				drawShape(rng, k)
				k.Size *= par.Size
				k.Angle += par.Angle
				khw, khh := k.localHalf()
				var lx, ly float64
				if k.Spec.Arrangement == "pips" {
					spot := pipSpots[len(group)][n]
					lx, ly = spot[0]*pipOffset*2*phw, spot[1]*pipOffset*2*phh
				} else {
					ok := false
					for try := 0; try < MaxTries && !ok; try++ {
						ex, ey := math.Hypot(khw, khh), math.Hypot(khw, khh)
						if phw < ex || phh < ey {
							break
						}
						lx = (rng.Float64()*2 - 1) * (phw - ex)
						ly = (rng.Float64()*2 - 1) * (phh - ey)
						p := frame.Apply(Pt{lx, ly})
						s, c := math.Sincos(k.Angle * math.Pi / 180)
						bx := box{p.X, p.Y, c, s, khw, khh}
						ok = true
						for _, q := range placed {
							if !separated(bx, q, 1) {
								ok = false
								break
							}
						}
						if ok {
							placed = append(placed, bx)
						}
					}
					if !ok {
						return fmt.Errorf("parts: could not place %d parts of class %q inside a %q of size %.1f", len(group), k.Spec.Class, par.Spec.Class, par.Size)
					}
				}
				p := frame.Apply(Pt{lx, ly})
				k.CX, k.CY = p.X, p.Y
				k.order = par.order
			}
			a = b
		}
		i = j
	}
	return nil
}

// readingOrder returns the indices of objs sorted by layer, then reading
// order (pen order in rows, left to right elsewhere), then instance id.
func readingOrder(objs []ObjectPlan, idx []int) {
	sort.SliceStable(idx, func(a, b int) bool {
		oa, ob := &objs[idx[a]], &objs[idx[b]]
		if oa.Layer != ob.Layer {
			return oa.Layer < ob.Layer
		}
		return oa.order < ob.order
	})
}
