package readback

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/trueset/trueset/manifest"
)

// geometryFindings names the relations found, the samples whose image
// belongs to another record, those with no relation, and those whose image
// and mask moved differently.
func geometryFindings(rep *Report, work []*sampleWork, lay Layout) {
	var shows, unknown []int
	imgDesc := map[string][]int{}
	var order []string
	for i, w := range work {
		switch {
		case w.shows != nil:
			shows = append(shows, i)
		case w.img.score < GoodImage:
			unknown = append(unknown, i)
		}
		if w.img.score >= GoodImage {
			d := w.img.t.Summary()
			if imgDesc[d] == nil {
				order = append(order, d)
			}
			imgDesc[d] = append(imgDesc[d], i)
		}
	}
	if len(shows) > 0 {
		offs := map[int]int{}
		var pairs []string
		for _, i := range shows {
			w := work[i]
			offs[w.shows.Index-w.rec.Index]++
			if len(pairs) < 5 {
				pairs = append(pairs, fmt.Sprintf("%s shows %s", w.rec.ID, w.shows.ID))
			}
		}
		msg := fmt.Sprintf("%s of %d hold the image of another record than their id says (%s)", plural(len(shows), "sample"), len(work), strings.Join(pairs, ", "))
		if len(offs) == 1 {
			for k := range offs {
				msg += fmt.Sprintf("; every one is the record %+d in index order: the ids are off by %+d", k, k)
			}
		}
		msg += ". Take each id from the same dataset item as its image (not from a separate counter or list)."
		ev := map[string]any{"offsets": offs}
		rep.add(Finding{Kind: KindIDsMismatch, Severity: Error, Samples: ids(work, shows), Evidence: ev, Message: msg})
	}
	if len(order) > 0 {
		var parts []string
		counts := map[string]int{}
		for _, d := range order {
			parts = append(parts, fmt.Sprintf("%s: %d", d, len(imgDesc[d])))
			counts[d] = len(imgDesc[d])
		}
		msg := "images are their sources " + order[0]
		if len(order) > 1 {
			msg = fmt.Sprintf("images relate to their sources in %d ways, sample by sample (a random augmentation, or a bug): %s", len(order), strings.Join(parts, "; "))
		} else if order[0] == DihedralNames[0] {
			msg = "images are their sources without any geometric change"
		}
		rep.add(Finding{Kind: KindGeometry, Severity: Info, Samples: []string{}, Evidence: map[string]any{"image": counts}, Message: msg})
	}
	if len(unknown) > 0 {
		ev := map[string]any{"best_correlation": scoresOf(work, unknown)}
		msg := fmt.Sprintf("%s: no flip, quarter turn, shift of up to %d px, crop or resize of the source explains the image (best correlation below %v); arbitrary rotations, resized crops and strong photometric changes are not recovered", plural(len(unknown), "sample"), MaxShift, GoodImage)
		rep.add(Finding{Kind: KindGeometryUnknown, Severity: Warning, Samples: ids(work, unknown), Evidence: ev, Message: msg})
		// Without a relation, the mask can still be checked against the
		// image's own edges.
		if work[0].M != nil {
			var off []int
			shifts := map[string]any{}
			for _, i := range unknown {
				w := work[i]
				dx, dy, gain := edgeOffset(w.L, w.M, lay.Width, lay.Height)
				if (dx != 0 || dy != 0) && gain > 1.15 {
					off = append(off, i)
					shifts[w.rec.ID] = []int{dx, dy}
				}
			}
			if len(off) > 0 {
				rep.add(Finding{Kind: KindMaskOffEdges, Severity: Error, Samples: ids(work, off), Evidence: map[string]any{"mask_shift_xy": shifts},
					Message: fmt.Sprintf("%s: the mask's class boundaries sit beside the image's edges, not on them (the mask matches the image better moved by the shift given): image and mask were not transformed together", plural(len(off), "sample"))})
			}
		}
	}
	if work[0].M == nil {
		return
	}
	// Image and mask must have moved together.
	var mism []int
	patterns := map[string]int{}
	var porder []string
	for i, w := range work {
		if w.img.score < GoodImage {
			continue
		}
		var p string
		switch {
		case w.msk.score < 0.5:
			p = "image " + w.img.t.Describe() + ", mask not related to its source's mask"
		case w.img.t.Same(w.msk.t):
			continue
		default:
			buf := make([]float32, len(w.src.ch)*lay.Width*lay.Height)
			if imageScore(w.msk.t, w.src, w.L, nil, buf) >= w.img.score-0.002 {
				continue // the image fits the mask's relation as well: symmetric content
			}
			src := make([]float32, len(w.src.mask))
			for j, v := range w.src.mask {
				src[j] = float32(v)
			}
			if s, _ := maskScoreF(w.img.t, src, w.M, nil, buf); s >= w.msk.score-0.001 {
				continue
			}
			p = relation(w.img.t, w.msk.t)
		}
		if patterns[p] == 0 {
			porder = append(porder, p)
		}
		patterns[p]++
		mism = append(mism, i)
	}
	if len(mism) > 0 {
		msg := fmt.Sprintf("%s of %d: image and mask did not move together — %s", plural(len(mism), "sample"), len(work), porder[0])
		if len(porder) > 1 {
			var parts []string
			for _, p := range porder {
				parts = append(parts, fmt.Sprintf("%s (%d)", p, patterns[p]))
			}
			msg = fmt.Sprintf("%s of %d: image and mask did not move together — %s", plural(len(mism), "sample"), len(work), strings.Join(parts, "; "))
		}
		msg += ". Apply every geometric transform to image and mask with the same drawn parameters (nearest-neighbor for the mask)."
		rep.add(Finding{Kind: KindGeometryMismatch, Severity: Error, Samples: ids(work, mism), Evidence: map[string]any{"patterns": patterns}, Message: msg})
	}
}

// relation says how a sample's mask relates to its image.
func relation(img, msk Transform) string {
	if img.D == msk.D && !img.Resize && !msk.Resize {
		dx, dy := img.OX-msk.OX, img.OY-msk.OY
		return "mask " + shiftWords(dx, dy) + " of its image"
	}
	return "image " + img.Describe() + ", mask " + msk.Describe()
}

func scoresOf(work []*sampleWork, pos []int) map[string]float64 {
	out := map[string]float64{}
	for _, i := range pos {
		out[work[i].rec.ID] = round4(work[i].img.score)
	}
	return out
}

// edgeOffset moves the mask's class boundaries by up to 2 px each way and
// finds where they sit on the strongest image edges (the sum over channels
// of absolute forward differences, each channel scaled by its spread). It
// returns the best move and how much stronger the edges are there than
// under the mask as it is.
func edgeOffset(L [][]float32, M []float32, w, h int) (int, int, float64) {
	g := make([]float64, w*h)
	for _, p := range L {
		var st corrStat
		for _, v := range p {
			st.add(float64(v), 0)
		}
		sd := math.Sqrt(math.Max(st.sxx/st.n-(st.sx/st.n)*(st.sx/st.n), 1e-12))
		for y := 0; y < h-1; y++ {
			for x := 0; x < w-1; x++ {
				i := y*w + x
				g[i] += (math.Abs(float64(p[i+1]-p[i])) + math.Abs(float64(p[i+w]-p[i]))) / sd
			}
		}
	}
	var bnd []int
	for y := 0; y < h-1; y++ {
		for x := 0; x < w-1; x++ {
			i := y*w + x
			if M[i] != M[i+1] || M[i] != M[i+w] {
				bnd = append(bnd, i)
			}
		}
	}
	if len(bnd) == 0 {
		return 0, 0, 1
	}
	score := func(dx, dy int) float64 {
		s, n := 0.0, 0
		for _, i := range bnd {
			x, y := i%w+dx, i/w+dy
			if x < 0 || y < 0 || x >= w-1 || y >= h-1 {
				continue
			}
			s += g[y*w+x]
			n++
		}
		if n == 0 {
			return 0
		}
		return s / float64(n)
	}
	base := score(0, 0)
	bx, by, bs := 0, 0, base
	for dy := -2; dy <= 2; dy++ {
		for dx := -2; dx <= 2; dx++ {
			if s := score(dx, dy); s > bs*1.0001 {
				bx, by, bs = dx, dy, s
			}
		}
	}
	if base <= 0 {
		return bx, by, math.Inf(1)
	}
	return bx, by, bs / base
}

// ---------------------------------------------------------------------------
// Masks.

func maskFindings(rep *Report, work []*sampleWork, lay Layout, m *Array, classes []manifest.Class) {
	isClass := map[int]bool{}
	for _, c := range classes {
		isClass[c.ID] = true
	}
	className := func(id int) string {
		for _, c := range classes {
			if c.ID == id {
				return c.Name
			}
		}
		return "?"
	}
	hw := lay.Width * lay.Height
	fractional := 0
	var interp, shifted, outside, ignored []int
	shifts := map[string]int{}
	outVals := map[string]int{}
	ignoredAs := map[string]int{}
	ignoreKept := map[string]int{}
	for i, w := range work {
		frac := false
		for _, v := range w.M {
			if math.Abs(float64(v)-math.Round(float64(v))) > 0.01 {
				frac = true
				break
			}
		}
		if frac {
			fractional++
		}
		t := w.msk.t
		if w.msk.score < 0.5 {
			if frac {
				interp = append(interp, i)
			}
			continue
		}
		// Interpolation: fractional ids, or a resized mask that a
		// bilinear resample of the source explains better than nearest.
		if frac {
			interp = append(interp, i)
		} else if t.Resize && w.msk.score < 0.9999 {
			src := make([]float32, len(w.src.mask))
			for j, v := range w.src.mask {
				src[j] = float32(v)
			}
			bil := t
			bil.Interp = "bilinear"
			plane := make([]float32, hw)
			bil.apply(src, plane)
			agree := 0
			for j, v := range plane {
				if float32(math.Round(float64(v))) == w.M[j] || float32(math.Trunc(float64(v))) == w.M[j] {
					agree++
				}
			}
			if float64(agree)/float64(hw) > w.msk.score+0.002 {
				interp = append(interp, i)
			}
		}
		if len(interp) > 0 && interp[len(interp)-1] == i {
			continue // blended ids say nothing more
		}
		if w.msk.k != 0 {
			shifted = append(shifted, i)
			shifts[fmt.Sprint(w.msk.k)]++
			continue
		}
		// Values at the source's class pixels and at its ignore pixels.
		src := make([]float32, len(w.src.mask))
		for j, v := range w.src.mask {
			src[j] = float32(v)
		}
		plane := make([]float32, hw)
		t.apply(src, plane)
		badHere, ignHere := false, false
		for j, sv := range plane {
			if sv != sv {
				continue
			}
			v := w.M[j]
			iv := int(math.Round(float64(v)))
			if sv == manifest.IgnoreID {
				if isClass[iv] {
					ignoredAs[fmt.Sprintf("%d %s", iv, className(iv))]++
					ignHere = true
				} else {
					ignoreKept[fmt.Sprint(iv)]++
				}
				continue
			}
			if !isClass[iv] && iv != manifest.IgnoreID {
				outVals[fmt.Sprint(iv)]++
				badHere = true
			}
		}
		if badHere {
			outside = append(outside, i)
		}
		if ignHere {
			ignored = append(ignored, i)
		}
	}
	if m.Float() {
		if fractional == 0 {
			rep.add(Finding{Kind: KindMaskFloat, Severity: Warning, Evidence: map[string]any{"dtype": dtypeWords(m.DType)},
				Message: fmt.Sprintf("masks are %s; every value is a whole class id, but a float mask is one interpolation away from blended ids: keep masks as integers (uint8 or int64) through the pipeline", dtypeWords(m.DType))})
		}
	}
	if len(interp) > 0 {
		rep.add(Finding{Kind: KindMaskInterpolated, Severity: Error, Samples: ids(work, interp), Evidence: map[string]any{"samples_with_fractional_ids": fractional},
			Message: fmt.Sprintf("%s: the mask was resampled with interpolation (bilinear or similar), so class ids blend at boundaries into fractions or into other classes' ids; resize and warp masks with nearest-neighbor", plural(len(interp), "sample"))})
	}
	if len(shifted) > 0 {
		rep.add(Finding{Kind: KindMaskIDsShifted, Severity: Error, Samples: ids(work, shifted), Evidence: map[string]any{"offsets": shifts},
			Message: fmt.Sprintf("%s: mask ids are the source's class ids plus a constant (%s), so every pixel names the wrong class; the class table is 0 = background, 1.. = classes (no −1 or +1 remapping)", plural(len(shifted), "sample"), keysOf(shifts))})
	}
	if len(outside) > 0 {
		rep.add(Finding{Kind: KindMaskValues, Severity: Error, Samples: ids(work, outside), Evidence: map[string]any{"values": outVals},
			Message: fmt.Sprintf("%s: mask values outside the class table (%s) where the source has a class", plural(len(outside), "sample"), keysOf(outVals))})
	}
	if len(ignored) > 0 {
		rep.add(Finding{Kind: KindIgnoreMapped, Severity: Error, Samples: ids(work, ignored), Evidence: map[string]any{"ignore_pixels_as_class": ignoredAs, "ignore_pixels_kept": ignoreKept},
			Message: fmt.Sprintf("%s: pixels the dataset marks ignore (255) carry a class id in the loader's mask (%s), so the loss trains on them; keep them at an ignore value and pass it as the loss's ignore_index", plural(len(ignored), "sample"), keysOf(ignoredAs))})
	}
}

func keysOf[V any](m map[string]V) string {
	k := make([]string, 0, len(m))
	for s := range m {
		k = append(k, s)
	}
	sort.Slice(k, func(i, j int) bool { return manifest.NaturalLess(k[i], k[j]) })
	return strings.Join(k, ", ")
}

// ---------------------------------------------------------------------------
// Targets.

func targetFindings(rep *Report, work []*sampleWork, arrays map[string]*Array, defs map[string]manifest.TargetDef, d *manifest.Dataset, dir string) {
	classID := map[string]int{}
	for _, c := range d.Classes {
		classID[c.Name] = c.ID
	}
	names := make([]string, 0, len(arrays))
	for nm := range arrays {
		names = append(names, nm)
	}
	sort.Strings(names)
	for _, nm := range names {
		a := arrays[nm]
		def := defs[nm]
		n := len(work)
		given := make([]string, n)
		truth := make([]string, n)
		skip := make([]bool, n)
		var countBad []int
		countEv := map[string]any{}
		for i, w := range work {
			v, ok := w.rec.Targets[nm]
			if !ok {
				skip[i] = true
				continue
			}
			truth[i] = v.String()
			if a.Str != nil {
				given[i] = a.Str[i]
			} else {
				given[i] = manifest.FormatNumber(manifest.Round(float64(a.Num[i]), 4))
				if !v.IsStr {
					truth[i] = manifest.FormatNumber(manifest.Round(v.Num, 4))
				}
			}
			// Under a crop (or any relation that loses pixels), a count
			// may fall; it must stay within what the loader's frame shows.
			if t, ok := frameOf(w); ok && !t.Identity() && w.src.loadInstances(dir) == nil && w.src.inst != nil {
				full, anyIn := visibleCounts(w, t, def, classID)
				if full < 0 {
					continue
				}
				if a.Str == nil && def.Kind == "count" {
					g := float64(a.Num[i])
					if g < float64(full)-1e-6 || g > float64(anyIn)+1e-6 {
						countBad = append(countBad, i)
						countEv[w.rec.ID] = map[string]any{"given": g, "record": v.Num, "fully_in_frame": full, "partly_in_frame": anyIn}
					}
					skip[i] = true
				} else if full != anyIn || full != totalCount(w, def, classID) {
					skip[i] = true // the frame cut objects: a non-count target may change
				}
			}
		}
		if len(countBad) > 0 {
			rep.add(Finding{Kind: KindCountsVsMask, Severity: Error, Samples: ids(work, countBad), Evidence: map[string]any{"target": nm, "per_sample": countEv},
				Message: fmt.Sprintf("target %s: %s whose count cannot be what the loader's own image shows (objects fully or partly in the crop bound it); the crop dropped objects and kept the count: recount after cropping", nm, plural(len(countBad), "sample"))})
		}
		var bad []int
		for i := range work {
			if !skip[i] && given[i] != truth[i] {
				bad = append(bad, i)
			}
		}
		if len(bad) == 0 {
			continue
		}
		// Whose targets are they?
		kind, how := KindTargetsDisagree, ""
		for _, s := range []int{1, -1, 2, -2, 3, -3} {
			ok, cnt := true, 0
			for i := range work {
				j := i + s
				if j < 0 || j >= n || skip[i] || skip[j] {
					continue
				}
				cnt++
				if given[i] != truth[j] {
					ok = false
					break
				}
			}
			if ok && cnt >= max(2, n/2) {
				kind, how = KindTargetsMisaligned, fmt.Sprintf("each sample holds the target of the sample %+d positions away in the batch", s)
				break
			}
		}
		if kind == KindTargetsDisagree && len(bad) >= 2 {
			g := map[string]int{}
			for i := range work {
				if !skip[i] {
					g[given[i]]++
					g[truth[i]]--
				}
			}
			same := true
			for _, c := range g {
				if c != 0 {
					same = false
				}
			}
			if same {
				kind, how = KindTargetsShuffled, "the values are the batch's own targets in another order: targets were shuffled apart from their images"
			}
		}
		ev := map[string]any{"target": nm}
		pairs := map[string]any{}
		for _, i := range bad {
			pairs[work[i].rec.ID] = map[string]string{"given": given[i], "record": truth[i]}
		}
		ev["per_sample"] = pairs
		msg := fmt.Sprintf("target %s: %s of %d disagree with the records", nm, plural(len(bad), "sample"), n)
		if how != "" {
			msg += "; " + how
		}
		msg += ". Carry each target with its image through sampling and collation."
		rep.add(Finding{Kind: kind, Severity: Error, Samples: ids(work, bad), Evidence: ev, Message: msg})
	}
}

// frameOf is the relation that places the loader's frame on the source:
// the mask's when found, else the image's.
func frameOf(w *sampleWork) (Transform, bool) {
	if w.M != nil && w.msk.score >= GoodMask {
		return w.msk.t, true
	}
	if w.img.score >= GoodImage {
		return w.img.t, true
	}
	return Transform{}, false
}

func selects(def manifest.TargetDef, classID map[string]int, class int) bool {
	if len(def.Classes) == 0 {
		return true
	}
	for _, c := range def.Classes {
		if classID[c] == class {
			return true
		}
	}
	return false
}

func totalCount(w *sampleWork, def manifest.TargetDef, classID map[string]int) int {
	n := 0
	for _, ob := range w.rec.Objects {
		if ob.Area > 0 && selects(def, classID, ob.Class) {
			n++
		}
	}
	return n
}

// visibleCounts counts the target's objects whose instance pixels lie
// wholly, and at least partly, in the loader's frame under t.
func visibleCounts(w *sampleWork, t Transform, def manifest.TargetDef, classID map[string]int) (int, int) {
	src := make([]float32, len(w.src.inst))
	for i, v := range w.src.inst {
		src[i] = float32(v)
	}
	t.Interp = "nearest-center"
	plane := make([]float32, t.W*t.H)
	t.apply(src, plane)
	seen := map[int]int{}
	for _, v := range plane {
		if v == v && v > 0 {
			seen[int(v)]++
		}
	}
	area := map[int]int{}
	for _, v := range w.src.inst {
		if v > 0 {
			area[int(v)]++
		}
	}
	full, partly := 0, 0
	for _, ob := range w.rec.Objects {
		if ob.Area == 0 || !selects(def, classID, ob.Class) {
			continue
		}
		k := seen[ob.Instance]
		if k > 0 {
			partly++
		}
		if t.Resize {
			if k > 0 {
				full++
			}
		} else if k >= area[ob.Instance] {
			full++
		}
	}
	return full, partly
}

// ---------------------------------------------------------------------------
// The batch as a whole.

func batchFindings(rep *Report, work []*sampleWork, o Options, d *manifest.Dataset, recs []*manifest.Record) {
	n := len(work)
	seen := map[string][]int{}
	for i, w := range work {
		seen[w.rec.ID] = append(seen[w.rec.ID], i)
	}
	var rep2 []int
	times := map[string]int{}
	for id, ps := range seen {
		if len(ps) > 1 {
			rep2 = append(rep2, ps...)
			times[id] = len(ps)
		}
	}
	if len(rep2) > 0 {
		rep.add(Finding{Kind: KindBatchRepeats, Severity: Warning, Samples: ids(work, rep2), Evidence: map[string]any{"times": times},
			Message: fmt.Sprintf("%s of %d distinct in a batch of %d: %s appear more than once; a sampler drawing with replacement, or a dataset index that repeats, feeds the model the same samples", plural(len(seen), "record"), len(recs), n, plural(len(times), "record"))})
	}
	splits := map[string]int{}
	for _, w := range work {
		splits[w.rec.Split]++
	}
	split := o.Split
	if split != "" {
		var wrong []int
		for i, w := range work {
			if w.rec.Split != split {
				wrong = append(wrong, i)
			}
		}
		if len(wrong) > 0 {
			rep.add(Finding{Kind: KindWrongSplit, Severity: Error, Samples: ids(work, wrong), Evidence: map[string]any{"claimed": split, "splits": splits},
				Message: fmt.Sprintf("%s of %d come from other splits than %s (%s): the loader does not filter by the record's split", plural(len(wrong), "sample"), n, split, splitWords(splits))})
		}
	} else {
		// The split most of the batch is from.
		best := 0
		for s, c := range splits {
			if c > best || (c == best && s < split) {
				split, best = s, c
			}
		}
	}
	// Strata and classes against the split's.
	var pool []*manifest.Record
	for _, r := range recs {
		if r.Split == split {
			pool = append(pool, r)
		}
	}
	if len(pool) == 0 {
		return
	}
	strata := func(rs []*manifest.Record) map[string]int {
		m := map[string]int{}
		for _, r := range rs {
			m[r.Stratum]++
		}
		return m
	}
	classes := func(rs []*manifest.Record) map[string]int {
		m := map[string]int{}
		for _, r := range rs {
			has := map[string]bool{}
			for _, ob := range r.Objects {
				if ob.Area > 0 {
					has[ob.ClassName] = true
				}
			}
			for c := range has {
				m[c]++
			}
		}
		return m
	}
	batch := make([]*manifest.Record, n)
	for i, w := range work {
		batch[i] = w.rec
	}
	sev := Info
	var odd []string
	table := map[string]any{}
	for _, kind := range []struct {
		name string
		f    func([]*manifest.Record) map[string]int
	}{{"stratum", strata}, {"class", classes}} {
		b, p := kind.f(batch), kind.f(pool)
		rows := map[string]any{}
		keys := map[string]bool{}
		for k := range b {
			keys[k] = true
		}
		for k := range p {
			keys[k] = true
		}
		for k := range keys {
			share := float64(p[k]) / float64(len(pool))
			exp := share * float64(n)
			sd := math.Sqrt(float64(n) * share * (1 - share))
			rows[k] = map[string]any{"batch": b[k], "expected": round4(exp), "split_share": round4(share)}
			// More than 3 binomial standard deviations (and one sample)
			// from what a uniform draw of the split gives (common practice).
			if n >= 16 && math.Abs(float64(b[k])-exp) > 3*sd+1 {
				sev = Warning
				odd = append(odd, fmt.Sprintf("%s %s: %d in the batch, about %s expected", kind.name, k, b[k], trimFloat(math.Round(exp*10)/10)))
			}
		}
		table[kind.name] = rows
	}
	sort.Strings(odd)
	msg := fmt.Sprintf("strata and classes of the batch are as a uniform draw from split %s gives", split)
	if len(odd) > 0 {
		msg = fmt.Sprintf("the batch's mix differs from split %s's beyond chance (3 binomial standard deviations): %s; shuffle the whole split, or check the sampler's weights", split, strings.Join(odd, "; "))
	} else if n < 16 {
		msg = fmt.Sprintf("strata and classes of the batch beside split %s's (a batch under 16 samples is too small to judge)", split)
	}
	table["split"] = split
	rep.add(Finding{Kind: KindBatchMix, Severity: sev, Evidence: table, Message: msg})
}

func splitWords(m map[string]int) string {
	var parts []string
	for _, k := range sortedKeys(m) {
		parts = append(parts, fmt.Sprintf("%s %d", k, m[k]))
	}
	return strings.Join(parts, ", ")
}

func sortedKeys[V any](m map[string]V) []string {
	k := make([]string, 0, len(m))
	for s := range m {
		k = append(k, s)
	}
	sort.Strings(k)
	return k
}
