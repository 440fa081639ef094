package manifest

import (
	"fmt"
	"image"
	"math"
	"slices"
)

// The kinds of check of the instruments (manifest/instruments.go).
const (
	KindMislabel = "mislabel" // planted noise that does not follow from the true labels and the recorded corruption
	KindHeldOut  = "held-out" // a sample showing a held-out combination outside hold_out.splits, or a record's held_out/stratum wrong
	KindBait     = "bait"     // a bait record missing or malformed, or an on corner mark not in the image
)

func init() { ProblemKinds = append(ProblemKinds, KindMislabel, KindHeldOut, KindBait) }

// planted checks the instruments of one dataset's records. Verify makes one
// (newPlanted), calls check for every record and deals splits with
// allocate.
type planted struct {
	in    *Instruments
	err   error
	d     *Dataset
	names map[int]string
}

func newPlanted(d *Dataset) *planted {
	in, err := ReadInstruments(d.Recipe)
	if in == nil {
		in = &Instruments{}
	}
	p := &planted{in: in, err: err, d: d, names: map[int]string{}}
	for _, c := range d.Classes {
		p.names[c.ID] = c.Name
	}
	return p
}

// allocateVerified is AllocateStrataIDs, or AllocateHeldOut for a set with
// held-out combinations, as generate dealt it.
// AllocateWritten deals strata as generate dealt dataset d: held-out strata
// only to their hold-out splits when the recipe holds combinations out, the
// rest by the ratios. verify and augment both check records against it.
func AllocateWritten(d *Dataset, ids []int32, names []string, sp Splits) (*Allocation, error) {
	in, err := ReadInstruments(d.Recipe)
	if err != nil || in.HoldOut == nil {
		return AllocateStrataIDs(d.Seed, ids, names, sp)
	}
	return AllocateHeldOut(d.Seed, ids, names, sp, in.HoldOut.Splits)
}

// check checks record r's held-out combination, planted noise and bait.
func (p *planted) check(dir string, r *Record, bad func(check, file, format string, args ...any)) {
	if p.err != nil {
		return // dataset.json's recipe is reported unreadable elsewhere
	}
	p.checkHeldOut(r, bad)
	p.checkMislabel(dir, r, bad)
	p.checkBait(dir, r, bad)
}

func (p *planted) checkHeldOut(r *Record, bad func(check, file, format string, args ...any)) {
	h := p.in.HoldOut
	if h == nil {
		if r.HeldOut != "" {
			bad(KindHeldOut, ManifestFile, "held_out %q, but the recipe holds nothing out", r.HeldOut)
		}
		return
	}
	want := h.Match(r)
	if want != "" && !slices.Contains(h.Splits, r.Split) {
		bad(KindHeldOut, ManifestFile, "is in split %s but shows held-out combination %s, which belongs only in %v", r.Split, want, h.Splits)
	}
	if r.Lineage != nil {
		// An augmented copy keeps its source's split and stratum; only its
		// source's record says what was held out.
		if r.HeldOut != "" {
			bad(KindHeldOut, ManifestFile, "an augmented copy carries held_out %q; only its source's record does", r.HeldOut)
		}
		return
	}
	if r.HeldOut != want {
		bad(KindHeldOut, ManifestFile, "held_out is %q, but its objects show %q", r.HeldOut, want)
	}
	if want != "" && r.Stratum != HeldOutPrefix+want {
		bad(KindHeldOut, ManifestFile, "stratum %q; a sample showing held-out combination %s has stratum %q", r.Stratum, want, HeldOutPrefix+want)
	}
}

func (p *planted) checkBait(dir string, r *Record, bad func(check, file, format string, args ...any)) {
	b := p.in.Bait
	if r.Lineage != nil {
		// Moves and pixel steps move or change the cue: a copy claims none.
		if r.Bait != nil {
			bad(KindBait, ManifestFile, "an augmented copy carries a bait cue; moves and pixel steps change it, so a copy claims none")
		}
		return
	}
	if b == nil {
		if r.Bait != nil {
			bad(KindBait, ManifestFile, "has a bait cue, but the recipe plants no bait")
		}
		return
	}
	if r.Bait == nil {
		bad(KindBait, ManifestFile, "no bait cue; the recipe plants bait on every sample")
		return
	}
	if r.Bait.Cue != 0 && r.Bait.Cue != 1 {
		bad(KindBait, ManifestFile, "bait cue %d; want 0 (off) or 1 (on)", r.Bait.Cue)
		return
	}
	if b.Cue.Kind != "corner-mark" || r.Bait.Cue != 1 {
		return
	}
	img := readPNG(dir, r.Image, r.Width, r.Height)
	if img == nil {
		return // reported by the file checks
	}
	q := b.Cue.CueRect(r.Width, r.Height)
	for y := q.Min.Y; y < q.Max.Y; y++ {
		for x := q.Min.X; x < q.Max.X; x++ {
			if g := gray(img, x, y); g != b.Cue.Tone {
				bad(KindBait, r.Image, "the cue is on, but pixel (%d, %d) of the %s mark is %s, not the mark's tone %s", x, y, b.Cue.Corner, FormatNumber(g), FormatNumber(b.Cue.Tone))
				return
			}
		}
	}
}

// readPNG reads one PNG of a record for the instrument checks, through
// OpenSample and its header check; nil when it cannot (the file checks
// report why).
func readPNG(dir, rel string, w, h int) image.Image {
	f, err := OpenSample(dir, rel)
	if err != nil {
		return nil
	}
	defer f.Close()
	if _, err := f.Header(w, h); err != nil {
		return nil
	}
	m, err := f.Decode()
	if err != nil {
		return nil
	}
	return m
}

func inRange(v float64, r [2]float64) bool { return v >= r[0] && v <= r[1] }

func (p *planted) checkMislabel(dir string, r *Record, bad func(check, file, format string, args ...any)) {
	m := r.Mislabel
	if m == nil {
		return
	}
	if r.Lineage != nil {
		bad(KindMislabel, ManifestFile, "an augmented copy carries planted noise; a copy's labels are measured from its own masks")
		return
	}
	spec := p.in.Mislabel
	if spec == nil {
		bad(KindMislabel, ManifestFile, "planted noise, but the recipe plants none")
		return
	}
	if !slices.Contains(spec.Splits, r.Split) {
		bad(KindMislabel, ManifestFile, "planted noise in split %s; the recipe plants it in %v only", r.Split, spec.Splits)
	}
	var k *MislabelKind
	for i := range spec.Kinds {
		if spec.Kinds[i].Kind == m.Kind {
			k = &spec.Kinds[i]
		}
	}
	if k == nil {
		bad(KindMislabel, ManifestFile, "corruption %q is not one the recipe plants", m.Kind)
		return
	}
	objByID := map[int]*Object{}
	for i := range r.Objects {
		objByID[r.Objects[i].Instance] = &r.Objects[i]
	}
	obj := func(no NoisyObject) *Object {
		o := objByID[no.Instance]
		if o == nil {
			bad(KindMislabel, ManifestFile, "%s: object %d is not in the record", m.Kind, no.Instance)
		}
		return o
	}
	one := func(what string, n int) bool {
		if n != 1 {
			bad(KindMislabel, ManifestFile, "%s changes one %s; the record lists %d", m.Kind, what, n)
			return false
		}
		return true
	}
	trueTarget := func(name string, nv NoisyValue) bool {
		if tv, ok := r.Targets[name]; !ok || tv != nv.True {
			bad(KindMislabel, ManifestFile, "%s: target %s's true value is %v, the record's target is %v", m.Kind, name, nv.True, tv)
			return false
		}
		return true
	}
	switch m.Kind {
	case "swap-class":
		if !one("object", len(m.Objects)) {
			return
		}
		no := m.Objects[0]
		o := obj(no)
		if o == nil {
			return
		}
		if no.TrueClass != o.Class || no.TrueClassName != o.ClassName {
			bad(KindMislabel, ManifestFile, "swap-class: object %d's true class is %d (%s), the record says %d (%s)", no.Instance, no.TrueClass, no.TrueClassName, o.Class, o.ClassName)
		}
		if name, ok := p.names[no.Class]; !ok || no.Class == 0 || name != no.ClassName || no.Class == no.TrueClass {
			bad(KindMislabel, ManifestFile, "swap-class: object %d's noisy class %d (%s) is not another class of the table", no.Instance, no.Class, no.ClassName)
			return
		}
		if len(k.Confusion) > 0 && !slices.ContainsFunc(k.Confusion, func(c Confusion) bool { return c.Class == no.TrueClassName && c.As == no.ClassName }) {
			bad(KindMislabel, ManifestFile, "swap-class: %s → %s is not in the recipe's confusion table", no.TrueClassName, no.ClassName)
		}
		// Every count target under the noisy class: listed when it changes,
		// with the count the noisy classes give.
		noisy := slices.Clone(r.Objects)
		for i := range noisy {
			if noisy[i].Instance == no.Instance {
				noisy[i].Class, noisy[i].ClassName = no.Class, no.ClassName
			}
		}
		for _, t := range p.d.TargetDefs {
			if t.Kind != "count" {
				continue
			}
			want, err := EvalTarget(t, noisy, func([]int) {})
			if err != nil {
				continue
			}
			nv, listed := m.Targets[t.Name]
			switch {
			case listed && trueTarget(t.Name, nv) && nv.Noisy != want:
				bad(KindMislabel, ManifestFile, "swap-class: noisy %s is %v; with object %d as %s it is %v", t.Name, nv.Noisy, no.Instance, no.ClassName, want)
			case !listed && r.Targets[t.Name] != want:
				bad(KindMislabel, ManifestFile, "swap-class: target %s changes to %v with object %d as %s, but the record does not list it", t.Name, want, no.Instance, no.ClassName)
			}
		}
	case "mask-edge":
		if !one("object", len(m.Objects)) {
			return
		}
		no := m.Objects[0]
		o := obj(no)
		if o == nil {
			return
		}
		if !slices.Contains(k.How, no.Edge) {
			bad(KindMislabel, ManifestFile, "mask-edge: edge %q is not one of the recipe's %v", no.Edge, k.How)
			return
		}
		var sh [2]int
		by := no.By
		if no.Edge == "shift" {
			if no.Shift == nil {
				bad(KindMislabel, ManifestFile, "mask-edge: a shift without its shift [dx, dy]")
				return
			}
			sh = *no.Shift
			by = max(abs(sh[0]), abs(sh[1]))
			if (sh[0] != 0 && abs(sh[0]) != by) || (sh[1] != 0 && abs(sh[1]) != by) {
				bad(KindMislabel, ManifestFile, "mask-edge: shift %v is not k pixels along one of 8 directions", sh)
			}
		}
		if !inRange(float64(by), k.By) {
			bad(KindMislabel, ManifestFile, "mask-edge: %s by %d pixels, outside the recipe's by %v", no.Edge, by, k.By)
		}
		if no.TrueBox == nil || no.TrueArea == nil || no.Box == nil || no.Area == nil {
			bad(KindMislabel, ManifestFile, "mask-edge: object %d lacks its true or noisy box and area", no.Instance)
			return
		}
		if *no.TrueBox != o.Box || *no.TrueArea != o.Area {
			bad(KindMislabel, ManifestFile, "mask-edge: object %d's true box %v and area %d differ from the record's %v and %d", no.Instance, *no.TrueBox, *no.TrueArea, o.Box, o.Area)
		}
		in := readPNG(dir, r.Instances, r.Width, r.Height)
		g, ok := in.(*image.Gray16)
		if !ok {
			return // reported by the file checks
		}
		_, area, box := EdgeMask(g, no.Instance, no.Edge, by, sh)
		if area != *no.Area || box != *no.Box {
			bad(KindMislabel, r.Instances, "mask-edge: %s of object %d gives area %d and box %v; the record says %d and %v", no.Edge, no.Instance, area, box, *no.Area, *no.Box)
		}
	case "box-jitter":
		if len(m.Objects) == 0 {
			bad(KindMislabel, ManifestFile, "box-jitter lists no object")
		}
		for _, no := range m.Objects {
			o := obj(no)
			if o == nil {
				continue
			}
			if no.TrueBox == nil || no.Box == nil || *no.TrueBox != o.Box {
				bad(KindMislabel, ManifestFile, "box-jitter: object %d's true box is not the record's %v", no.Instance, o.Box)
				continue
			}
			b := *no.Box
			for j := range b {
				if d := abs(b[j] - o.Box[j]); !inRange(float64(d), k.By) {
					bad(KindMislabel, ManifestFile, "box-jitter: object %d's box edge %d moved %d pixels, outside the recipe's by %v", no.Instance, j, d, k.By)
				}
			}
			if b[0] >= b[2] || b[1] >= b[3] {
				bad(KindMislabel, ManifestFile, "box-jitter: object %d's noisy box %v is empty", no.Instance, b)
			}
		}
	case "target-off", "char-swap":
		if !one("target", len(m.Targets)) {
			return
		}
		for name, nv := range m.Targets {
			if !slices.Contains(k.Targets, name) {
				bad(KindMislabel, ManifestFile, "%s: target %s is not one of the recipe's %v", m.Kind, name, k.Targets)
				continue
			}
			if !trueTarget(name, nv) {
				continue
			}
			if m.Kind == "target-off" {
				d := math.Abs(nv.Noisy.Num - nv.True.Num)
				if nv.Noisy.IsStr || d != math.Trunc(d) || !inRange(d, k.By) || (nv.True.Num >= 0 && nv.Noisy.Num < 0) {
					bad(KindMislabel, ManifestFile, "target-off: %s %v → %v is not off by a whole %v", name, nv.True, nv.Noisy, k.By)
				}
				continue
			}
			a, b := []rune(nv.True.Str), []rune(nv.Noisy.Str)
			diff := 0
			if len(a) == len(b) {
				for i := range a {
					if a[i] != b[i] {
						diff++
						if !slices.Contains([]rune(k.Chars), b[i]) {
							diff = -1
							break
						}
					}
				}
			}
			if !nv.Noisy.IsStr || diff != 1 {
				bad(KindMislabel, ManifestFile, "char-swap: %s %q → %v is not one character replaced by one of %q", name, nv.True.Str, nv.Noisy, k.Chars)
			}
		}
	default:
		bad(KindMislabel, ManifestFile, "unknown corruption %q", m.Kind)
	}
}

func abs(x int) int { return max(x, -x) }

// String of a noisy value in messages.
func (n NoisyValue) String() string { return fmt.Sprintf("%v → %v", n.True, n.Noisy) }
