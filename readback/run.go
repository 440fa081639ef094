package readback

import (
	"fmt"
	"math"
	"runtime"
	"sort"
	"strconv"
	"sync"

	"github.com/trueset/trueset/manifest"
)

// Severities of a Finding.
const (
	Info    = "info"
	Warning = "warning"
	Error   = "error"
)

// Kinds of Finding: the documented list (README "Debug your loader").
const (
	KindLayout            = "layout"                  // info: axis order, channels, dtypes inferred
	KindGeometry          = "geometry"                // info: the relation of loader images and masks to their sources
	KindGeometryMismatch  = "geometry-mismatch"       // error: image and mask of a sample moved differently
	KindGeometryUnknown   = "geometry-unknown"        // warning: no relation to the source found (mask checked against image edges)
	KindMaskOffEdges      = "mask-off-edges"          // error: mask class boundaries off the image's edges
	KindIDsMismatch       = "ids-mismatch"            // error: images belong to other records than their ids
	KindValuesRaw         = "values-raw"              // warning: raw 0–255 values, not normalized
	KindValuesScaled      = "values-scaled"           // info: scaled to 0–1 (or −1–1)
	KindValuesNormalized  = "values-normalized"       // info: normalized with the dataset's own statistics
	KindValuesTwice       = "values-normalized-twice" // error: a normalization applied twice
	KindValuesOther       = "values-other-constants"  // warning: normalized with constants not the dataset's
	KindValuesUnknown     = "values-unknown"          // warning: no per-channel affine mapping fits
	KindValuesVary        = "values-vary"             // info: the mapping changes per sample (photometric augmentation)
	KindChannelsSwapped   = "channels-swapped"        // error: channel order differs from the source's (BGR for RGB)
	KindGrayReplicated    = "gray-replicated"         // info: a gray source copied into 3 channels
	KindGrayConverted     = "gray-converted"          // info: an RGB source converted to one channel
	KindMaskValues        = "mask-values"             // error: mask values outside the class table
	KindMaskFloat         = "mask-float"              // warning: masks stored as floats
	KindMaskInterpolated  = "mask-interpolated"       // error: mask resampled with interpolation
	KindMaskIDsShifted    = "mask-ids-shifted"        // error: mask ids offset against the class table
	KindIgnoreMapped      = "mask-ignore-mapped"      // error: the ignore id (255) became a class
	KindTargetsShuffled   = "targets-shuffled"        // error: targets are the batch's own, in another order
	KindTargetsMisaligned = "targets-misaligned"      // error: targets belong to neighbors in the batch
	KindTargetsDisagree   = "targets-disagree"        // error: targets differ from the records
	KindCountsVsMask      = "counts-vs-mask"          // error: a count the loader's own mask cannot have
	KindBatchRepeats      = "batch-repeats"           // warning: the same record more than once
	KindWrongSplit        = "wrong-split"             // error: records from a split other than --split
	KindBatchMix          = "batch-mix"               // info or warning: strata and classes of the batch vs the split
)

// Kinds lists every kind, in the order the README documents them.
var Kinds = []string{KindLayout, KindGeometry, KindGeometryMismatch, KindGeometryUnknown, KindMaskOffEdges, KindIDsMismatch,
	KindValuesRaw, KindValuesScaled, KindValuesNormalized, KindValuesTwice, KindValuesOther, KindValuesUnknown, KindValuesVary,
	KindChannelsSwapped, KindGrayReplicated, KindGrayConverted,
	KindMaskValues, KindMaskFloat, KindMaskInterpolated, KindMaskIDsShifted, KindIgnoreMapped,
	KindTargetsShuffled, KindTargetsMisaligned, KindTargetsDisagree, KindCountsVsMask,
	KindBatchRepeats, KindWrongSplit, KindBatchMix}

// Finding is one thing found about the batch.
type Finding struct {
	Kind     string         `json:"kind"`
	Severity string         `json:"severity"`
	Samples  []string       `json:"samples"` // sample ids concerned, in batch order ([] = the batch as a whole)
	Evidence map[string]any `json:"evidence"`
	Message  string         `json:"message"`
}

// Sample is what was found for one batch position.
type Sample struct {
	Position   int        `json:"position"`
	ID         string     `json:"id"`
	Split      string     `json:"split"`
	Shows      string     `json:"shows,omitempty"` // the record whose image it holds, when not ID's
	Image      *Transform `json:"image"`           // nil: no relation found
	ImageScore float64    `json:"image_score"`     // worst channel's correlation with the source
	Mask       *Transform `json:"mask,omitempty"`
	MaskScore  float64    `json:"mask_score,omitempty"` // share of mask pixels equal to the source's
	MaskOffset int        `json:"mask_offset,omitempty"`
}

// Options tune Run.
type Options struct {
	Split      string // the split the batch claims to come from ("" = not checked)
	StatsSplit string // the split whose statistics a normalization is compared with; "" = "train"
	Workers    int    // 0 = min(NumCPU, 8)
	MaxPanels  int    // flagged samples drawn for the contact sheet; 0 = 16
}

// Report is everything Run found.
type Report struct {
	Batch    string           `json:"batch"`
	Layout   Layout           `json:"layout"`
	Samples  []Sample         `json:"per_sample"`
	Findings []Finding        `json:"findings"`
	Errors   int              `json:"errors"`
	Warnings int              `json:"warnings"`
	Panels   []Panel          `json:"-"`
	Classes  []manifest.Class `json:"-"`
	Records  int              `json:"-"` // records in the dataset
}

// MaxAltBatch is the largest batch whose every record is tried for an
// image that is not its own record's; larger batches try the record's
// neighbors in index order only (ids off by one or two).
const MaxAltBatch = 64

// GoodImage is the correlation a loader image must reach with its source
// under a relation for the relation to count as found; GoodMask the share
// of mask pixels that must agree. Common practice; not standard values.
const (
	GoodImage = 0.98
	GoodMask  = 0.995
)

type sampleWork struct {
	pos   int
	rec   *manifest.Record
	src   *source // the source it shows (rec's, or another's when ids are off)
	L     [][]float32
	M     []float32
	img   scored
	msk   scored
	shows *manifest.Record
	tried bool
	err   error
}

// Run reads the dataset in dir and the batch file, and reports.
func Run(dir, batchPath string, o Options) (*Report, error) {
	if o.Workers <= 0 {
		o.Workers = min(runtime.NumCPU(), 8)
	}
	if o.StatsSplit == "" {
		o.StatsSplit = "train"
	}
	if o.MaxPanels == 0 {
		o.MaxPanels = 16
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return nil, err
	}
	var recs []*manifest.Record
	byID := map[string]*manifest.Record{}
	byIndex := map[int]*manifest.Record{}
	if err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		recs = append(recs, r)
		byID[r.ID] = r
		byIndex[r.Index] = r
		return nil
	}); err != nil {
		return nil, err
	}
	arrays, names, err := ReadBatch(batchPath)
	if err != nil {
		return nil, err
	}
	bad := func(format string, args ...any) error {
		return &InputError{File: batchPath, Msg: fmt.Sprintf(format, args...)}
	}
	idsA, imgA := arrays["ids"], arrays["images"]
	if idsA == nil || imgA == nil {
		return nil, bad("needs arrays \"ids\" and \"images\" (it has: %v); write it with dump_batch (examples/python/trueset_loader.py)", names)
	}
	if len(idsA.Shape) != 1 {
		return nil, bad("ids: shape %s; want one id per sample", shapeString(idsA.Shape))
	}
	if len(idsA.Shape) == 1 && idsA.Shape[0] > MaxBatchSamples {
		return nil, bad("ids: %d samples; at most %d", idsA.Shape[0], MaxBatchSamples)
	}
	n := idsA.Shape[0]
	if n == 0 {
		return nil, bad("ids: the batch is empty")
	}
	batchRecs := make([]*manifest.Record, n)
	idKind := "record ids"
	for i := 0; i < n; i++ {
		var r *manifest.Record
		if idsA.Str != nil {
			r = byID[idsA.Str[i]]
			if r == nil {
				return nil, bad("ids[%d] = %q is not a record of %s", i, idsA.Str[i], dir)
			}
		} else {
			idKind = "record indices"
			v := idsA.Num[i]
			if v != float32(math.Trunc(float64(v))) {
				return nil, bad("ids[%d] = %v is not a whole record index", i, v)
			}
			r = byIndex[int(v)]
			if r == nil {
				return nil, bad("ids[%d] = %d is not a record index of %s", i, int(v), dir)
			}
		}
		batchRecs[i] = r
	}
	sizes := map[[2]int]bool{}
	for _, r := range batchRecs {
		sizes[[2]int{r.Width, r.Height}] = true
	}
	lay, err := inferLayout(batchPath, imgA, n, sizes)
	if err != nil {
		return nil, err
	}
	lay.IDs = idKind
	maskA := arrays["masks"]
	if maskA != nil {
		if err := maskLayout(batchPath, maskA, lay); err != nil {
			return nil, err
		}
		lay.MaskShape, lay.MaskDType = maskA.Shape, maskA.DType
	}
	targetArrays := map[string]*Array{}
	isTarget := map[string]bool{}
	for _, t := range d.Targets {
		isTarget[t] = true
	}
	lay.Targets, lay.Ignored = []string{}, []string{}
	for _, nm := range names {
		switch {
		case nm == "ids" || nm == "images" || nm == "masks":
		case isTarget[nm]:
			a := arrays[nm]
			if len(a.Shape) != 1 || a.Shape[0] != n {
				return nil, bad("target %s: shape %s; want %d values, one per sample", nm, shapeString(a.Shape), n)
			}
			targetArrays[nm] = a
			lay.Targets = append(lay.Targets, nm)
		default:
			lay.Ignored = append(lay.Ignored, nm)
		}
	}

	rep := &Report{Batch: batchPath, Layout: lay, Findings: []Finding{}, Classes: d.Classes, Records: len(recs)}
	defs := map[string]manifest.TargetDef{}
	for _, td := range d.TargetDefs {
		defs[td.Name] = td
	}

	// Sources, decoded once each, in parallel.
	cache := newSourceCache(dir, false)
	work := make([]*sampleWork, n)
	for i := range work {
		w := &sampleWork{pos: i, rec: batchRecs[i]}
		w.L = lay.planes(imgA, i)
		if maskA != nil {
			w.M = maskA.Num[i*lay.Height*lay.Width : (i+1)*lay.Height*lay.Width]
		}
		work[i] = w
	}
	parallel(n, o.Workers, func(i int) {
		w := work[i]
		s, err := cache.get(w.rec)
		if err != nil {
			w.err = fmt.Errorf("record %s: %w", w.rec.ID, err)
			return
		}
		w.src = s
		w.img = findImage(s, w.L, lay)
	})
	for _, w := range work {
		if w.err != nil {
			return nil, w.err
		}
	}
	// Images that are not their record's: try the batch's other records and
	// the record's neighbors in index order.
	parallel(n, o.Workers, func(i int) {
		w := work[i]
		if w.img.score >= GoodImage {
			return
		}
		w.tried = true
		var alts []*manifest.Record
		seen := map[string]bool{w.rec.ID: true}
		for _, dlt := range []int{1, -1, 2, -2} {
			if r := byIndex[w.rec.Index+dlt]; r != nil && !seen[r.ID] {
				seen[r.ID] = true
				alts = append(alts, r)
			}
		}
		// The batch's other records too when it is small: the search is
		// per pair, and a batch of unrecognizable images (strong
		// photometric augmentation) must not cost n² searches.
		for _, r := range batchRecs {
			if n > MaxAltBatch {
				break
			}
			if !seen[r.ID] {
				seen[r.ID] = true
				alts = append(alts, r)
			}
		}
		for _, r := range alts {
			s, err := cache.get(r)
			if err != nil {
				continue
			}
			if s.w*s.h != w.src.w*w.src.h {
				continue
			}
			if sc := findImage(s, w.L, lay); sc.score >= GoodImage {
				w.src, w.img, w.shows = s, sc, r
				return
			}
		}
	})
	if maskA != nil {
		parallel(n, o.Workers, func(i int) {
			w := work[i]
			w.msk = findMask(w.src, w.M, lay, w.img)
		})
	}
	for i, w := range work {
		smp := Sample{Position: i, ID: w.rec.ID, Split: w.rec.Split, ImageScore: round4(w.img.score)}
		if w.img.score >= GoodImage {
			t := w.img.t
			smp.Image = &t
		}
		if w.shows != nil {
			smp.Shows = w.shows.ID
		}
		if w.M != nil {
			smp.MaskScore, smp.MaskOffset = round4(w.msk.score), w.msk.k
			if w.msk.score >= 0.5 {
				t := w.msk.t
				smp.Mask = &t
			}
		}
		rep.Samples = append(rep.Samples, smp)
	}

	rep.add(Finding{Kind: KindLayout, Severity: Info, Samples: []string{}, Message: "layout: " + lay.Describe(),
		Evidence: map[string]any{"order": lay.Order, "channels": lay.Channels, "height": lay.Height, "width": lay.Width, "dtype": dtypeWords(lay.DType)}})
	geometryFindings(rep, work, lay)
	vm := valueFindings(rep, work, lay, dir, recs, o, cache)
	if maskA != nil {
		maskFindings(rep, work, lay, maskA, d.Classes)
	}
	targetFindings(rep, work, targetArrays, defs, d, dir)
	batchFindings(rep, work, o, d, recs)
	rep.Panels = panels(rep, work, lay, vm, d.Classes, o.MaxPanels)
	for _, f := range rep.Findings {
		switch f.Severity {
		case Error:
			rep.Errors++
		case Warning:
			rep.Warnings++
		}
	}
	return rep, nil
}

func (r *Report) add(f Finding) {
	if f.Samples == nil {
		f.Samples = []string{}
	}
	if f.Evidence == nil {
		f.Evidence = map[string]any{}
	}
	r.Findings = append(r.Findings, f)
}

func round4(f float64) float64 { return math.Round(f*1e4) / 1e4 }

// parallel runs fn(0..n-1) on workers goroutines.
func parallel(n, workers int, fn func(i int)) {
	var wg sync.WaitGroup
	next := make(chan int)
	for k := 0; k < min(workers, n); k++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				fn(i)
			}
		}()
	}
	for i := 0; i < n; i++ {
		next <- i
	}
	close(next)
	wg.Wait()
}

// sourceCache decodes each record's files once.
type sourceCache struct {
	dir  string
	inst bool
	mu   sync.Mutex
	m    map[string]*cacheEntry
}

type cacheEntry struct {
	once sync.Once
	s    *source
	err  error
}

func newSourceCache(dir string, inst bool) *sourceCache {
	return &sourceCache{dir: dir, inst: inst, m: map[string]*cacheEntry{}}
}

func (c *sourceCache) get(r *manifest.Record) (*source, error) {
	c.mu.Lock()
	e := c.m[r.ID]
	if e == nil {
		e = &cacheEntry{}
		c.m[r.ID] = e
	}
	c.mu.Unlock()
	e.once.Do(func() { e.s, e.err = loadSource(c.dir, r, c.inst) })
	return e.s, e.err
}

// findImage searches the relation of one loader image to a source.
func findImage(s *source, L [][]float32, lay Layout) scored {
	cands := candidates(s.w, s.h, lay.Width, lay.Height)
	buf := make([]float32, len(s.ch)*lay.Width*lay.Height)
	pr := probes(lay.Width, lay.Height, 400)
	// Probes look at the first loader channel only: every loader channel is
	// an affine map of some source channel, so one is enough to rank.
	pc := newProbeCache(s, L[0], pr)
	best := search(cands, func(t Transform, p []int) (float64, int) {
		if p != nil {
			if !t.Resize {
				return pc.score(t), 0
			}
			return imageScore(t, s, L[:1], p, buf), 0
		}
		return imageScore(t, s, L, nil, buf), 0
	}, pr, 0.999)
	return best
}

// findMask searches the relation of one loader mask to its source's,
// trying the image's relation first.
func findMask(s *source, M []float32, lay Layout, img scored) scored {
	src := make([]float32, len(s.mask))
	for i, v := range s.mask {
		src[i] = float32(v)
	}
	cands := candidates(s.w, s.h, lay.Width, lay.Height)
	if img.score >= GoodImage {
		cands = append([]Transform{img.t}, cands...)
	}
	buf := make([]float32, lay.Width*lay.Height)
	pr := probes(lay.Width, lay.Height, 400)
	return search(cands, func(t Transform, p []int) (float64, int) {
		return maskScoreF(t, src, M, p, buf)
	}, pr, GoodMask)
}

// ids lists the ids of the given positions, in batch order.
// A record repeated in the batch is listed once.
func ids(work []*sampleWork, pos []int) []string {
	sort.Ints(pos)
	out := make([]string, 0, len(pos))
	seen := map[string]bool{}
	for _, p := range pos {
		if id := work[p].rec.ID; !seen[id] {
			seen[id] = true
			out = append(out, id)
		}
	}
	return out
}

func plural(n int, one string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + one + "s"
}
