package inspect

import (
	"image"
	"image/color"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

// twoPass is the textbook two-pass mean and population variance: the mean
// first, then the mean squared deviation from it.
func twoPass(xs []float64) (mean, variance float64) {
	for _, x := range xs {
		mean += x
	}
	mean /= float64(len(xs))
	for _, x := range xs {
		variance += (x - mean) * (x - mean)
	}
	return mean, variance / float64(len(xs))
}

// naive is the one-pass "sum of squares" formula (Σx² − (Σx)²/n) / n that
// Welford's method exists to replace.
func naive(xs []float64) (mean, variance float64) {
	var s, s2 float64
	for _, x := range xs {
		s += x
		s2 += x * x
	}
	n := float64(len(xs))
	return s / n, (s2 - s*s/n) / n
}

func welfordOf(xs []float64) Welford {
	var w Welford
	for _, x := range xs {
		w.Add(x)
	}
	return w
}

// Source: Welford (1962); the check is against the two-pass formula on the
// same data (common practice), to 1e-9 relative.
func TestWelfordTwoPass(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for _, c := range []struct {
		name         string
		n            int
		offset, span float64
	}{
		{"pixels", 100000, 0, 255},
		{"offset 1e6", 20000, 1e6, 1},
		{"small n", 2, 3, 10},
	} {
		xs := make([]float64, c.n)
		for i := range xs {
			xs[i] = c.offset + c.span*r.Float64()
		}
		w := welfordOf(xs)
		m, v := twoPass(xs)
		if e := relErr(w.Mean, m); e > 1e-9 {
			t.Errorf("%s: Welford mean %v, two-pass %v (rel %g)", c.name, w.Mean, m, e)
		}
		if e := relErr(w.Var(), v); e > 1e-9 {
			t.Errorf("%s: Welford variance %v, two-pass %v (rel %g)", c.name, w.Var(), v, e)
		}
	}
}

// Source: NIST Statistical Reference Datasets, univariate summary
// statistics, "NumAcc1" (from memory): the values 10000001, 10000003,
// 10000002 with certified mean 10000002 and certified (sample, n − 1)
// standard deviation 1. Only NumAcc1 is used; the longer NumAcc sets are
// not reproduced here.
func TestWelfordNumAcc1(t *testing.T) {
	w := welfordOf([]float64{10000001, 10000003, 10000002})
	if w.Mean != 10000002 {
		t.Errorf("NumAcc1 mean %v, certified 10000002", w.Mean)
	}
	if s := math.Sqrt(w.SampleVar()); s != 1 {
		t.Errorf("NumAcc1 sample std %v, certified 1", s)
	}
	if v := w.Var(); math.Abs(v-2.0/3) > 1e-15 {
		t.Errorf("NumAcc1 population variance %v, want 2/3", v)
	}
}

// NumAcc-style data (a large offset on small deviations, the point of
// NIST's NumAcc sets) at offsets past where doubles hold x² exactly: the
// naive sum-of-squares formula loses the variance to cancellation while
// Welford keeps it. The data are NumAcc1's deviations (−1, +1, 0 around the
// mean) and a 1001-value alternating series (mean + 0, then ±0.1
// alternately), built here on offsets 1e9 and 1e8 — not NIST's certified files.
func TestWelfordNaiveLosesPrecision(t *testing.T) {
	three := []float64{1e9 + 1, 1e9 + 3, 1e9 + 2} // sample std 1, population variance 2/3
	w := welfordOf(three)
	if w.Mean != 1e9+2 || math.Abs(math.Sqrt(w.SampleVar())-1) > 1e-12 {
		t.Errorf("offset 1e9: Welford mean %v sample std %v, want 1e9+2 and 1", w.Mean, math.Sqrt(w.SampleVar()))
	}
	_, nv := naive(three)
	if relErr(nv, 2.0/3) < 0.01 {
		t.Errorf("naive variance %v is within 1%% of 2/3: the offset is too small to show the cancellation", nv)
	}
	t.Logf("offset 1e9, NumAcc1 deviations: population variance Welford %.17g, naive %.17g, exact 2/3", w.Var(), nv)

	long := []float64{1e8 + 0.2}
	for i := 0; i < 500; i++ {
		long = append(long, 1e8+0.1, 1e8+0.3)
	}
	w = welfordOf(long)
	// The values themselves are rounded to doubles (spacing 1.5e-8 at 1e8),
	// so the exact sample std of the stored values is 0.1 to about 1e-7.
	if s := math.Sqrt(w.SampleVar()); math.Abs(s-0.1) > 1e-6 {
		t.Errorf("alternating series on 1e8: Welford sample std %v, want 0.1", s)
	}
	_, nv = naive(long)
	ns := math.Sqrt(math.Max(nv, 0) * float64(len(long)) / float64(len(long)-1))
	if math.Abs(ns-0.1) < 0.01 {
		t.Errorf("naive sample std %v is within 0.01 of 0.1: expected it to be lost", ns)
	}
	t.Logf("offset 1e8, 1001 values: sample std Welford %.12g, naive %.12g, exact 0.1", math.Sqrt(w.SampleVar()), ns)
}

// Source: Chan, Golub & LeVeque (1983), the pairwise update: merging the
// partial results of any partition equals one pass over all the data.
func TestWelfordChanMerge(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	xs := make([]float64, 50000)
	for i := range xs {
		xs[i] = 100 + 50*r.NormFloat64()
	}
	all := welfordOf(xs)
	// Uneven chunks, an empty one included, merged left to right.
	cuts := []int{0, 1, 1, 17, 4096, 4097, 30000, len(xs)}
	var merged Welford
	for i := 0; i+1 < len(cuts); i++ {
		merged.Merge(welfordOf(xs[cuts[i]:cuts[i+1]]))
	}
	// And as a tree: ((a b) (c d)).
	q := len(xs) / 4
	var ab, cd Welford
	ab = welfordOf(xs[:q])
	ab.Merge(welfordOf(xs[q : 2*q]))
	cd = welfordOf(xs[2*q : 3*q])
	cd.Merge(welfordOf(xs[3*q:]))
	ab.Merge(cd)
	for name, m := range map[string]Welford{"chunks": merged, "tree": ab} {
		if m.N != all.N {
			t.Errorf("%s: N %d, single pass %d", name, m.N, all.N)
		}
		if e := relErr(m.Mean, all.Mean); e > 1e-12 {
			t.Errorf("%s: mean %v, single pass %v (rel %g)", name, m.Mean, all.Mean, e)
		}
		if e := relErr(m.Var(), all.Var()); e > 1e-12 {
			t.Errorf("%s: variance %v, single pass %v (rel %g)", name, m.Var(), all.Var(), e)
		}
	}
}

// Source: Eigen & Fergus (ICCV 2015), median-frequency balancing,
// freq(c) = pixels of c / pixels of the images where c appears, weight(c) =
// median(freq) / freq(c). Worked by hand on three 100-pixel images:
//
//	image A: background 80, washer 20
//	image B: background 50, nut 50
//	image C: background 90, washer 10
//
//	pixels:  background 220, washer 30, nut 50 (total 300)
//	present: background in A, B, C → 300; washer in A, C → 200; nut in B → 100
//	freq:    background 220/300 = 0.7333…, washer 30/200 = 0.15, nut 50/100 = 0.5
//	median of {0.15, 0.5, 0.7333…} = 0.5
//	weights: background 0.5/0.7333… = 15/22 = 0.681818…, washer 0.5/0.15 = 10/3, nut 0.5/0.5 = 1
//
// Inverse frequency on the same table (freq over all 300 pixels):
//
//	1/f: background 300/220 = 15/11, washer 10, nut 6; their sum is 191/11
//	normalized to mean 1 (× 3 / (191/11) = 33/191): 45/191, 330/191, 198/191
//
// A class with no pixels (pin) gets weight 0 in both and stays out of the median.
func TestMedianFrequencyHandWorked(t *testing.T) {
	pixels := []int64{220, 30, 50, 0}
	present := []int64{300, 200, 100, 0}
	med := MedianWeights(pixels, present)
	want := []float64{15.0 / 22, 10.0 / 3, 1, 0}
	for c := range want {
		if math.Abs(med[c]-want[c]) > 1e-12 {
			t.Errorf("median-frequency weight of class %d = %v, want %v", c, med[c], want[c])
		}
	}
	inv := InverseWeights(pixels)
	wantInv := []float64{45.0 / 191, 330.0 / 191, 198.0 / 191, 0}
	for c := range wantInv {
		if math.Abs(inv[c]-wantInv[c]) > 1e-12 {
			t.Errorf("inverse-frequency weight of class %d = %v, want %v", c, inv[c], wantInv[c])
		}
	}
	// An even number of present classes: the median is the mean of the middle two.
	// freq = 0.1, 0.2, 0.4, 0.8 → median 0.3 → weights 3, 1.5, 0.75, 0.375.
	med = MedianWeights([]int64{10, 20, 40, 80}, []int64{100, 100, 100, 100})
	for c, w := range []float64{3, 1.5, 0.75, 0.375} {
		if math.Abs(med[c]-w) > 1e-12 {
			t.Errorf("even count: weight %d = %v, want %v", c, med[c], w)
		}
	}
}

// The same hand-worked table end to end through Compute: a dataset written
// here with images A, B, C in train (C has one more row, all ignore id 255,
// which must not count) and a test sample that must not count either.
func TestStatsHandWorkedDataset(t *testing.T) {
	dir := t.TempDir()
	classes := []manifest.Class{{ID: 0, Name: "background"}, {ID: 1, Name: "washer", Color: [3]uint8{230, 25, 75}},
		{ID: 2, Name: "nut", Color: [3]uint8{60, 180, 75}}, {ID: 3, Name: "pin", Color: [3]uint8{0, 130, 200}}}
	pal := manifest.Palette(classes)
	type spec struct {
		id, split string
		h         int
		fill      func(i int) uint8 // class of labeled pixel i (row-major, first 100)
	}
	specs := []spec{
		{"A", "train", 10, func(i int) uint8 { return b2u(i >= 80, 1) }},
		{"B", "train", 10, func(i int) uint8 { return b2u(i >= 50, 2) }},
		{"C", "train", 11, func(i int) uint8 { return b2u(i >= 90, 1) }},
		{"D", "test", 10, func(i int) uint8 { return 3 }},
	}
	var lines []byte
	var trainValues []float64
	for k, s := range specs {
		img := image.NewGray(image.Rect(0, 0, 10, s.h))
		mask := image.NewPaletted(image.Rect(0, 0, 10, s.h), pal)
		for i := range img.Pix {
			img.Pix[i] = uint8((i*37 + k*11) % 256)
			if i < 100 {
				mask.Pix[i] = s.fill(i)
			} else {
				mask.Pix[i] = manifest.IgnoreID
			}
			if s.split == "train" {
				trainValues = append(trainValues, float64(img.Pix[i]))
			}
		}
		inst := image.NewGray16(img.Rect)
		rec := &manifest.Record{ID: s.id, Index: k, Split: s.split, Group: s.id, Stratum: "all", Width: 10, Height: s.h,
			Image: "images/" + s.id + ".png", Mask: "masks/" + s.id + ".png", Instances: "instances/" + s.id + ".png",
			Targets: map[string]manifest.Value{"k": manifest.Number(float64(k)), "tag": manifest.Text("same")}}
		for _, f := range []struct {
			rel string
			m   image.Image
		}{{rec.Image, img}, {rec.Mask, mask}, {rec.Instances, inst}} {
			writePNG(t, filepath.Join(dir, f.rel), f.m)
		}
		b, err := manifest.MarshalRecord(rec)
		if err != nil {
			t.Fatal(err)
		}
		lines = append(append(lines, b...), '\n')
	}
	d := &manifest.Dataset{Format: manifest.Format, Count: 4, Width: 10, Height: 10, Mode: "gray", Classes: classes,
		Targets: []string{"k", "tag"}, Splits: manifest.SplitTable{Names: []string{"train", "test"}, Counts: map[string]int{"train": 3, "test": 1}}}
	db, _ := manifest.MarshalDataset(d)
	if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), db, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.ManifestFile), lines, 0o644); err != nil {
		t.Fatal(err)
	}
	st, err := Compute(dir, Options{Workers: 3})
	if err != nil {
		t.Fatal(err)
	}
	wantPix := []int64{220, 30, 50, 0}
	wantMed := []float64{15.0 / 22, 10.0 / 3, 1, 0}
	wantFreq := []float64{220.0 / 300, 30.0 / 300, 50.0 / 300, 0}
	for c, cs := range st.Classes {
		if cs.Pixels != wantPix[c] || math.Abs(cs.WeightMedian-wantMed[c]) > 1e-12 || math.Abs(cs.Frequency-wantFreq[c]) > 1e-12 {
			t.Errorf("class %d: pixels %d freq %v median weight %v, want %d %v %v", c, cs.Pixels, cs.Frequency, cs.WeightMedian, wantPix[c], wantFreq[c], wantMed[c])
		}
	}
	if st.IgnorePixels != 10 || st.LabeledPixels != 300 {
		t.Errorf("ignore %d labeled %d, want 10 and 300", st.IgnorePixels, st.LabeledPixels)
	}
	m, v := twoPass(trainValues)
	if st.Pixels.Count != int64(len(trainValues)) || relErr(st.Pixels.Mean[0], m) > 1e-9 || relErr(st.Pixels.Std[0], math.Sqrt(v)) > 1e-9 {
		t.Errorf("pixels %+v, two-pass mean %v std %v over %d", st.Pixels, m, math.Sqrt(v), len(trainValues))
	}
	// Targets over train: k = 0, 1, 2 → mean 1, population std √(2/3).
	k := st.Targets[0]
	if !k.Numeric || k.Count != 3 || k.Min != 0 || k.Max != 2 || k.Mean != 1 || math.Abs(k.Std-math.Sqrt(2.0/3)) > 1e-12 {
		t.Errorf("target k %+v", k)
	}
	if tag := st.Targets[1]; tag.Numeric || tag.Distinct != 1 {
		t.Errorf("target tag %+v", tag)
	}
	joined := strings.Join(st.Warnings, "\n")
	for _, w := range []string{"class pin (id 3) has no pixels in the train split", "target tag is constant (same)"} {
		if !strings.Contains(joined, w) {
			t.Errorf("warnings lack %q:\n%s", w, joined)
		}
	}
}

func b2u(b bool, v uint8) uint8 {
	if b {
		return v
	}
	return 0
}

func writePNG(t *testing.T, p string, m image.Image) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		t.Fatal(err)
	}
	f, err := os.Create(p)
	if err != nil {
		t.Fatal(err)
	}
	if err := png.Encode(f, m); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

// blobs is a synthetic scene like the rendered presets (invented test
// data): a low-frequency textured background and a few bright discs with
// soft edges. dHash needs some texture: on a perfectly flat region adjacent
// thumbnail cells tie and noise decides their bits.
func blobs(r *rand.Rand, w, h int) *image.Gray {
	m := image.NewGray(image.Rect(0, 0, w, h))
	type disc struct{ x, y, rad, v float64 }
	var ds []disc
	for i := 0; i < 3+r.IntN(4); i++ {
		ds = append(ds, disc{r.Float64() * float64(w), r.Float64() * float64(h), 4 + 8*r.Float64(), 60 + 190*r.Float64()})
	}
	// Value noise: uniform lattice values every 8 pixels, blended with the
	// smoothstep 3u² − 2u³, tones 30..110.
	const cellPx = 8
	gw := w/cellPx + 2
	lat := make([]float64, gw*(h/cellPx+2))
	for i := range lat {
		lat[i] = r.Float64()
	}
	smooth := func(u float64) float64 { return u * u * (3 - 2*u) }
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			fx, fy := (float64(x)+0.5)/cellPx, (float64(y)+0.5)/cellPx
			ix, iy := int(fx), int(fy)
			u, q := smooth(fx-float64(ix)), smooth(fy-float64(iy))
			l := func(i, j int) float64 { return lat[j*gw+i] }
			top := l(ix, iy)*(1-u) + l(ix+1, iy)*u
			bot := l(ix, iy+1)*(1-u) + l(ix+1, iy+1)*u
			v := 30 + 80*(top*(1-q)+bot*q)
			for _, d := range ds {
				dist := math.Hypot(float64(x)+0.5-d.x, float64(y)+0.5-d.y)
				a := math.Min(1, math.Max(0, d.rad-dist+0.5))
				v = (1-a)*v + a*d.v
			}
			m.SetGray(x, y, color.Gray{uint8(math.Max(0, math.Min(255, math.Round(v))))})
		}
	}
	return m
}

func noisy(r *rand.Rand, m *image.Gray, amp int) *image.Gray {
	out := image.NewGray(m.Rect)
	for i, v := range m.Pix {
		out.Pix[i] = uint8(max(0, min(255, int(v)+r.IntN(2*amp+1)-amp)))
	}
	return out
}

func shifted(m *image.Gray, dx int) *image.Gray {
	out := image.NewGray(m.Rect)
	w, h := m.Rect.Dx(), m.Rect.Dy()
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			out.Pix[y*out.Stride+x] = m.Pix[y*m.Stride+min(w-1, max(0, x-dx))]
		}
	}
	return out
}

// Source: Krawetz's dHash (from memory): 9×8 gray thumbnail, one bit per
// adjacent pair in a row. A copy with noise ±2 stays within 4 bits;
// unrelated images differ in about half the 64 bits (> 10 on average). A
// 1-pixel shift of a 64-pixel image moves every thumbnail cell by 1/7 of a
// cell: the typical (median) copy stays within 4 bits, but cells that
// nearly tie their neighbor flip, and the worst copies here reach about
// 12 bits — still well short of unrelated images. Synthetic blob scenes
// (invented test data).
func TestDHashSynthetic(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	const n = 120
	var hs []uint64
	worstNoise := 0
	var shifts []int
	for i := 0; i < n; i++ {
		m := blobs(r, 64, 64)
		h := DHash(m)
		hs = append(hs, h)
		worstNoise = max(worstNoise, Hamming(h, DHash(noisy(r, m, 2))))
		shifts = append(shifts, Hamming(h, DHash(shifted(m, 1))))
	}
	slices.Sort(shifts)
	worstShift := shifts[n-1]
	if worstNoise > 4 {
		t.Errorf("noise ±2: worst distance %d, want ≤ 4", worstNoise)
	}
	if med := shifts[n/2]; med > 4 {
		t.Errorf("1-pixel shift: median distance %d, want ≤ 4", med)
	}
	sum, cnt, minD := 0, 0, 64
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			d := Hamming(hs[i], hs[j])
			sum += d
			cnt++
			minD = min(minD, d)
		}
	}
	mean := float64(sum) / float64(cnt)
	if mean <= 10 {
		t.Errorf("unrelated images: mean distance %.1f, want > 10", mean)
	}
	if float64(worstShift) >= mean/2 {
		t.Errorf("1-pixel shift: worst distance %d, not well short of the unrelated mean %.1f", worstShift, mean)
	}
	t.Logf("dHash on %d blob scenes: noise ±2 worst %d; 1-px shift median %d, worst %d; unrelated mean %.1f, min %d",
		n, worstNoise, shifts[n/2], worstShift, mean, minD)
}

// Known values: dHash bit = right brighter than left, most significant bit
// first; a left-to-right ramp sets all 64 bits, its mirror none, a flat image
// none (ties are 0).
func TestDHashBits(t *testing.T) {
	ramp := image.NewGray(image.Rect(0, 0, 90, 80))
	flat := image.NewGray(ramp.Rect)
	mirror := image.NewGray(ramp.Rect)
	for y := 0; y < 80; y++ {
		for x := 0; x < 90; x++ {
			ramp.Pix[y*90+x] = uint8(x * 2)
			mirror.Pix[y*90+x] = uint8(178 - x*2)
			flat.Pix[y*90+x] = 100
		}
	}
	if h := DHash(ramp); h != math.MaxUint64 {
		t.Errorf("ramp: %016x, want all ones", h)
	}
	if h := DHash(mirror); h != 0 {
		t.Errorf("mirrored ramp: %016x, want 0", h)
	}
	if h := DHash(flat); h != 0 {
		t.Errorf("flat: %016x, want 0", h)
	}
	rgb := image.NewRGBA(ramp.Rect)
	for y := 0; y < 80; y++ {
		for x := 0; x < 90; x++ {
			rgb.Set(x, y, color.RGBA{uint8(x * 2), uint8(x * 2), uint8(x * 2), 255})
		}
	}
	if DHash(rgb) != DHash(ramp) {
		t.Errorf("an RGB image with equal channels hashes like its gray twin")
	}
}

// The pigeonhole multi-index (t+1 bands; a pair within t bits agrees on one
// band) finds exactly the pairs the all-pairs scan finds. Random hashes with
// planted near pairs (invented test data), once below and once above
// AllPairsLimit.
func TestLeakMultiIndexEqualsAllPairs(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	for _, n := range []int{3000, AllPairsLimit + 5000} {
		h := make([]uint64, n)
		part := make([]int, n)
		for i := range h {
			h[i] = r.Uint64()
			part[i] = r.IntN(3)
		}
		// Plant pairs at distances 0..6 across and within parts.
		for k := 0; k < 60; k++ {
			i, j := r.IntN(n), r.IntN(n)
			if i == j {
				continue
			}
			x := h[i]
			for b := 0; b < k%7; b++ {
				x ^= 1 << (uint(b*9+k) % 64)
			}
			h[j] = x
		}
		for _, th := range []int{0, 4, 6} {
			all, _, m1 := NearPairs(h, part, th, false, 0)
			if n > AllPairsLimit {
				// Above the limit the default is the multi-index; force the scan by
				// comparing pair by pair here.
				all = nil
				for i := range h {
					for j := i + 1; j < n; j++ {
						if d := Hamming(h[i], h[j]); d <= th && part[i] != part[j] {
							all = append(all, Pair{i, j, d})
						}
					}
				}
				m1 = "all pairs (test)"
			}
			mi, found, m2 := NearPairs(h, part, th, true, 0)
			if !slices.Equal(all, mi) || found != len(mi) {
				t.Errorf("n=%d t=%d: %s found %d pairs, %s found %d", n, th, m1, len(all), m2, len(mi))
			}
			if len(all) == 0 {
				t.Errorf("n=%d t=%d: no planted pair found", n, th)
			}
			if _, _, m := NearPairs(h, part, th, false, 0); n > AllPairsLimit && !strings.HasPrefix(m, "pigeonhole") {
				t.Errorf("n=%d: search %q, want the multi-index above %d", n, m, AllPairsLimit)
			}
			// A limit keeps the first pairs in (I, J) order and counts them all.
			for _, multi := range []bool{false, true} {
				if lim, f, _ := NearPairs(h, part, th, multi, 3); f != len(all) || !slices.Equal(lim, all[:min(3, len(all))]) {
					t.Errorf("n=%d t=%d multi=%v limit 3: %v of %d, want %v of %d", n, th, multi, lim, f, all[:min(3, len(all))], len(all))
				}
			}
		}
	}
}

// Figures in text are rounded to 4 decimals, trailing zeros dropped (common
// practice for reading; the JSON keeps the exact value); plurals agree
// with their count.
func TestStatsFigureAndPlural(t *testing.T) {
	for _, c := range []struct {
		f    float64
		want string
	}{{32.62767203840939, "32.6277"}, {0.1 + 0.2, "0.3"}, {12, "12"}, {-0.00001, "0"}, {41.665, "41.665"}, {1e6 + 0.5, "1000000.5"}} {
		if got := Figure(c.f); got != c.want {
			t.Errorf("Figure(%v) = %q, want %q", c.f, got, c.want)
		}
	}
	for _, c := range []struct {
		n    int
		noun string
		want string
	}{{0, "candidate", "0 candidates"}, {1, "candidate", "1 candidate"}, {2, "pair", "2 pairs"}, {1, "train sample", "1 train sample"}} {
		if got := Plural(c.n, c.noun); got != c.want {
			t.Errorf("Plural(%d, %q) = %q, want %q", c.n, c.noun, got, c.want)
		}
	}
	if got := Plural(3, "stratum", "strata"); got != "3 strata" {
		t.Errorf("Plural(3, stratum, strata) = %q", got)
	}
	for _, c := range []struct {
		ts   TargetStats
		want string
	}{{TargetStats{Count: 3, Numeric: true}, "numeric"}, {TargetStats{Count: 3}, "text"}, {TargetStats{}, "none"}} {
		if got := c.ts.Type(); got != c.want {
			t.Errorf("%+v.Type() = %q, want %q", c.ts, got, c.want)
		}
	}
}

// A gray dataset whose one train image is a flat color: its luma (ITU-R
// BT.601 through color.Gray16Model, /257) is not a whole number, and the
// constant-channel and constant-target warnings print it rounded, not as
// float noise; "1 train sample" is singular.
func TestStatsWarningsRoundFigures(t *testing.T) {
	dir := t.TempDir()
	classes := []manifest.Class{{ID: 0, Name: "background"}}
	img := image.NewRGBA(image.Rect(0, 0, 4, 4))
	for i := 0; i < len(img.Pix); i += 4 {
		img.Pix[i], img.Pix[i+1], img.Pix[i+2], img.Pix[i+3] = 10, 200, 31, 255
	}
	mask := image.NewPaletted(img.Rect, manifest.Palette(classes))
	writePNG(t, filepath.Join(dir, "images/a.png"), img)
	writePNG(t, filepath.Join(dir, "masks/a.png"), mask)
	writePNG(t, filepath.Join(dir, "instances/a.png"), image.NewGray16(img.Rect))
	rec := &manifest.Record{ID: "a", Split: "train", Group: "a", Stratum: "all", Width: 4, Height: 4,
		Image: "images/a.png", Mask: "masks/a.png", Instances: "instances/a.png",
		Targets: map[string]manifest.Value{"size": manifest.Number(32.62767203840939)}}
	line, err := manifest.MarshalRecord(rec)
	if err != nil {
		t.Fatal(err)
	}
	d := &manifest.Dataset{Format: manifest.Format, Count: 1, Width: 4, Height: 4, Mode: "gray", Classes: classes,
		Targets: []string{"size", "absent"}, Splits: manifest.SplitTable{Names: []string{"train"}, Counts: map[string]int{"train": 1}}}
	db, _ := manifest.MarshalDataset(d)
	if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), db, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.ManifestFile), append(line, '\n'), 0o644); err != nil {
		t.Fatal(err)
	}
	st, err := Compute(dir, Options{Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	joined := strings.Join(st.Warnings, "\n")
	luma := float64(color.Gray16Model.Convert(color.RGBA{10, 200, 31, 255}).(color.Gray16).Y) / 257
	if luma == math.Trunc(luma) {
		t.Fatalf("luma %v is whole: the test needs a fraction", luma)
	}
	for _, want := range []string{"channel gray is constant (" + Figure(luma) + ")", "target size is constant (32.6277)",
		"target absent is missing in 1 of 1 train sample\n"} {
		if !strings.Contains(joined+"\n", want) {
			t.Errorf("warnings lack %q:\n%s", want, joined)
		}
	}
	if noise := regexp.MustCompile(`\d\.\d{5,}`).FindString(joined); noise != "" {
		t.Errorf("warnings print %s unrounded:\n%s", noise, joined)
	}
}
