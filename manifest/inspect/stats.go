package inspect

import (
	"context"
	"errors"
	"fmt"
	"image"
	"image/color"
	"math"
	"math/bits"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync"

	"golang.org/x/image/draw"

	"github.com/trueset/trueset/manifest"
)

// Defaults of Options.
const (
	DefaultSplit     = "train"
	DefaultThreshold = 4
	// ExactOnly as Options.Threshold asks for identical hashes only
	// (distance 0); the zero value means DefaultThreshold.
	ExactOnly = -1
	// AllPairsLimit is the most images compared pair by pair; above it the
	// leakage search uses the pigeonhole multi-index (see NearPairs).
	AllPairsLimit = 20000
	// MaxLeakPairs bounds the pairs listed in Stats.Leakage.Pairs;
	// Leakage.PairsFound counts them all.
	MaxLeakPairs = 1000
	// MaxPixels bounds one image Compute decodes (width × height), as
	// verify does.
	MaxPixels = manifest.MaxVerifyPixels
)

// Options tune Compute.
type Options struct {
	Split     string // the split for normalization, class weights and target scales; "" = DefaultSplit
	Threshold int    // dHash Hamming threshold for leakage; 0 = DefaultThreshold, ExactOnly = 0
	Workers   int    // parallel decoders; 0 = min(NumCPU, 8). The result does not depend on it.
}

func (o Options) normalized() Options {
	if o.Split == "" {
		o.Split = DefaultSplit
	}
	switch {
	case o.Threshold == 0:
		o.Threshold = DefaultThreshold
	case o.Threshold < 0:
		o.Threshold = 0
	}
	if o.Threshold > 64 {
		o.Threshold = 64
	}
	if o.Workers <= 0 {
		o.Workers = min(runtime.NumCPU(), 8)
	}
	return o
}

// ---------------------------------------------------------------------------
// Welford's running mean and variance.

// Welford is a running count, mean and sum of squared deviations (M2) kept
// with Welford's online update (B. P. Welford, "Note on a method for
// calculating corrected sums of squares and products", Technometrics 4(3),
// 1962), which does not lose precision to a large common offset the way the
// textbook Σx² − (Σx)²/n does. Two partial results merge with the pairwise
// formula of Chan, Golub & LeVeque ("Algorithms for computing the sample
// variance: analysis and recommendations", The American Statistician 37(3),
// 1983), so workers can each keep one and the merge equals a single pass up
// to rounding.
type Welford struct {
	N    int64
	Mean float64
	M2   float64
}

// Add folds one value in.
func (w *Welford) Add(x float64) {
	w.N++
	d := x - w.Mean
	w.Mean += d / float64(w.N)
	w.M2 += d * (x - w.Mean)
}

// Merge folds another partial result in (Chan, Golub & LeVeque):
// n = na + nb, δ = mean_b − mean_a, mean = mean_a + δ·nb/n,
// M2 = M2_a + M2_b + δ²·na·nb/n.
func (w *Welford) Merge(o Welford) {
	if o.N == 0 {
		return
	}
	if w.N == 0 {
		*w = o
		return
	}
	n := w.N + o.N
	d := o.Mean - w.Mean
	na, nb, nf := float64(w.N), float64(o.N), float64(n)
	w.Mean += d * nb / nf
	w.M2 += o.M2 + d*d*na*nb/nf
	w.N = n
}

// Var is the population variance M2/N (0 for no values).
func (w Welford) Var() float64 {
	if w.N == 0 {
		return 0
	}
	return w.M2 / float64(w.N)
}

// SampleVar is the unbiased sample variance M2/(N−1) (0 for fewer than two values).
func (w Welford) SampleVar() float64 {
	if w.N < 2 {
		return 0
	}
	return w.M2 / float64(w.N-1)
}

// Std is the population standard deviation √(M2/N): what a z-score
// normalization over the whole split divides by.
func (w Welford) Std() float64 { return math.Sqrt(w.Var()) }

// ---------------------------------------------------------------------------
// Difference hash.

// ConfirmMAD is the largest mean absolute difference of gray values (0..255)
// at full size for which a dHash candidate pair counts as near-identical. A
// 64-bit dHash sees a 9×8 thumbnail, so synthetic scenes with the same rough
// layout (one die in the same place) collide; comparing the pixels themselves
// keeps re-encoded or lightly noised copies (differences of a few levels) and
// drops look-alikes. Common practice; not a standard value.
const ConfirmMAD = 4.0

// MaxConfirmPairs bounds the candidate pairs decoded for confirmation.
const MaxConfirmPairs = 100000

// confirm decodes images i and j and reports their mean absolute gray
// difference and whether it is within ConfirmMAD.
func (a *accumulator) confirm(dir string, i, j int) (float64, bool) {
	if a.sizes[i] != a.sizes[j] {
		return 0, false
	}
	fi, ci, err := openImage(dir, a.paths[i], a.sizes[i][0], a.sizes[i][1])
	if err != nil {
		return 0, false
	}
	fj, cj, err := openImage(dir, a.paths[j], a.sizes[j][0], a.sizes[j][1])
	if err != nil {
		fi.Close()
		return 0, false
	}
	need := manifest.DecodedBytes(ci) + grayCopyBytes(ci) + manifest.DecodedBytes(cj) + grayCopyBytes(cj)
	if err := a.budget.acquire(need); err != nil {
		fi.Close()
		fj.Close()
		return 0, false
	}
	defer a.budget.release(need)
	mi, err := decodeClose(fi)
	if err != nil {
		fj.Close()
		return 0, false
	}
	mj, err := decodeClose(fj)
	if err != nil {
		return 0, false
	}
	gi, gj := toGray(mi), toGray(mj)
	b := gi.Bounds()
	sum := 0.0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			p := color.GrayModel.Convert(gi.At(x, y)).(color.Gray).Y
			q := color.GrayModel.Convert(gj.At(x, y)).(color.Gray).Y
			sum += math.Abs(float64(p) - float64(q))
		}
	}
	mad := sum / float64(b.Dx()*b.Dy())
	return mad, mad <= ConfirmMAD
}

// DHash is a 64-bit difference hash (Neal Krawetz, "Kind of Like That",
// The Hacker Factor Blog, 2013; described from memory): the image is made
// gray (ITU-R BT.601 luma, as color.GrayModel), scaled to 9×8 with
// golang.org/x/image/draw's BiLinear kernel (which widens to an area filter
// when shrinking) into 16-bit gray so flat, noisy regions do not collapse to
// ties, and bit 8·y+x (most significant first) is set when pixel x+1 of row y
// is brighter than pixel x. Near-identical images have hashes a few bits
// apart; unrelated ones differ in about half of them.
func DHash(m image.Image) uint64 {
	g := toGray(m)
	small := image.NewGray16(image.Rect(0, 0, 9, 8))
	draw.BiLinear.Scale(small, small.Bounds(), g, g.Bounds(), draw.Src, nil)
	var h uint64
	for y := 0; y < 8; y++ {
		for x := 0; x < 8; x++ {
			h <<= 1
			if small.Gray16At(x+1, y).Y > small.Gray16At(x, y).Y {
				h |= 1
			}
		}
	}
	return h
}

// Hamming is the number of bits in which a and b differ.
func Hamming(a, b uint64) int { return bits.OnesCount64(a ^ b) }

func toGray(m image.Image) image.Image {
	switch m.(type) {
	case *image.Gray, *image.Gray16:
		return m
	}
	b := m.Bounds()
	g := image.NewGray(b)
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			g.Set(x, y, color.GrayModel.Convert(m.At(x, y)))
		}
	}
	return g
}

// Pair is a pair of positions into the hash list, I < J, and their distance.
type Pair struct {
	I, J     int
	Distance int
}

// maxHeldPairs bounds the pairs the multi-index holds before sorting, so a
// set of many identical images cannot exhaust memory; past it pairs are
// counted only.
const maxHeldPairs = 1 << 20

// NearPairs finds every pair of hashes whose parts differ (part[i] !=
// part[j]; pass nil to compare all) at Hamming distance ≤ t. It returns up
// to limit of them (0 = all) ordered by (I, J), how many there are, and the
// search used. Up to AllPairsLimit hashes every pair is compared; above it
// (or when multi is set) the pigeonhole multi-index is used: the 64 bits
// are cut into t+1 bands, and two hashes within distance t agree exactly on
// at least one band (t differing bits cannot touch all t+1 bands), so only
// hashes sharing a band value are compared. Both find the same pairs;
// hashes that are all alike still cost a comparison per pair.
func NearPairs(h []uint64, part []int, t int, multi bool, limit int) (pairs []Pair, found int, method string) {
	differ := func(i, j int) bool { return part == nil || part[i] != part[j] }
	var out []Pair
	if t >= 63 || (!multi && len(h) <= AllPairsLimit) {
		for i := range h {
			for j := i + 1; j < len(h); j++ {
				if d := Hamming(h[i], h[j]); d <= t && differ(i, j) {
					found++
					if limit == 0 || len(out) < limit {
						out = append(out, Pair{i, j, d})
					}
				}
			}
		}
		return out, found, "all pairs"
	}
	nb := t + 1
	type band struct {
		shift uint
		mask  uint64
	}
	bands := make([]band, nb)
	pos := 0
	for b := 0; b < nb; b++ {
		w := 64 / nb
		if b < 64%nb {
			w++
		}
		bands[b] = band{uint(pos), (uint64(1)<<w - 1)}
		pos += w
	}
	val := func(x uint64, b int) uint64 { return x >> bands[b].shift & bands[b].mask }
	for b := range bands {
		buckets := map[uint64][]int32{}
		for i, x := range h {
			v := val(x, b)
			buckets[v] = append(buckets[v], int32(i))
		}
		for _, ids := range buckets {
			for a := 0; a < len(ids); a++ {
				i := int(ids[a])
				for c := a + 1; c < len(ids); c++ {
					j := int(ids[c])
					d := Hamming(h[i], h[j])
					if d > t || !differ(i, j) {
						continue
					}
					first := true // count the pair at the first band it agrees on only
					for bb := 0; bb < b; bb++ {
						if val(h[i], bb) == val(h[j], bb) {
							first = false
							break
						}
					}
					if first {
						found++
						if len(out) < maxHeldPairs {
							out = append(out, Pair{i, j, d})
						}
					}
				}
			}
		}
	}
	sort.Slice(out, func(a, b int) bool {
		if out[a].I != out[b].I {
			return out[a].I < out[b].I
		}
		return out[a].J < out[b].J
	})
	method = fmt.Sprintf("pigeonhole multi-index, %d bands", nb)
	if found > len(out) {
		method += fmt.Sprintf(" (the first %d pairs found are listed)", len(out))
	}
	if limit > 0 && len(out) > limit {
		out = out[:limit]
	}
	return out, found, method
}

// ---------------------------------------------------------------------------
// Class weights.

// InverseWeights returns 1/freq for every class with pixels (0 for the
// others), scaled so the weights of the present classes average 1.
func InverseWeights(pixels []int64) []float64 {
	var total int64
	for _, p := range pixels {
		total += p
	}
	w := make([]float64, len(pixels))
	if total == 0 {
		return w
	}
	sum, n := 0.0, 0
	for i, p := range pixels {
		if p > 0 {
			w[i] = float64(total) / float64(p)
			sum += w[i]
			n++
		}
	}
	for i := range w {
		w[i] *= float64(n) / sum
	}
	return w
}

// MedianWeights is median-frequency balancing (Eigen & Fergus, "Predicting
// depth, surface normals and semantic labels with a common multi-scale
// convolutional architecture", ICCV 2015): freq(c) = pixels of c / total
// pixels of the images in which c appears, and weight(c) = median over the
// present classes of freq / freq(c). pixels[c] is the class's pixel count,
// present[c] the labeled pixels of the images containing c. Absent classes
// get 0. The median of an even number of classes is the mean of the middle two.
func MedianWeights(pixels, present []int64) []float64 {
	w := make([]float64, len(pixels))
	var freqs []float64
	for c, p := range pixels {
		if p > 0 && present[c] > 0 {
			freqs = append(freqs, float64(p)/float64(present[c]))
		}
	}
	if len(freqs) == 0 {
		return w
	}
	med := median(freqs)
	for c, p := range pixels {
		if p > 0 && present[c] > 0 {
			w[c] = med / (float64(p) / float64(present[c]))
		}
	}
	return w
}

// median of xs (sorted in place); the mean of the middle two for an even count.
func median(xs []float64) float64 {
	if len(xs) == 0 {
		return 0
	}
	sort.Float64s(xs)
	n := len(xs)
	if n%2 == 1 {
		return xs[n/2]
	}
	return (xs[n/2-1] + xs[n/2]) / 2
}

// ---------------------------------------------------------------------------
// Compute.

// sample is what a worker measures in one record's files.
type sample struct {
	seq  int
	rec  *manifest.Record
	err  error
	hash uint64
	ch   []Welford // per channel, Options.Split only
	hist []int64   // mask value histogram (256), Options.Split only
}

// Compute reads DIR's dataset.json and manifest.jsonl once, decoding every
// image (for its difference hash) and, for the records of o.Split, the
// semantic mask, and returns the statistics a training run needs. Decoding
// runs on o.Workers goroutines; results are merged in record order, so the
// Stats are the same for any worker count. Checksums are not verified
// (that is `trueset verify`); a file that cannot be read or decoded is an
// error naming the record.
func Compute(dir string, o Options) (*Stats, error) {
	o = o.normalized()
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return nil, err
	}
	// A gray set has one channel; an RGB set three, and so has a "mixed"
	// one (a plain folder of gray and color sources), where gray images
	// count in all three.
	channels := 1
	if d.Mode == "rgb" || d.Mode == "mixed" {
		channels = 3
	}
	a := newAccumulator(d, o, channels)
	// One budget of decoded pixels for the whole run, shared by the workers
	// and the confirmation of leak candidates.
	a.budget = newBudget(RunBudgetBytes)

	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	jobs := make(chan *sample, 2*o.Workers)
	results := make(chan *sample, 2*o.Workers)
	window := make(chan struct{}, 16*o.Workers) // records in flight, so the reorder buffer stays small
	var readErr error
	go func() {
		defer close(jobs)
		seq := 0
		readErr = manifest.ReadManifest(dir, func(r *manifest.Record) error {
			select {
			case window <- struct{}{}:
			case <-ctx.Done():
				return ctx.Err()
			}
			jobs <- &sample{seq: seq, rec: r}
			seq++
			return nil
		})
	}()
	var wg sync.WaitGroup
	for w := 0; w < o.Workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for s := range jobs {
				if ctx.Err() == nil {
					measure(dir, s, o.Split, channels, a.budget)
				}
				results <- s
			}
		}()
	}
	go func() { wg.Wait(); close(results) }()

	pending := map[int]*sample{}
	next := 0
	var firstErr error
	for s := range results {
		<-window
		if firstErr != nil {
			continue // drain
		}
		pending[s.seq] = s
		for p := pending[next]; p != nil; p = pending[next] {
			delete(pending, next)
			next++
			if p.err != nil {
				firstErr = fmt.Errorf("record %s: %w", p.rec.ID, p.err)
				cancel()
				break
			}
			a.add(p)
		}
	}
	if firstErr != nil {
		return nil, firstErr
	}
	if readErr != nil && !errors.Is(readErr, context.Canceled) {
		return nil, readErr
	}
	st := a.finish(dir)
	if st.LossScales, err = lossScales(dir, st); err != nil { // lossscale.go
		return nil, err
	}
	if st.Planted, err = ComputePlanted(dir, d); err != nil { // planted.go
		return nil, err
	}
	return st, nil
}

// measure decodes one record's image (and, in split, its semantic mask)
// within the run's budget: both files are opened through safefile and their
// headers checked against the record before either is decoded, and the
// bytes they take decoded are reserved from b for as long as they live.
func measure(dir string, s *sample, split string, channels int, b *budget) {
	r := s.rec
	imf, icfg, err := openImage(dir, r.Image, r.Width, r.Height)
	if err != nil {
		s.err = err
		return
	}
	need := manifest.DecodedBytes(icfg) + grayCopyBytes(icfg)
	var mkf *manifest.SampleFile
	if r.Split == split {
		var mcfg image.Config
		mkf, mcfg, err = openMask(dir, r.Mask, r.Width, r.Height)
		if err != nil {
			imf.Close()
			s.err = err
			return
		}
		need += manifest.DecodedBytes(mcfg)
	}
	if err := b.acquire(need); err != nil {
		imf.Close()
		if mkf != nil {
			mkf.Close()
		}
		s.err = fmt.Errorf("%s: %w", r.Image, err)
		return
	}
	defer b.release(need)
	img, err := decodeClose(imf)
	if err != nil {
		if mkf != nil {
			mkf.Close()
		}
		s.err = err
		return
	}
	s.hash = DHash(img)
	if mkf == nil {
		return
	}
	s.ch = pixelMoments(img, channels)
	img = nil
	mk, err := decodeClose(mkf)
	if err != nil {
		s.err = err
		return
	}
	s.hist = make([]int64, 256)
	switch m := mk.(type) {
	case *image.Paletted:
		countBytes(s.hist, m.Pix, m.Stride, m.Rect)
	case *image.Gray:
		countBytes(s.hist, m.Pix, m.Stride, m.Rect)
	default:
		s.err = fmt.Errorf("%s: semantic mask is not an 8-bit indexed or gray PNG", r.Mask)
	}
}

func countBytes(hist []int64, pix []uint8, stride int, r image.Rectangle) {
	w := r.Dx()
	for y := 0; y < r.Dy(); y++ {
		for _, v := range pix[y*stride : y*stride+w] {
			hist[v]++
		}
	}
}

// pixelMoments runs Welford over one image's intensities per channel, in
// 0..255 units. A gray image in an RGB set counts in all three channels; a
// color image in a gray set counts as its luma.
func pixelMoments(m image.Image, channels int) []Welford {
	ch := make([]Welford, channels)
	b := m.Bounds()
	switch g := m.(type) {
	case *image.Gray:
		for y := 0; y < b.Dy(); y++ {
			for _, v := range g.Pix[y*g.Stride : y*g.Stride+b.Dx()] {
				for c := range ch {
					ch[c].Add(float64(v))
				}
			}
		}
		return ch
	case *image.RGBA:
		if channels == 3 {
			for y := 0; y < b.Dy(); y++ {
				row := g.Pix[y*g.Stride : y*g.Stride+4*b.Dx()]
				for i := 0; i < len(row); i += 4 {
					ch[0].Add(float64(row[i]))
					ch[1].Add(float64(row[i+1]))
					ch[2].Add(float64(row[i+2]))
				}
			}
			return ch
		}
	}
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if channels == 1 {
				ch[0].Add(float64(color.Gray16Model.Convert(m.At(x, y)).(color.Gray16).Y) / 257)
				continue
			}
			c := color.NRGBA64Model.Convert(m.At(x, y)).(color.NRGBA64)
			ch[0].Add(float64(c.R) / 257)
			ch[1].Add(float64(c.G) / 257)
			ch[2].Add(float64(c.B) / 257)
		}
	}
	return ch
}

// accumulator merges samples in record order.
type accumulator struct {
	d        *manifest.Dataset
	o        Options
	channels int

	records   int
	splitIdx  map[string]int
	splits    []SplitStats
	groups    []map[string]bool
	groupSeen map[string]string // group → first split
	spanned   map[string]bool

	pix      []Welford
	classPix []int64 // by mask value
	present  []int64 // labeled pixels of the images containing the value
	images   int     // of o.Split

	classIdx map[int]int // class id → index into classes
	classes  []ClassStats
	areas    [][]int
	perClass []map[string]int // split → objects

	targetIdx map[string]int
	targets   []*targetAcc

	hashes []uint64
	part   []int
	ids    []string
	sums   []string // image SHA-256 from the records
	paths  []string // image path and size, to confirm candidate pairs
	sizes  [][2]int

	budget *budget // decoded pixels alive at once, for the whole run
}

type targetAcc struct {
	name     string
	count    int
	texts    int
	w        Welford
	min, max float64
	distinct map[string]bool
}

func newAccumulator(d *manifest.Dataset, o Options, channels int) *accumulator {
	a := &accumulator{d: d, o: o, channels: channels,
		splitIdx: map[string]int{}, groupSeen: map[string]string{}, spanned: map[string]bool{},
		pix: make([]Welford, channels), classPix: make([]int64, 256), present: make([]int64, 256),
		classIdx: map[int]int{}, targetIdx: map[string]int{}}
	for _, n := range d.Splits.Names {
		a.split(n)
	}
	classes := append([]manifest.Class(nil), d.Classes...)
	sort.SliceStable(classes, func(i, j int) bool { return classes[i].ID < classes[j].ID })
	for _, c := range classes {
		a.class(c.ID, c.Name)
	}
	for _, t := range d.Targets {
		a.target(t)
	}
	return a
}

func (a *accumulator) split(name string) int {
	i, ok := a.splitIdx[name]
	if !ok {
		i = len(a.splits)
		a.splitIdx[name] = i
		a.splits = append(a.splits, SplitStats{Name: name})
		a.groups = append(a.groups, map[string]bool{})
	}
	return i
}

func (a *accumulator) class(id int, name string) int {
	i, ok := a.classIdx[id]
	if !ok {
		i = len(a.classes)
		a.classIdx[id] = i
		a.classes = append(a.classes, ClassStats{ID: id, Name: name, PerSample: map[string]int{}})
		a.areas = append(a.areas, nil)
		a.perClass = append(a.perClass, map[string]int{})
	}
	return i
}

func (a *accumulator) target(name string) *targetAcc {
	i, ok := a.targetIdx[name]
	if !ok {
		i = len(a.targets)
		a.targetIdx[name] = i
		a.targets = append(a.targets, &targetAcc{name: name, distinct: map[string]bool{}})
	}
	return a.targets[i]
}

func (a *accumulator) add(s *sample) {
	r := s.rec
	a.records++
	si := a.split(r.Split)
	a.splits[si].Samples++
	a.groups[si][r.Group] = true
	if first, ok := a.groupSeen[r.Group]; !ok {
		a.groupSeen[r.Group] = r.Split
	} else if first != r.Split {
		a.spanned[r.Group] = true
	}
	a.hashes = append(a.hashes, s.hash)
	a.part = append(a.part, si)
	a.ids = append(a.ids, r.ID)
	a.sums = append(a.sums, r.SHA256["image"])
	a.paths = append(a.paths, r.Image)
	a.sizes = append(a.sizes, [2]int{r.Width, r.Height})

	// Objects, in all splits.
	per := map[int]int{}
	for _, ob := range r.Objects {
		ci := a.class(ob.Class, ob.ClassName)
		a.classes[ci].Objects++
		a.areas[ci] = append(a.areas[ci], ob.Area)
		a.perClass[ci][r.Split]++
		per[ci]++
	}
	for ci := range a.classes {
		a.classes[ci].PerSample[strconv.Itoa(per[ci])]++
	}

	if r.Split != a.o.Split {
		return
	}
	a.images++
	for c := range a.pix {
		a.pix[c].Merge(s.ch[c])
	}
	var labeled int64
	for v, n := range s.hist {
		if v != manifest.IgnoreID {
			labeled += n
		}
	}
	for v, n := range s.hist {
		if n > 0 && v != manifest.IgnoreID {
			a.classPix[v] += n
			a.present[v] += labeled
		}
	}
	a.classPix[manifest.IgnoreID] += s.hist[manifest.IgnoreID]
	names := make([]string, 0, len(r.Targets))
	for n := range r.Targets {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		v := r.Targets[n]
		t := a.target(n)
		t.count++
		t.distinct[v.String()] = true
		if v.IsStr {
			t.texts++
			continue
		}
		if t.w.N == 0 || v.Num < t.min {
			t.min = v.Num
		}
		if t.w.N == 0 || v.Num > t.max {
			t.max = v.Num
		}
		t.w.Add(v.Num)
	}
}

func (a *accumulator) finish(dir string) *Stats {
	st := &Stats{Dir: dir, Samples: a.records, Splits: a.d.Splits, Warnings: []string{}}
	warn := func(format string, args ...any) { st.Warnings = append(st.Warnings, fmt.Sprintf(format, args...)) }

	for i := range a.splits {
		a.splits[i].Groups = len(a.groups[i])
	}
	st.PerSplit = a.splits
	if st.PerSplit == nil {
		st.PerSplit = []SplitStats{}
	}
	for _, s := range st.PerSplit {
		if want, ok := a.d.Splits.Counts[s.Name]; ok && want != s.Samples {
			warn("split %s has %s, dataset.json says %d", s.Name, Plural(s.Samples, "sample"), want)
		}
		if _, named := a.d.Splits.Counts[s.Name]; !named && len(a.d.Splits.Names) > 0 {
			warn("split %s (%s) is not one of dataset.json's splits %s", s.Name, Plural(s.Samples, "sample"), strings.Join(a.d.Splits.Names, ", "))
		}
		if s.Samples == 0 {
			warn("split %s has no samples", s.Name)
		}
	}
	if a.images == 0 {
		warn("split %s has no samples: no normalization, class weights or target scales", a.o.Split)
	}

	// Normalization.
	st.Pixels = PixelStats{Split: a.o.Split, Channels: a.channels, Estimator: "population",
		Mean: make([]float64, a.channels), Std: make([]float64, a.channels)}
	if a.channels == 3 {
		st.Pixels.Names = []string{"R", "G", "B"}
	} else {
		st.Pixels.Names = []string{"gray"}
	}
	for c, w := range a.pix {
		st.Pixels.Count = w.N
		st.Pixels.Mean[c] = w.Mean
		st.Pixels.Std[c] = w.Std()
		if w.N > 0 && w.Std() == 0 {
			warn("channel %s is constant (%s) in the %s split: (x − mean) / std divides by 0", st.Pixels.Names[c], Figure(w.Mean), a.o.Split)
		}
	}

	// Classes.
	var labeled int64
	for v, n := range a.classPix {
		if v != manifest.IgnoreID {
			labeled += n
		}
	}
	st.IgnorePixels = a.classPix[manifest.IgnoreID]
	st.LabeledPixels = labeled
	var unknown []string
	for v, n := range a.classPix {
		if _, ok := a.classIdx[v]; !ok && n > 0 && v != manifest.IgnoreID {
			unknown = append(unknown, fmt.Sprintf("%d (%s)", v, Plural(int(n), "pixel")))
			a.class(v, "")
		}
	}
	if len(unknown) > 0 {
		warn("mask values not in the class table (%s split): %s", a.o.Split, strings.Join(unknown, ", "))
	}
	pix := make([]int64, len(a.classes))
	pres := make([]int64, len(a.classes))
	for ci, c := range a.classes {
		if c.ID >= 0 && c.ID < 256 && c.ID != manifest.IgnoreID {
			pix[ci] = a.classPix[c.ID]
			pres[ci] = a.present[c.ID]
		}
	}
	inv := InverseWeights(pix)
	med := MedianWeights(pix, pres)
	for ci := range a.classes {
		c := &a.classes[ci]
		c.Pixels = pix[ci]
		c.PresentPixels = pres[ci]
		if labeled > 0 {
			c.Frequency = float64(pix[ci]) / float64(labeled)
		}
		c.WeightInverse = inv[ci]
		c.WeightMedian = med[ci]
		c.ObjectsBySplit = map[string]int{}
		for _, s := range a.splits {
			c.ObjectsBySplit[s.Name] = a.perClass[ci][s.Name]
		}
		if ar := a.areas[ci]; len(ar) > 0 {
			sort.Ints(ar)
			c.AreaMin, c.AreaMax = ar[0], ar[len(ar)-1]
			if n := len(ar); n%2 == 1 {
				c.AreaMedian = float64(ar[n/2])
			} else {
				c.AreaMedian = float64(ar[n/2-1]+ar[n/2]) / 2
			}
		}
		// Every sample counts in PerSample, also those merged before a
		// class first appeared in a record.
		seen := 0
		for _, n := range c.PerSample {
			seen += n
		}
		if seen < a.records {
			c.PerSample["0"] += a.records - seen
		}
		name := c.Name
		if name == "" {
			name = "(unnamed)"
		}
		if a.images > 0 && c.Pixels == 0 {
			warn("class %s (id %d) has no pixels in the %s split: a model trained on it never sees the class, and its weights are 0", name, c.ID, a.o.Split)
		}
		if c.Objects > 0 {
			var lacking []string
			for _, s := range a.splits {
				if s.Samples > 0 && c.ObjectsBySplit[s.Name] == 0 {
					lacking = append(lacking, s.Name)
				}
			}
			if len(lacking) > 0 {
				warn("class %s (id %d) has no objects in split %s", name, c.ID, strings.Join(lacking, ", "))
			}
		}
		if c.Name == "" && c.Objects > 0 {
			warn("objects of class id %d, which is not in the class table", c.ID)
		}
	}
	st.Classes = a.classes
	if st.Classes == nil {
		st.Classes = []ClassStats{}
	}
	sort.SliceStable(st.Classes, func(i, j int) bool { return st.Classes[i].ID < st.Classes[j].ID })

	// Targets.
	st.Targets = []TargetStats{}
	for _, t := range a.targets {
		ts := TargetStats{Name: t.name, Split: a.o.Split, Count: t.count, Distinct: len(t.distinct)}
		ts.Numeric = t.count > 0 && t.texts == 0
		if t.w.N > 0 {
			ts.Min, ts.Max, ts.Mean, ts.Std = t.min, t.max, t.w.Mean, t.w.Std()
		}
		if t.texts > 0 && t.texts < t.count {
			warn("target %s mixes text (%d) and numbers (%d) in the %s split", t.name, t.texts, t.count-t.texts, a.o.Split)
		}
		if a.images > 0 && t.count < a.images {
			warn("target %s is missing in %d of %s", t.name, a.images-t.count, Plural(a.images, a.o.Split+" sample"))
		}
		if t.count > 0 && len(t.distinct) == 1 {
			var only string
			for v := range t.distinct {
				only = v
			}
			if t.texts == 0 {
				only = Figure(t.min) // the number, rounded for reading
			}
			warn("target %s is constant (%s) in the %s split: nothing to learn, and a z-score of it divides by 0", t.name, only, a.o.Split)
		}
		st.Targets = append(st.Targets, ts)
	}

	// Strata.
	if len(a.d.Splits.Thin) > 0 {
		warn("thin strata (fewer groups than splits, so some split lacks them): %s", strings.Join(a.d.Splits.Thin, ", "))
	}

	// Leakage: dHash candidates, each confirmed at full size.
	cands, candFound, method := NearPairs(a.hashes, a.part, a.o.Threshold, false, MaxConfirmPairs)
	st.Leakage = Leakage{Method: "dhash-64", Threshold: a.o.Threshold, Index: method, Images: len(a.hashes),
		Candidates: candFound, Confirm: fmt.Sprintf("same size and mean absolute gray difference ≤ %g", ConfirmMAD),
		Pairs: []LeakPair{}, GroupsSpanned: []string{}}
	found := 0
	for _, p := range cands {
		mad, ok := a.confirm(dir, p.I, p.J)
		if !ok {
			continue
		}
		found++
		if len(st.Leakage.Pairs) < MaxLeakPairs {
			st.Leakage.Pairs = append(st.Leakage.Pairs, LeakPair{A: a.ids[p.I], SplitA: a.splits[a.part[p.I]].Name,
				B: a.ids[p.J], SplitB: a.splits[a.part[p.J]].Name, Distance: p.Distance, MeanAbsDiff: manifest.Round(mad, 3),
				Identical: a.sums[p.I] != "" && a.sums[p.I] == a.sums[p.J]})
		}
	}
	st.Leakage.PairsFound = found
	for g := range a.spanned {
		st.Leakage.GroupsSpanned = append(st.Leakage.GroupsSpanned, g)
	}
	sort.Strings(st.Leakage.GroupsSpanned)
	if found > 0 {
		p := st.Leakage.Pairs[0]
		identical := 0
		for _, q := range st.Leakage.Pairs {
			if q.Identical {
				identical++
			}
		}
		warn("%s across splits (dHash distance ≤ %d, confirmed: %s; %d of those listed identical by SHA-256), e.g. %s (%s) and %s (%s) at distance %d: look at the pairs before trusting the held-out splits",
			Plural(found, "near-duplicate image pair"), a.o.Threshold, st.Leakage.Confirm, identical, p.A, p.SplitA, p.B, p.SplitB, p.Distance)
	}
	if n := len(st.Leakage.GroupsSpanned); n > 0 {
		list := st.Leakage.GroupsSpanned
		more := ""
		if n > 10 {
			list, more = list[:10], fmt.Sprintf(" and %d more", n-10)
		}
		verb := "span"
		if n == 1 {
			verb = "spans"
		}
		warn("%s %s splits (copies of one source in more than one split): %s%s", Plural(n, "group"), verb, strings.Join(list, ", "), more)
	}
	return st
}
