package readback

import (
	"fmt"
	"image"
	"math"
	"sort"
	"strings"

	"github.com/trueset/trueset/manifest"
)

// ImageNet's per-channel mean and standard deviation in 0..1 units (R, G,
// B), the constants torchvision's pretrained models document; common
// practice, values from memory.
var (
	ImageNetMean = [3]float64{0.485, 0.456, 0.406}
	ImageNetStd  = [3]float64{0.229, 0.224, 0.225}
)

// valueMap is the fitted mapping loader = A·source + B per loader channel,
// source channel Src[c].
type valueMap struct {
	ok   bool
	A, B []float64
	Src  []int
}

type mapping struct {
	name   string // words for the message
	kind   string
	sev    string
	a, b   []float64
	consts string
}

// valueFindings fits, per loader channel, the affine map from the source
// channel that explains it best (least squares over every pixel of every
// sample whose geometry was found) and names it.
func valueFindings(rep *Report, work []*sampleWork, lay Layout, dir string, recs []*manifest.Record, o Options, cache *sourceCache) valueMap {
	var good []*sampleWork
	for _, w := range work {
		if w.img.score >= GoodImage {
			good = append(good, w)
		}
	}
	if len(good) == 0 {
		return valueMap{}
	}
	nchan := good[0].src.nchan
	nsrc := len(good[0].src.ch)
	C := lay.Channels
	per := make([][][]corrStat, len(good))
	parallel(len(good), o.Workers, func(i int) {
		w := good[i]
		if w.src.nchan != nchan {
			return
		}
		st := make([][]corrStat, C)
		plane := make([]float32, lay.Width*lay.Height)
		for k := 0; k < nsrc; k++ {
			w.img.t.apply(w.src.ch[k], plane)
			for c := 0; c < C; c++ {
				if st[c] == nil {
					st[c] = make([]corrStat, nsrc)
				}
				L := w.L[c]
				// Every 3rd pixel: a least-squares line through thousands of
				// points per sample needs no more.
				st[c][k] = corrStatOver(plane, L, nil, 3)
			}
		}
		per[i] = st
	})
	total := make([][]corrStat, C)
	for c := range total {
		total[c] = make([]corrStat, nsrc)
	}
	for _, st := range per {
		if st == nil {
			continue
		}
		for c := range st {
			for k := range st[c] {
				total[c][k].merge(st[c][k])
			}
		}
	}
	allowed := []int{0}
	switch {
	case nchan == 3 && C == 3:
		allowed = []int{0, 1, 2}
	case nchan == 3 && C == 1:
		allowed = []int{0, 1, 2, 3}
	}
	vm := valueMap{A: make([]float64, C), B: make([]float64, C), Src: make([]int, C)}
	r2 := make([]float64, C)
	for c := 0; c < C; c++ {
		best := -1.0
		for _, k := range allowed {
			_, _, q := total[c][k].line()
			if q > best+1e-9 {
				best, vm.Src[c] = q, k
			}
		}
		vm.A[c], vm.B[c], r2[c] = total[c][vm.Src[c]].line()
	}
	// Per-sample slopes: a photometric step changes them sample by sample.
	vary := false
	for c := 0; c < C; c++ {
		var as, bs []float64
		for _, st := range per {
			if st == nil {
				continue
			}
			a, b, q := st[c][vm.Src[c]].line()
			if q > 0.9 {
				as, bs = append(as, a), append(bs, b)
			}
		}
		if len(as) == 0 {
			continue
		}
		sort.Float64s(as)
		sort.Float64s(bs)
		lo, hi := as[0], as[len(as)-1]
		span := math.Abs(vm.A[c]) * 255
		if math.Abs(hi-lo)*255 > 0.02*span || math.Abs(bs[len(bs)-1]-bs[0]) > 0.02*span {
			vary = true
			vm.A[c], vm.B[c] = as[len(as)/2], bs[len(bs)/2]
		}
	}
	vm.ok = true
	ev := map[string]any{}
	var chans []map[string]any
	for c := 0; c < C; c++ {
		chans = append(chans, map[string]any{
			"source_channel": channelName(vm.Src[c], nchan), "scale": vm.A[c], "offset": vm.B[c], "r2": round4(r2[c]),
			"implied_mean_0_1": -vm.B[c] / vm.A[c] / 255, "implied_std_0_1": 1 / (vm.A[c] * 255),
		})
	}
	ev["channels"] = chans
	srcNames := make([]string, C)
	for c := range srcNames {
		srcNames[c] = channelName(vm.Src[c], nchan)
	}
	if vary {
		rep.add(Finding{Kind: KindValuesVary, Severity: Info, Evidence: map[string]any{"samples": len(good)},
			Message: "the value mapping changes from sample to sample (a photometric augmentation such as brightness or contrast); it is named below by its per-sample median"})
	}
	// Channels.
	switch {
	case nchan == 1 && C == 3:
		rep.add(Finding{Kind: KindGrayReplicated, Severity: Info, Evidence: map[string]any{"channels": 3},
			Message: "the gray source is copied into 3 channels (fine for a network built for RGB; it costs 3× the input memory)"})
	case nchan == 3 && C == 1:
		msg := "the RGB source is converted to one channel"
		if vm.Src[0] == 3 {
			msg += " (its luma)"
		} else {
			msg += " (only its " + srcNames[0] + " channel)"
		}
		rep.add(Finding{Kind: KindGrayConverted, Severity: Info, Evidence: map[string]any{"source_channel": srcNames[0]}, Message: msg})
	case nchan == 3 && C == 3 && (vm.Src[0] != 0 || vm.Src[1] != 1 || vm.Src[2] != 2):
		msg := fmt.Sprintf("the loader's channels are the source's %s, not R, G, B", strings.Join(srcNames, ", "))
		if vm.Src[0] == 2 && vm.Src[1] == 1 && vm.Src[2] == 0 {
			msg += ": BGR fed as RGB (OpenCV's cv2.imread gives BGR); convert with cv2.cvtColor(img, cv2.COLOR_BGR2RGB) or img[..., ::-1]"
		}
		rep.add(Finding{Kind: KindChannelsSwapped, Severity: Error, Samples: ids(work, positions(work, good)), Evidence: map[string]any{"order": srcNames}, Message: msg})
	}
	// Values.
	if minOf(r2) < 0.99 && !vary {
		rep.add(Finding{Kind: KindValuesUnknown, Severity: Warning, Evidence: ev,
			Message: fmt.Sprintf("no per-channel linear map from the source's values explains the loader's (worst R² %.4f): a nonlinear change (gamma, histogram equalization, JPEG) or noise", minOf(r2))})
		return vm
	}
	var statsM, statsS []float64
	statsFor := func() ([]float64, []float64) {
		if statsM == nil {
			statsM, statsS = splitStats(dir, recs, o.StatsSplit, nchan, o.Workers)
		}
		return statsM, statsS
	}
	name, m := nameMapping(vm, C, nchan, statsFor)
	ev["mapping"] = name
	if m != nil && m.consts != "" {
		ev["constants"] = m.consts
	}
	if statsM != nil {
		ev["dataset_mean_0_255"], ev["dataset_std_0_255"], ev["stats_split"] = statsM, statsS, o.StatsSplit
	}
	if m == nil {
		var means, stds []string
		for c := 0; c < C; c++ {
			means = append(means, trimFloat(-vm.B[c]/vm.A[c]/255))
			stds = append(stds, trimFloat(1/(vm.A[c]*255)))
		}
		rep.add(Finding{Kind: KindValuesOther, Severity: Warning, Evidence: ev,
			Message: fmt.Sprintf("values are normalized with constants that are neither the dataset's statistics nor a common set: mean (%s), std (%s) in 0..1 units; `trueset stats` prints the dataset's own", strings.Join(means, ", "), strings.Join(stds, ", "))})
		return vm
	}
	rep.add(Finding{Kind: m.kind, Severity: m.sev, Evidence: ev, Message: m.name})
	return vm
}

func minOf(xs []float64) float64 {
	m := math.Inf(1)
	for _, x := range xs {
		m = min(m, x)
	}
	return m
}

func positions(work []*sampleWork, sub []*sampleWork) []int {
	var out []int
	for _, w := range sub {
		out = append(out, w.pos)
	}
	return out
}

// nameMapping compares the fitted map with the mappings pipelines use.
func nameMapping(vm valueMap, C, nchan int, stats func() ([]float64, []float64)) (string, *mapping) {
	cons := func(f func(c int) (float64, float64)) ([]float64, []float64) {
		a, b := make([]float64, C), make([]float64, C)
		for c := 0; c < C; c++ {
			a[c], b[c] = f(c)
		}
		return a, b
	}
	// once: x/255 normalized by (m, s) in 0..1 units; twice: that again.
	once := func(m, s []float64) ([]float64, []float64) {
		return cons(func(c int) (float64, float64) { return 1 / (255 * s[c]), -m[c] / s[c] })
	}
	twice := func(m, s []float64) ([]float64, []float64) {
		return cons(func(c int) (float64, float64) {
			a1, b1 := 1/(255*s[c]), -m[c]/s[c]
			return a1 / s[c], (b1 - m[c]) / s[c]
		})
	}
	twice255 := func(m, s []float64) ([]float64, []float64) { // (x − M)/S twice, in 0..255 units
		return cons(func(c int) (float64, float64) {
			M, S := 255*m[c], 255*s[c]
			return 1 / (S * S), -M/(S*S) - M/S
		})
	}
	pick3 := func(v [3]float64) []float64 {
		out := make([]float64, C)
		for c := range out {
			out[c] = v[min(c, 2)]
		}
		return out
	}
	var list []mapping
	addM := func(kind, sev, name, consts string, a, b []float64) {
		list = append(list, mapping{name: name, kind: kind, sev: sev, a: a, b: b, consts: consts})
	}
	a, b := cons(func(int) (float64, float64) { return 1, 0 })
	addM(KindValuesRaw, Warning, "values are the raw 0–255 pixel values, not normalized: divide by 255 and normalize with the dataset's mean and std (`trueset stats`)", "", a, b)
	a, b = cons(func(int) (float64, float64) { return 1.0 / 255, 0 })
	addM(KindValuesScaled, Info, "values are scaled to 0–1 (divided by 255)", "", a, b)
	a, b = cons(func(int) (float64, float64) { return 2.0 / 255, -1 })
	addM(KindValuesScaled, Info, "values are scaled to −1–1 (mean 0.5, std 0.5)", "0.5/0.5", a, b)
	a, b = cons(func(int) (float64, float64) { return 1.0 / (255 * 255), 0 })
	addM(KindValuesTwice, Error, "values are divided by 255 twice (0–0.004): the scaling was applied twice; scale once", "1/255 twice", a, b)
	inet := "ImageNet's mean (0.485, 0.456, 0.406) and std (0.229, 0.224, 0.225)"
	a, b = once(pick3(ImageNetMean), pick3(ImageNetStd))
	addM(KindValuesOther, Warning, "values are normalized with "+inet+", not with this dataset's own statistics (`trueset stats`); fine for an ImageNet-pretrained backbone, otherwise use the dataset's", "imagenet", a, b)
	a, b = twice(pick3(ImageNetMean), pick3(ImageNetStd))
	addM(KindValuesTwice, Error, "values are normalized twice with "+inet+": the normalization ran twice (in the dataset and again in a transform); normalize once", "imagenet twice", a, b)
	a, b = twice(pick3([3]float64{0.5, 0.5, 0.5}), pick3([3]float64{0.5, 0.5, 0.5}))
	addM(KindValuesTwice, Error, "values are normalized twice with mean 0.5, std 0.5: normalize once", "0.5/0.5 twice", a, b)
	for _, m := range list {
		if fits(vm, m.a, m.b) {
			return m.name, &m
		}
	}
	M, S := stats()
	if M == nil {
		return "", nil
	}
	m01, s01 := make([]float64, len(M)), make([]float64, len(S))
	for k := range M {
		m01[k], s01[k] = M[k]/255, S[k]/255
	}
	// The dataset's statistics by the loader channel's position, and by the
	// source channel it holds (the same unless channels are swapped).
	byPos := func(v []float64) []float64 {
		out := make([]float64, C)
		for c := range out {
			out[c] = v[min(c, len(v)-1)]
		}
		return out
	}
	bySrc := func(v []float64) []float64 {
		out := make([]float64, C)
		for c := range out {
			out[c] = v[min(vm.Src[c], len(v)-1)]
		}
		return out
	}
	own := fmt.Sprintf("the dataset's own mean (%s) and std (%s)", floats(m01), floats(s01))
	list = list[:0]
	for _, sel := range []func([]float64) []float64{byPos, bySrc} {
		a, b = once(sel(m01), sel(s01))
		addM(KindValuesNormalized, Info, "values are normalized with "+own+" in 0..1 units", "dataset", a, b)
		a, b = twice(sel(m01), sel(s01))
		addM(KindValuesTwice, Error, "values are normalized twice with "+own+": the normalization ran twice (in the dataset and again in a transform); normalize once", "dataset twice", a, b)
		a, b = twice255(sel(m01), sel(s01))
		addM(KindValuesTwice, Error, "values are normalized twice with "+own+" (in 0..255 units): normalize once", "dataset twice", a, b)
	}
	for _, m := range list {
		if fits(vm, m.a, m.b) {
			return m.name, &m
		}
	}
	return "", nil
}

func floats(v []float64) string {
	parts := make([]string, len(v))
	for i, x := range v {
		parts[i] = trimFloat(x)
	}
	return strings.Join(parts, ", ")
}

// fits reports whether the fitted map gives, at source values 0 and 255,
// the candidate's outputs within 2% of the candidate's output range.
func fits(vm valueMap, a, b []float64) bool {
	for c := range vm.A {
		tol := 0.02 * math.Abs(a[c]) * 255
		if math.Abs(vm.B[c]-b[c]) > tol || math.Abs(vm.A[c]*255+vm.B[c]-(a[c]*255+b[c])) > tol {
			return false
		}
	}
	return true
}

// splitStats is the per-channel mean and population standard deviation, in
// 0..255 units, of the images of one split: Welford's method per image,
// merged in record order with Chan, Golub & LeVeque's pairwise formula —
// the figures `trueset stats` prints.
func splitStats(dir string, recs []*manifest.Record, split string, nchan, workers int) ([]float64, []float64) {
	var rs []*manifest.Record
	for _, r := range recs {
		if r.Split == split {
			rs = append(rs, r)
		}
	}
	type wf struct{ n, mean, m2 float64 }
	part := make([][]wf, len(rs))
	parallel(len(rs), workers, func(i int) {
		img, err := readPNG(dir, rs[i].Image, rs[i].Width, rs[i].Height)
		if err != nil {
			return
		}
		w := make([]wf, nchan)
		b := img.Bounds()
		add := func(c int, x float64) {
			w[c].n++
			d := x - w[c].mean
			w[c].mean += d / w[c].n
			w[c].m2 += d * (x - w[c].mean)
		}
		switch m := img.(type) {
		case *image.Gray:
			for y := 0; y < b.Dy(); y++ {
				for _, v := range m.Pix[y*m.Stride : y*m.Stride+b.Dx()] {
					for c := 0; c < nchan; c++ {
						add(c, float64(v))
					}
				}
			}
		default:
			for y := b.Min.Y; y < b.Max.Y; y++ {
				for x := b.Min.X; x < b.Max.X; x++ {
					r, g, bl, _ := img.At(x, y).RGBA()
					if nchan == 1 {
						add(0, float64(r>>8))
						continue
					}
					add(0, float64(r>>8))
					add(1, float64(g>>8))
					add(2, float64(bl>>8))
				}
			}
		}
		part[i] = w
	})
	tot := make([]wf, nchan)
	for _, p := range part {
		for c := range p {
			o := p[c]
			if o.n == 0 {
				continue
			}
			if tot[c].n == 0 {
				tot[c] = o
				continue
			}
			n := tot[c].n + o.n
			d := o.mean - tot[c].mean
			tot[c].mean += d * o.n / n
			tot[c].m2 += o.m2 + d*d*tot[c].n*o.n/n
			tot[c].n = n
		}
	}
	M, S := make([]float64, nchan), make([]float64, nchan)
	for c := range tot {
		if tot[c].n == 0 {
			return nil, nil
		}
		M[c], S[c] = tot[c].mean, math.Sqrt(tot[c].m2/tot[c].n)
	}
	return M, S
}
