package augment

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strings"
	"time"

	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/manifest"
)

// RunOptions configures an augmentation run; zero values mean defaults.
type RunOptions struct {
	In, Out          string
	Plan             *Plan
	Copies           int      // copies per augmented source
	Seed             uint64   // augmentation seed; copy k of source s draws from (Seed, s, k)
	Splits           []string // splits whose sources get copies; default train
	Workers          int      // default runtime.NumCPU()
	AllowLabelChange bool     // run plans that break a class's declared invariance
	Force            bool
	MaxPixels        int    // pixel budget per input image; default DefaultMaxPixels
	SplitSpec        string // plain folders only: how sources are dealt to splits
	Stratify         string // plain folders only: stratification key
	OnError          string // "fail" (default): a bad source stops the run; "skip": it is left out and listed
	Resume           bool   // continue an interrupted run of the same input, plan, seed and options in Out
	// AcceptStale writes copies that lost, cut or dropped objects although
	// the sources carry labels.csv columns columns.json does not declare;
	// such records name those columns in stale_targets. Without it such
	// copies are drawn again (within cuts.tries) and otherwise not written.
	AcceptStale bool
	FS          manifest.FS // nil = the real file system
	// Layout of the output: manifest.LayoutFolder ("" too) or
	// manifest.LayoutPacked, whose packs hold at most PackBytes (0 =
	// manifest.DefaultPackBytes).
	Layout    string
	PackBytes int64
	Version   string
	Progress  func(done, total int)
}

// DefaultMaxPixels bounds one input image (width × height).
const DefaultMaxPixels = 64 << 20

// MaxCopies bounds --copies.
const MaxCopies = 1000

// Summary reports a finished run.
type Summary struct {
	Sources, Copies, Records int
	Resumed                  int      // records kept from the interrupted run
	Skipped                  []string // sources left out by OnError "skip", with their errors
	Elapsed                  time.Duration
	Bytes                    int64
	Splits                   manifest.SplitTable
	// Fallbacks counts, per source split that got copies, what the cuts
	// policy and the label rules did (as dataset.json's augment.fallbacks).
	Fallbacks map[string]*manifest.Fallbacks
	// NotWritten lists copies that were not written, each with why (this
	// run's only; at most maxNotWrittenNotes), and Undeclared the labels.csv
	// columns columns.json does not declare.
	NotWritten []string
	Undeclared []string
}

// maxNotWrittenNotes bounds Summary.NotWritten.
const maxNotWrittenNotes = 20

// jobStats is what producing one source did to its copies.
type jobStats struct {
	records int // written, the original included
	fb      manifest.Fallbacks
	notes   []string
}

// source is one input sample: its record, and how to get its pixels and
// (for trueset input) its original file bytes.
type source struct {
	rec    manifest.Record
	plain  *plainSource // a plain folder's source; nil for trueset input
	weight int64        // pixels in work while it is produced (pixelBudget)
	where  string       // its file or manifest line, for errors
}

// plainSource is what Run keeps of a plain folder's source between reading
// the folder and producing the source, which reads it again.
type plainSource struct {
	files    folderSourceFiles
	sum      []byte // SHA-256 over its files' SHA-256s, as first read
	targets  map[string]manifest.Value
	channels int
}

type input struct {
	kind      string // "trueset" or "plain"
	dir       string
	base      *manifest.Dataset
	classes   []manifest.Class
	defs      []manifest.TargetDef
	targets   []string
	srcs      []source
	splits    manifest.SplitTable
	seed      uint64 // the seed the split allocation was dealt with
	maxPixels int
	skipped   []string // sources left out, with their errors
	folder    *Folder  // a plain folder, to read each source again
	budget    *pixelBudget
	// A plain folder's labels.csv columns that columns.json declares image
	// properties (carried as is), and those it does not declare at all.
	imageCols, undeclared []string
}

// Run augments a trueset dataset or a plain labeled folder into a new trueset
// dataset: every source is carried over unchanged, and each source in one of
// o.Splits also gets o.Copies augmented copies, which keep its split, group
// and stratum, so copies never leak across splits.
func Run(ctx context.Context, o RunOptions) (Summary, error) {
	start := time.Now()
	if o.Copies < 0 || o.Copies > MaxCopies {
		return Summary{}, fmt.Errorf("copies %d: want 0..%d", o.Copies, MaxCopies)
	}
	if o.Workers <= 0 {
		o.Workers = runtime.NumCPU()
	}
	switch {
	case o.MaxPixels < 0:
		return Summary{}, inputErrorf("max-pixels %d: want a whole number ≥ 1 (0 for the default, %d)", o.MaxPixels, DefaultMaxPixels)
	case o.MaxPixels == 0:
		o.MaxPixels = DefaultMaxPixels
	}
	if len(o.Splits) == 0 {
		o.Splits = []string{"train"}
	}
	switch o.OnError {
	case "":
		o.OnError = "fail"
	case "fail", "skip":
	default:
		return Summary{}, fmt.Errorf("on-error %q: want fail or skip", o.OnError)
	}
	in, err := readInput(o)
	if err != nil {
		return Summary{}, err
	}
	in.budget = newPixelBudget(RunPixels(o.MaxPixels))
	augmented := map[string]bool{}
	known := map[string]bool{}
	for _, n := range in.splits.Names {
		known[n] = true
	}
	for _, s := range o.Splits {
		if !known[s] {
			return Summary{}, usageErrorf("--split %s: the input has splits %s", s, strings.Join(in.splits.Names, ", "))
		}
		augmented[s] = true
	}
	if !o.AllowLabelChange {
		if err := CheckInvariance(o.Plan, in.classes, in.defs); err != nil {
			return Summary{}, err
		}
	}
	if err := CheckReadingCuts(o.Plan, in.defs); err != nil {
		return Summary{}, err
	}
	// Names, canvas sizes and record sizes are checked before anything is
	// written: a run that would fail on them fails at once.
	if err := in.checkBeforeWriting(o, augmented); err != nil {
		return Summary{}, err
	}
	// Record positions: each source's original, then its copies.
	first := make([]int, len(in.srcs)+1)
	for i, s := range in.srcs {
		n := 1
		if augmented[s.rec.Split] {
			n += o.Copies
		}
		first[i+1] = first[i] + n
	}
	total := first[len(in.srcs)]
	digits := copyDigits(o.Copies)

	marker, err := in.marker(o)
	if err != nil {
		return Summary{}, err
	}
	co := manifest.CreateOptions{Force: o.Force, FS: o.FS, Marker: marker}
	co.Layout, co.PackBytes = manifest.RunLayout(o.Layout, o.PackBytes)
	var w *manifest.Writer
	startJob, resumed := 0, 0
	if o.Resume {
		w, resumed, err = manifest.Resume(o.Out, co, func(n int) int {
			// Keep whole sources only: the last job may be half appended.
			// Copies that were not written leave gaps, so the sources are
			// found by their records' ids.
			var keep int
			startJob, keep = keptSources(o.Out, in, n)
			return keep
		})
	} else {
		w, err = manifest.CreateWith(o.Out, co)
	}
	if errors.Is(err, manifest.ErrComplete) {
		if cerr := in.checkComplete(o); cerr != nil {
			return Summary{}, cerr
		}
	}
	if err != nil {
		return Summary{}, err
	}
	stats := make([]jobStats, len(in.srcs))
	if startJob > 0 {
		kept, err := keptStats(o.Out, in, startJob, first)
		if err != nil {
			w.Abort()
			return Summary{}, err
		}
		copy(stats, kept)
	}
	rules := CopyRules{Whole: len(in.undeclared) > 0 && !o.AcceptStale}
	newProduce := func() manifest.Produce {
		enc := manifest.NewEncoder()
		return func(i int) ([]*manifest.Record, int64, error) {
			return in.produce(i, first[i], first[i+1]-first[i]-1, digits, o, rules, &stats[i], enc, w)
		}
	}
	done, bytesOut, err := manifest.RunOrdered(ctx, startJob, len(in.srcs), o.Workers, newProduce, w, o.Progress)
	done += startJob
	sum := Summary{Sources: done, Bytes: bytesOut, Resumed: resumed, Skipped: in.skipped, Undeclared: in.undeclared, Fallbacks: map[string]*manifest.Fallbacks{}}
	counts := map[string]int{}
	for i := 0; i < done; i++ {
		st := &stats[i]
		sp := in.srcs[i].rec.Split
		sum.Records += st.records
		counts[sp] += st.records
		if augmented[sp] && o.Copies > 0 {
			if sum.Fallbacks[sp] == nil {
				sum.Fallbacks[sp] = &manifest.Fallbacks{}
			}
			sum.Fallbacks[sp].Add(st.fb)
		}
		for _, n := range st.notes {
			if len(sum.NotWritten) < maxNotWrittenNotes {
				sum.NotWritten = append(sum.NotWritten, n)
			}
		}
	}
	sum.Copies = sum.Records - done
	if err != nil {
		w.Abort()
		sum.Elapsed = time.Since(start)
		return sum, err
	}
	_ = total
	d := in.dataset(o, sum.Records, counts)
	d.Augment.Fallbacks = sum.Fallbacks
	n, err := w.Finish(d)
	sum.Bytes += n
	sum.Splits = d.Splits
	sum.Elapsed = time.Since(start)
	return sum, err
}

// recountStrata counts the strata × splits table (in groups) of the sources
// that are left, for an input some of whose sources were skipped.
func (in *input) recountStrata(t manifest.SplitTable) ([]manifest.Stratum, []string) {
	seen := map[string]bool{}
	rows := map[string]*manifest.Stratum{}
	var keys []string
	for _, s := range in.srcs {
		if seen[s.rec.Group] {
			continue
		}
		seen[s.rec.Group] = true
		st := rows[s.rec.Stratum]
		if st == nil {
			st = &manifest.Stratum{Key: s.rec.Stratum, Splits: map[string]int{}}
			for _, n := range t.Names {
				st.Splits[n] = 0
			}
			rows[s.rec.Stratum] = st
			keys = append(keys, s.rec.Stratum)
		}
		st.Groups++
		st.Splits[s.rec.Split]++
	}
	sort.Slice(keys, func(a, b int) bool { return manifest.NaturalLess(keys[a], keys[b]) })
	nonzero := 0
	for _, r := range t.Ratios {
		if r > 0 {
			nonzero++
		}
	}
	var out []manifest.Stratum
	var thin []string
	for _, k := range keys {
		out = append(out, *rows[k])
		if rows[k].Groups < nonzero {
			thin = append(thin, k)
		}
	}
	return out, thin
}

// marker names the run for --resume: tool version, plan, seed, copies,
// splits, on-error, and a checksum of every source record (for trueset input
// those hold the files' checksums; for a plain folder its files' checksums
// are added).
func (in *input) marker(o RunOptions) ([]byte, error) {
	h := sha256.New()
	for _, s := range in.srcs {
		b, err := manifest.MarshalRecord(&s.rec)
		if err != nil {
			return nil, err
		}
		h.Write(b)
		if p := s.plain; p != nil {
			h.Write(p.sum)
		}
	}
	plan := sha256.Sum256(o.Plan.JSON())
	layout, packBytes := manifest.RunLayout(o.Layout, o.PackBytes)
	return json.Marshal(struct {
		Run         string   `json:"run"`
		ToolVersion string   `json:"tool_version"`
		Plan        string   `json:"plan_sha256"`
		Input       string   `json:"input_sha256"`
		Seed        uint64   `json:"seed"`
		Copies      int      `json:"copies"`
		Splits      []string `json:"splits"`
		OnError     string   `json:"on_error"`
		Allow       bool     `json:"allow_label_change"`
		AcceptStale bool     `json:"accept_stale_columns,omitempty"`
		Layout      string   `json:"layout,omitempty"` // "" = folder
		PackBytes   int64    `json:"pack_bytes,omitempty"`
	}{"augment", o.Version, hex.EncodeToString(plan[:]), hex.EncodeToString(h.Sum(nil)), o.Seed, o.Copies, o.Splits, o.OnError, o.AllowLabelChange, o.AcceptStale, layout, packBytes})
}

// RunPixels is the pixel budget of a whole run given the budget of one input
// file: the sources being worked on at once, each counted with the largest
// canvas the plan can make of it, hold at most this many pixels (a source
// that alone needs more runs alone). Twice the file budget lets the largest
// allowed source and a copy of its size be in memory together.
func RunPixels(maxPixels int) int64 { return 2 * int64(maxPixels) }

// headerRoles are a record's three files: the key of the record's sha256
// map, what the file is, and the PNG kinds it may be.
var headerRoles = [3]struct{ key, what string }{{"image", "image"}, {"mask", "mask"}, {"instances", "instance mask"}}

func recordFiles(rec *manifest.Record) [3]string {
	return [3]string{rec.Image, rec.Mask, rec.Instances}
}

// checkHeaders checks a trueset record against the headers of its three
// files before anything is decoded: each a PNG of the record's width and
// height within the pixel budget, the image 8-bit gray or RGB, the mask
// 8-bit indexed, the instances 16-bit gray (DESIGN, On disk).
func (in *input) checkHeaders(rec *manifest.Record) error {
	if rec.Width < 1 || rec.Height < 1 {
		return fmt.Errorf("record %s: width and height are %d×%d; want a size of at least 1×1", rec.ID, rec.Width, rec.Height)
	}
	for i, rel := range recordFiles(rec) {
		p := in.path(rel)
		f, err := manifest.OpenSample(in.dir, rel)
		if err != nil {
			return in.fileErr(rec, err)
		}
		var b [pngHeaderBytes]byte
		_, err = io.ReadFull(f.Section(), b[:])
		f.Close()
		if err != nil {
			return fmt.Errorf("record %s: %s: not a PNG: shorter than a PNG header", rec.ID, p)
		}
		h, err := parsePNGHeader(b[:])
		if err != nil {
			return fmt.Errorf("record %s: %s: %v", rec.ID, p, err)
		}
		if n := int64(h.Width) * int64(h.Height); n > int64(in.maxPixels) {
			return fmt.Errorf("record %s: %s: %d×%d pixels is over the budget of %d pixels (--max-pixels)", rec.ID, p, h.Width, h.Height, in.maxPixels)
		}
		if h.Width != rec.Width || h.Height != rec.Height {
			return fmt.Errorf("record %s: %s: the PNG header says %d×%d, the record says %d×%d", rec.ID, p, h.Width, h.Height, rec.Width, rec.Height)
		}
		ok := false
		want := ""
		switch i {
		case 0:
			ok, want = h.Depth == 8 && (h.ColorType == 0 || h.ColorType == 2), "an 8-bit gray or RGB PNG"
		case 1:
			ok, want = h.Depth == 8 && h.ColorType == 3, "an 8-bit indexed PNG"
		case 2:
			ok, want = h.Depth == 16 && h.ColorType == 0, "a 16-bit gray PNG"
		}
		if !ok {
			return fmt.Errorf("record %s: %s: the PNG is %s; a trueset %s is %s", rec.ID, p, folderColorType(h.Depth, h.ColorType), headerRoles[i].what, want)
		}
	}
	return nil
}

// checkSums checks a record's three files against its SHA-256s.
func (in *input) checkSums(rec *manifest.Record) error {
	for i, rel := range recordFiles(rec) {
		p := in.path(rel)
		f, err := manifest.OpenSample(in.dir, rel)
		if err != nil {
			return in.fileErr(rec, err)
		}
		h := sha256.New()
		_, err = io.Copy(h, f.Section())
		f.Close()
		if err != nil {
			return fmt.Errorf("record %s: %s: %v", rec.ID, p, err)
		}
		if got, want := hex.EncodeToString(h.Sum(nil)), rec.SHA256[headerRoles[i].key]; got != want {
			return fmt.Errorf("record %s: %s: SHA-256 %s, the record says %s", rec.ID, p, got, want)
		}
	}
	return nil
}

// path is how messages name the record file rel of the input: the folder
// and the record's path, in either layout (in the packed layout the file is
// a member of a pack, found by the same path).
func (in *input) path(rel string) string {
	return filepath.Join(in.dir, rel)
}

// fileErr words a record file that manifest.OpenSample or ReadSample
// refused: a path that leaves the folder as the path check says it, any
// other refusal after the file's path.
func (in *input) fileErr(rec *manifest.Record, err error) error {
	var se *manifest.SampleError
	if errors.As(err, &se) {
		if se.Check == manifest.KindPath {
			return fmt.Errorf("record %s: %s", rec.ID, se.Msg)
		}
		return fmt.Errorf("record %s: %s: %s", rec.ID, in.path(se.Rel), se.Msg)
	}
	return fmt.Errorf("record %s: %w", rec.ID, err)
}

// dataset builds the output dataset.json.
func (in *input) dataset(o RunOptions, total int, counts map[string]int) *manifest.Dataset {
	sum := sha256.Sum256(o.Plan.JSON())
	info := &manifest.AugmentInfo{
		Plan: o.Plan.JSON(), PlanSHA256: hex.EncodeToString(sum[:]), Seed: o.Seed, Copies: o.Copies,
		Splits: o.Splits, Source: in.kind, SourceSamples: len(in.srcs), AllowedChanges: o.AllowLabelChange,
		Skipped: in.skipped, ImageColumns: in.imageCols, UndeclaredColumns: in.undeclared,
		AcceptStale: o.AcceptStale && len(in.undeclared) > 0,
	}
	t := in.splits
	t.Counts = map[string]int{}
	for _, n := range t.Names {
		t.Counts[n] = counts[n]
	}
	if len(in.skipped) > 0 {
		t.Strata, t.Thin = in.recountStrata(t)
	}
	d := &manifest.Dataset{
		ToolVersion: o.Version, Seed: in.seed, Count: total, Classes: in.classes,
		Targets: in.targets, TargetDefs: in.defs, Splits: t, Augment: info, Recipe: json.RawMessage("null"),
	}
	if b := in.base; b != nil {
		d.Recipe, d.RecipeSHA256, d.Width, d.Height, d.Mode = b.Recipe, b.RecipeSHA256, b.Width, b.Height, b.Mode
		info.SourceSHA256 = b.ManifestSHA256
	} else if len(in.srcs) > 0 {
		// The sources' common size and mode; 0 and "mixed" when they differ
		// (each record carries its own size either way).
		mode := func(s source) string {
			if s.plain.channels == 3 {
				return "rgb"
			}
			return "gray"
		}
		s := in.srcs[0]
		d.Width, d.Height, d.Mode = s.rec.Width, s.rec.Height, mode(s)
		for _, o := range in.srcs[1:] {
			if o.rec.Width != d.Width || o.rec.Height != d.Height {
				d.Width, d.Height = 0, 0
			}
			if mode(o) != d.Mode {
				d.Mode = "mixed"
			}
		}
	}
	return d
}

// produce writes source i's original and its copies. It works within the
// run's pixel budget, and reads every file it uses once: a trueset source's
// files are checked against the record's SHA-256 and its labels against its
// masks; a plain source is read again and checked against its first read.
func (in *input) produce(i, index, copies, digits int, o RunOptions, rules CopyRules, st *jobStats, enc *manifest.Encoder, w *manifest.Writer) ([]*manifest.Record, int64, error) {
	s := in.srcs[i]
	held := in.budget.take(s.weight)
	defer in.budget.give(held)
	orig := s.rec
	orig.Index = index
	var n int64
	var src *Input
	var err error
	if in.kind == "trueset" {
		src, n, err = in.carryOver(&orig, copies > 0, w)
	} else {
		var ps *Source
		if ps, err = in.folder.reread(s.plain.files, s.plain.sum, s.plain.targets); err != nil {
			return nil, 0, &InputError{err}
		}
		src = &Input{Record: orig, Image: ps.Image, Mask: ps.Mask, Inst: ps.Instances}
		n, err = w.WriteFiles(&orig, enc, ps.Image.ToImage(), ps.Mask, ps.Instances)
	}
	if err != nil {
		return nil, n, err
	}
	recs := []*manifest.Record{&orig}
	*st = jobStats{records: 1}
	st.fb.Planned = copies
	for k := 1; k <= copies; k++ {
		out, err := o.Plan.CopyWith(src, o.Seed, i, k, in.defs, rules)
		if err != nil {
			return nil, n, err
		}
		id := copyID(s.rec.ID, k, digits)
		if out.NotWritten != "" {
			st.fb.NotWritten++
			st.notes = append(st.notes, fmt.Sprintf("%s: not written: %s", id, out.NotWritten))
			continue
		}
		rec := &out.Record
		rec.ID = id
		// The index is the copy's place in the plan: a copy that was not
		// written leaves its index and id unused.
		rec.Index = index + k
		if out.Lost && len(in.undeclared) > 0 {
			rec.StaleTargets = append([]string(nil), in.undeclared...)
			st.fb.Stale++
		}
		st.fb.Written++
		if out.Redraws > 0 {
			st.fb.Redrawn++
		}
		if c := rec.Lineage.Cuts; c != nil && c.Dropped > 0 {
			st.fb.Dropped++
			st.fb.DroppedObjects += c.Dropped
		}
		st.records++
		m, err := w.WriteFiles(rec, enc, out.Image, out.Mask, out.Inst)
		n += m
		if err != nil {
			return nil, n, err
		}
		recs = append(recs, rec)
	}
	return recs, n, nil
}

// carryOver copies a trueset sample over byte for byte, each file read once
// (through safefile, bounded) and checked against the record's SHA-256, into
// the output's own names for its id (images/<id>.png, …), so no record path
// can make it write anywhere else. It decodes the masks, and the image when
// copies will be made, and checks the record's labels against them, so what
// it carries over is what verify accepts. rec's paths are set to the output's.
func (in *input) carryOver(rec *manifest.Record, decodeImage bool, w *manifest.Writer) (*Input, int64, error) {
	var n int64
	var raw [3][]byte
	for i, rel := range recordFiles(rec) {
		b, err := manifest.ReadSample(in.dir, rel)
		if err != nil {
			return nil, n, &InputError{in.fileErr(rec, err)}
		}
		if got := manifest.SHA256Hex(b); got != rec.SHA256[headerRoles[i].key] {
			return nil, n, &InputError{fmt.Errorf("record %s: %s: SHA-256 %s, the record says %s; run trueset verify on the input", rec.ID, in.path(rel), got, rec.SHA256[headerRoles[i].key])}
		}
		raw[i] = b
	}
	src := rec.ID
	rec.Image = manifest.ImagesDir + "/" + rec.ID + ".png"
	rec.Mask = manifest.MasksDir + "/" + rec.ID + ".png"
	rec.Instances = manifest.InstancesDir + "/" + rec.ID + ".png"
	for i, rel := range recordFiles(rec) {
		if err := w.WriteRaw(rel, raw[i]); err != nil {
			return nil, n, err
		}
		n += int64(len(raw[i]))
	}
	decode := func(i int) (image.Image, error) {
		m, err := png.Decode(bytes.NewReader(raw[i]))
		if err != nil {
			return nil, &InputError{fmt.Errorf("record %s: %s: %v", src, in.dir+"/"+recordFiles(rec)[i], err)}
		}
		if m.Bounds() != image.Rect(0, 0, rec.Width, rec.Height) {
			return nil, &InputError{fmt.Errorf("record %s: %s: the pixels are %d×%d, the record says %d×%d", src, recordFiles(rec)[i], m.Bounds().Dx(), m.Bounds().Dy(), rec.Width, rec.Height)}
		}
		return m, nil
	}
	mk, err := decode(1)
	if err != nil {
		return nil, n, err
	}
	ins, err := decode(2)
	if err != nil {
		return nil, n, err
	}
	mask, ok1 := mk.(*image.Paletted)
	inst, ok2 := ins.(*image.Gray16)
	if !ok1 || !ok2 {
		return nil, n, &InputError{fmt.Errorf("record %s: the masks are not an indexed PNG and a 16-bit gray PNG", src)}
	}
	if err := checkLabels(rec, mask, inst, in.classes, in.defs); err != nil {
		return nil, n, &InputError{fmt.Errorf("record %s (%s): %w", src, in.dir, err)}
	}
	if !decodeImage {
		return nil, n, nil
	}
	img, err := decode(0)
	if err != nil {
		return nil, n, err
	}
	return &Input{Record: *rec, Image: FromImage(img), Mask: mask, Inst: inst}, n, nil
}

// checkLabels checks a trueset record against its masks as verify does:
// every object's instance is in the instance mask with the object's box and
// area, every instance has an object, every pixel's class is its instance's
// (background or ignore where there is none), every mask value a class of
// the table or 255, and every count target the number of such objects.
func checkLabels(rec *manifest.Record, mask *image.Paletted, inst *image.Gray16, classes []manifest.Class, defs []manifest.TargetDef) error {
	// Tables, not maps: the pixel loop below looks both up for every pixel.
	var knownTab [256]bool
	knownTab[manifest.IgnoreID] = true
	known := func(c int) bool { return c >= 0 && c < len(knownTab) && knownTab[c] }
	byName := map[string]int{}
	for _, c := range classes {
		if c.ID >= 0 && c.ID < len(knownTab) {
			knownTab[c.ID] = true
		}
		byName[c.Name] = c.ID
	}
	stats := manifest.MeasureInstances(inst)
	byID := map[int]*manifest.Object{}
	for i := range rec.Objects {
		o := &rec.Objects[i]
		if byID[o.Instance] != nil {
			return fmt.Errorf("instance %d has two objects in the record", o.Instance)
		}
		byID[o.Instance] = o
		if !known(o.Class) || o.Class == manifest.IgnoreID {
			return fmt.Errorf("object %d has class %d, which is not in dataset.json's class table", o.Instance, o.Class)
		}
		st := stats[o.Instance]
		switch {
		case st == nil:
			return fmt.Errorf("%s: object %d is in the record but not in the instance mask", rec.Instances, o.Instance)
		case st.BBox != o.Box:
			return fmt.Errorf("%s: object %d: box %v in the record, %v in the instance mask", rec.Instances, o.Instance, o.Box, st.BBox)
		case st.Area != o.Area:
			return fmt.Errorf("%s: object %d: area %d in the record, %d in the instance mask", rec.Instances, o.Instance, o.Area, st.Area)
		}
		if msg := manifest.CheckMeasured(o, &st.M); msg != "" {
			return fmt.Errorf("%s: %s", rec.Instances, msg)
		}
	}
	for id := range stats {
		if byID[id] == nil {
			return fmt.Errorf("%s: instance %d is in the instance mask but not in the record", rec.Instances, id)
		}
	}
	// Every object is in the instance mask (checked above), so its id is
	// 1..65535; classOf[id] is its class, 0 where no object has the id.
	maxID := 0
	for i := range rec.Objects {
		maxID = max(maxID, rec.Objects[i].Instance)
	}
	classOf := make([]int, maxID+1)
	for i := range rec.Objects {
		classOf[rec.Objects[i].Instance] = rec.Objects[i].Class
	}
	w := rec.Width
	for y := 0; y < rec.Height; y++ {
		for x := 0; x < w; x++ {
			c := int(mask.Pix[y*mask.Stride+x])
			o := inst.Pix[y*inst.Stride+2*x:]
			id := int(o[0])<<8 | int(o[1])
			if !knownTab[c] {
				return fmt.Errorf("%s: pixel (%d, %d) has value %d, which is no class of dataset.json and not 255 (ignore)", rec.Mask, x, y, c)
			}
			want := 0
			if id <= maxID {
				want = classOf[id]
			}
			if c != want && !(id == 0 && c == manifest.IgnoreID) {
				return fmt.Errorf("%s: pixel (%d, %d) has class %d, its instance %d is class %d", rec.Mask, x, y, c, id, want)
			}
		}
	}
	for _, t := range defs {
		if t.Kind != "count" {
			continue
		}
		want := map[int]bool{}
		for _, c := range t.Classes {
			want[byName[c]] = true
		}
		n := 0
		for _, o := range rec.Objects {
			if len(t.Classes) == 0 || want[o.Class] {
				n++
			}
		}
		v, ok := rec.Targets[t.Name]
		if !ok || v.IsStr || v.Num != float64(n) {
			return fmt.Errorf("target %s is %v, the instance mask holds %d such objects", t.Name, v, n)
		}
	}
	return nil
}

func readInput(o RunOptions) (*input, error) {
	if _, err := os.Stat(filepath.Join(o.In, manifest.DatasetFile)); err == nil {
		return readTrueset(o)
	}
	if IsPlainFolder(o.In) {
		return readPlain(o)
	}
	return nil, fmt.Errorf("%s is neither a trueset dataset (no dataset.json) nor a plain labeled folder (images/ and masks/)", o.In)
}

// readTrueset reads a trueset dataset's dataset.json and manifest and checks
// each record as it is read: a safe id used once, a split of dataset.json's
// split table, no lineage, and three PNG files whose headers give the
// record's size (checkHeaders). Then the dataset as a whole: a class table
// that fits 8-bit masks, groups within one split, the strata table and the
// seeded allocation as the records give them. With o.OnError "skip" a record
// whose files fail the header checks is left out and listed instead.
func readTrueset(o RunOptions) (*input, error) {
	d, err := manifest.ReadDataset(o.In)
	if err != nil {
		return nil, &InputError{err}
	}
	dsPath := filepath.Join(o.In, manifest.DatasetFile)
	mPath := filepath.Join(o.In, manifest.ManifestFile)
	in := &input{kind: "trueset", dir: o.In, base: d, classes: d.Classes, defs: d.TargetDefs, targets: d.Targets, splits: d.Splits, seed: d.Seed, maxPixels: o.MaxPixels}
	if err := checkClassTable(dsPath, d.Classes); err != nil {
		return nil, err
	}
	splitOK := map[string]bool{}
	for _, n := range d.Splits.Names {
		splitOK[n] = true
	}
	first := map[string]int{} // id → record number
	n := 0
	mf, err := safefile.Open(mPath)
	if err != nil {
		return nil, &InputError{err}
	}
	defer mf.Close()
	mh := sha256.New()
	err = manifest.DecodeManifest(io.TeeReader(mf, mh), mPath, func(r *manifest.Record) error {
		n++
		if j, dup := first[r.ID]; dup {
			return fmt.Errorf("record %s: the id of record %d too; ids must be unique", r.ID, j)
		}
		first[r.ID] = n
		if r.Lineage != nil {
			return fmt.Errorf("record %s is itself an augmented copy; augment the original dataset instead", r.ID)
		}
		if !splitOK[r.Split] {
			return fmt.Errorf("record %s: split %q is not in %s's split table (%s)", r.ID, r.Split, dsPath, strings.Join(d.Splits.Names, ", "))
		}
		err := in.checkHeaders(r)
		if err == nil && o.OnError == "skip" {
			err = in.checkSums(r) // so a source that would fail later is left out now
		}
		if err != nil {
			if o.OnError == "skip" {
				in.skipped = append(in.skipped, err.Error())
				return nil
			}
			return err
		}
		in.srcs = append(in.srcs, source{rec: *r, where: fmt.Sprintf("%s: record %d", mPath, n)})
		return nil
	})
	if err != nil {
		return nil, &InputError{err}
	}
	if got := hex.EncodeToString(mh.Sum(nil)); got != d.ManifestSHA256 {
		return nil, inputErrorf("%s: SHA-256 %s, %s says %s; run trueset verify on the input", mPath, got, dsPath, d.ManifestSHA256)
	}
	if err := in.checkSplitTable(dsPath); err != nil {
		return nil, err
	}
	return in, nil
}

// checkClassTable refuses a class table whose ids do not fit an 8-bit mask
// (0..254; 255 is ignore), or that names an id or a name twice.
func checkClassTable(file string, classes []manifest.Class) error {
	ids := map[int]bool{}
	names := map[string]bool{}
	for _, c := range classes {
		switch {
		case c.ID < 0 || c.ID > maxFolderClassID:
			return inputErrorf("%s: class %q has id %d; class ids are 0..%d (8-bit masks; 255 = ignore)", file, c.Name, c.ID, maxFolderClassID)
		case ids[c.ID]:
			return inputErrorf("%s: class id %d is listed twice", file, c.ID)
		case names[c.Name]:
			return inputErrorf("%s: class name %q is listed twice", file, c.Name)
		}
		ids[c.ID], names[c.Name] = true, true
	}
	return nil
}

// checkSplitTable checks what the output carries over from the input's
// split table against the records, as verify does: no group in two splits,
// the strata table's counts, and, when the split spec parses, every group
// in the split the seeded allocation (manifest.AllocateStrata) gives it.
// Not when sources were skipped: the output's table is counted afresh then.
func (in *input) checkSplitTable(file string) error {
	if len(in.skipped) > 0 {
		return nil
	}
	groupSplit := map[string]string{}
	groupAt := map[string]int{}
	var keys []string
	var groupOf []int
	count := map[string]map[string]int{}
	for _, s := range in.srcs {
		r := &s.rec
		if sp, ok := groupSplit[r.Group]; ok {
			if sp != r.Split {
				return inputErrorf("%s: group %q is in splits %s and %s; a group must stay in one split", s.where, r.Group, sp, r.Split)
			}
			groupOf = append(groupOf, groupAt[r.Group])
			continue
		}
		groupSplit[r.Group] = r.Split
		groupAt[r.Group] = len(keys)
		groupOf = append(groupOf, len(keys))
		keys = append(keys, r.Stratum)
		if count[r.Stratum] == nil {
			count[r.Stratum] = map[string]int{}
		}
		count[r.Stratum][r.Split]++
	}
	declared := map[string]bool{}
	for _, st := range in.splits.Strata {
		declared[st.Key] = true
		for _, n := range in.splits.Names {
			if got := count[st.Key][n]; got != st.Splits[n] {
				return inputErrorf("%s: the strata table says stratum %q has %d groups in split %s; the records have %d", file, st.Key, st.Splits[n], n, got)
			}
		}
	}
	for k := range count {
		if !declared[k] {
			return inputErrorf("%s: stratum %q of the records is not in the strata table", file, k)
		}
	}
	sp, err := manifest.ParseSplits(in.splits.Spec)
	if err != nil || !slices.Equal(sp.Names, in.splits.Names) {
		return nil
	}
	sp.Cover = in.splits.RequireCoverage
	ids, names := manifest.StrataIDs(keys)
	a, err := manifest.AllocateWritten(in.base, ids, names, sp) // as verify deals it
	if err != nil {
		return nil
	}
	for i, s := range in.srcs {
		if want := sp.Names[a.Split[groupOf[i]]]; s.rec.Split != want {
			return inputErrorf("%s: record %q is in split %s, but seed %d's allocation (split %s) puts its group in %s; re-deal the input with trueset split",
				s.where, s.rec.ID, s.rec.Split, in.seed, in.splits.Spec, want)
		}
	}
	return nil
}

// checkBeforeWriting checks what can be checked before the first byte is
// written: output names (no clash, copy ids short enough), the largest
// canvas the plan can make of each source that gets copies, and the record
// sizes; it also sets each source's pixel weight.
func (in *input) checkBeforeWriting(o RunOptions, augmented map[string]bool) error {
	ids := make([]string, len(in.srcs))
	for i, s := range in.srcs {
		ids[i] = s.rec.ID
	}
	gets := func(i int) bool { return o.Copies > 0 && augmented[in.srcs[i].rec.Split] }
	if err := checkOutputNames(ids, gets, o.Copies, func(i int) string { return in.srcs[i].where }); err != nil {
		return err
	}
	checked := map[[2]int]bool{}
	for i := range in.srcs {
		s := &in.srcs[i]
		w, h := s.rec.Width, s.rec.Height
		s.weight = int64(w) * int64(h)
		if !gets(i) {
			continue
		}
		bw, bh, _, _ := o.Plan.canvasBound(w, h)
		s.weight += int64(bw) * int64(bh)
		if !checked[[2]int{w, h}] {
			checked[[2]int{w, h}] = true
			if err := o.Plan.CheckCanvas(w, h, s.where); err != nil {
				return err
			}
		}
		b, err := manifest.MarshalRecord(&s.rec)
		if err != nil {
			return err
		}
		// A copy's record is its source's with the objects' shares and
		// factors redrawn and a lineage added.
		if n := len(b) + copyRecordSlack*len(s.rec.Objects) + lineageBytes(o.Plan); n > manifest.MaxRecordBytes {
			return inputErrorf("%s: id %q has %d objects; a copy's record could be %d bytes, over the %d a manifest line may hold",
				s.where, s.rec.ID, len(s.rec.Objects), n, manifest.MaxRecordBytes)
		}
	}
	return nil
}

// copyRecordSlack is how many bytes an object's JSON may grow by in a copy
// (shown share, center, size and angle written with their decimals).
const copyRecordSlack = 96

// lineageBytes bounds the JSON of one copy's lineage: every step applied,
// each entry at most 512 bytes, a cutout's rectangles at most 160 bytes each.
func lineageBytes(p *Plan) int {
	n := 1024
	var walk func(steps []Step)
	walk = func(steps []Step) {
		for i := range steps {
			s := &steps[i]
			n += 512
			if s.Count != nil {
				n += 160 * max(s.Count.Max, 0)
			}
			walk(s.From)
		}
	}
	walk(p.Geometry.Moves)
	walk(p.Pixels)
	return n
}

// checkComplete is called when --resume finds dataset.json in the output:
// the folder counts as this run's finished output only if dataset.json reads,
// describes an augmentation with this plan, seed, copies, splits and input,
// and its manifest is the one it names (SHA-256 and record count).
// Anything else is refused rather than declared complete.
func (in *input) checkComplete(o RunOptions) error {
	refuse := func(why string, args ...any) error {
		return &ResumeError{fmt.Errorf("%s has %s, but %s; it is not a finished run of this augment: check it with trueset verify, or start again with --force",
			o.Out, manifest.DatasetFile, fmt.Sprintf(why, args...))}
	}
	d, err := manifest.ReadDataset(o.Out)
	if err != nil {
		return refuse("it cannot be read (%v)", err)
	}
	a := d.Augment
	plan := sha256.Sum256(o.Plan.JSON())
	switch {
	case a == nil:
		return refuse("it describes no augmentation")
	case a.PlanSHA256 != hex.EncodeToString(plan[:]):
		return refuse("it was made with another plan")
	case a.Seed != o.Seed || a.Copies != o.Copies || !slices.Equal(a.Splits, o.Splits) || a.Source != in.kind || a.AllowedChanges != o.AllowLabelChange ||
		a.AcceptStale != (o.AcceptStale && len(in.undeclared) > 0):
		return refuse("it was made with other options (seed %d, copies %d, splits %v)", a.Seed, a.Copies, a.Splits)
	case in.base != nil && a.SourceSHA256 != in.base.ManifestSHA256:
		return refuse("it was made from another input")
	}
	f, err := safefile.Open(filepath.Join(o.Out, manifest.ManifestFile))
	if err != nil {
		return refuse("its manifest cannot be read (%v)", safefile.Msg(err))
	}
	defer f.Close()
	h := sha256.New()
	lines := 0
	br := bufio.NewReaderSize(io.TeeReader(f, h), 1<<16)
	for {
		b, err := br.ReadSlice('\n')
		if len(b) > 0 && err == nil {
			lines++
		}
		if err == bufio.ErrBufferFull {
			continue
		}
		if err != nil {
			break
		}
	}
	if got := hex.EncodeToString(h.Sum(nil)); got != d.ManifestSHA256 || lines != d.Count {
		return refuse("its manifest (%d records, SHA-256 %s) is not the one it names (%d records, SHA-256 %s)", lines, got, d.Count, d.ManifestSHA256)
	}
	return nil
}

// readPlain reads a plain labeled folder one source at a time, keeping only
// each source's record and file checksums (produce reads it again), and
// deals its sources (each its own group) to splits.
func readPlain(o RunOptions) (*input, error) {
	type kept struct {
		src  *Source
		ps   *plainSource
		w, h int
	}
	var srcs []kept
	f, err := scanFolder(o.In, o.MaxPixels, o.OnError == "skip", func(s *Source, files folderSourceFiles) error {
		ps := &plainSource{files: files, sum: s.sum, targets: s.Targets, channels: s.Image.C}
		w, h := s.Image.W, s.Image.H
		// Only the labels stay in memory.
		s.Image, s.Mask, s.Instances = nil, nil, nil
		srcs = append(srcs, kept{s, ps, w, h})
		return nil
	})
	if err != nil {
		return nil, &InputError{err}
	}
	spec := o.SplitSpec
	if spec == "" {
		spec = manifest.DefaultSplits
	}
	sp, err := manifest.ParseSplits(spec)
	if err != nil {
		return nil, err
	}
	classes := append([]manifest.Class(nil), f.Classes...)
	for i := range classes {
		if inv, ok := f.Invariance[classes[i].ID]; ok {
			flip := inv.Flip
			classes[i].Flip = &flip
			if inv.MaxRotate >= 0 {
				r := inv.MaxRotate
				classes[i].MaxRotate = &r
			}
		}
	}
	in := &input{kind: "plain", dir: o.In, classes: classes, targets: append([]string(nil), f.TargetNames...), seed: o.Seed, skipped: f.Skipped, maxPixels: o.MaxPixels, folder: f}
	taken := map[string]bool{}
	// Declared derived columns are targets computed from the masks; image
	// columns are carried as is; the rest are undeclared.
	cols := f.Columns
	for _, n := range f.TargetNames {
		switch {
		case cols != nil && cols.Columns[n].Derived():
			taken[n] = true
			in.defs = append(in.defs, cols.def(n))
		case cols != nil && cols.Columns[n].Kind == "image":
			taken[n] = true
			in.imageCols = append(in.imageCols, n)
		default:
			taken[n] = true
			in.undeclared = append(in.undeclared, n)
		}
	}
	if cols != nil {
		for _, n := range sortedKeys(cols.Columns) {
			if cols.Columns[n].Derived() && !taken[n] {
				taken[n] = true
				in.defs = append(in.defs, cols.def(n))
				in.targets = append(in.targets, n)
			}
		}
	}
	// Counts computed from the masks, so copies that lose objects stay true.
	addDef := func(d manifest.TargetDef) {
		if !taken[d.Name] {
			taken[d.Name] = true
			in.defs = append(in.defs, d)
			in.targets = append(in.targets, d.Name)
		}
	}
	addDef(manifest.TargetDef{Name: "objects", Kind: "count"})
	for _, c := range classes {
		if c.ID != 0 {
			addDef(manifest.TargetDef{Name: "count_" + c.Name, Kind: "count", Classes: []string{c.Name}})
		}
	}
	if err := manifest.CheckStratify(o.Stratify, manifest.ClassNames(classes), in.targets); err != nil {
		return nil, err
	}
	keys := make([]string, len(srcs))
	for i, k := range srcs {
		s := k.src
		for j := range s.Objects {
			s.Objects[j].ClassName = f.names[s.Objects[j].Class]
			s.Objects[j].Glyph = cols.glyph(s.Objects[j].ClassName)
		}
		rec := manifest.Record{ID: s.ID, Group: s.ID, Width: k.w, Height: k.h, Objects: s.Objects, Targets: map[string]manifest.Value{}}
		for k, v := range s.Targets {
			rec.Targets[k] = v
		}
		rec.Targets = recompute(in.defs, rec.Objects, rec.Targets)
		key, err := manifest.StratumOf(&rec, o.Stratify)
		if err != nil {
			return nil, err
		}
		keys[i] = key
		rec.Stratum = key
		in.srcs = append(in.srcs, source{rec: rec, plain: k.ps, where: k.ps.files.image})
	}
	a, err := manifest.AllocateStrata(o.Seed, keys, sp)
	if err != nil {
		return nil, err
	}
	for i := range in.srcs {
		in.srcs[i].rec.Split = sp.Names[a.Split[i]]
	}
	in.splits = manifest.SplitTable{Names: sp.Names, Spec: sp.String(), Ratios: map[string]float64{}, Stratify: o.Stratify, Strata: a.Table, Thin: a.Thin}
	for i, n := range sp.Names {
		in.splits.Ratios[n] = manifest.Round(sp.Ratios[i], 6)
	}
	return in, nil
}

// CheckInvariance refuses, before any work, a plan that would break a
// class's declared invariance: a flip step for a class that does not keep its
// label under flips, a turn beyond a class's max_rotate, or a flip or an
// upside-down turn of samples whose targets read text. Turns compose, so the
// bound is on the worst-case sum of every turn so far (of a pick, its
// widest child), not on each move alone. Only geometry.moves can turn or
// mirror.
func CheckInvariance(p *Plan, classes []manifest.Class, defs []manifest.TargetDef) error {
	reads := ""
	for _, d := range defs {
		if d.Kind == "text" || d.Kind == "number" {
			reads = d.Name
		}
	}
	// step checks one step given the worst turn acc of the steps before it
	// and returns the worst turn after it.
	var step func(s *Step, sp string, acc float64) (float64, error)
	step = func(s *Step, sp string, acc float64) (float64, error) {
		if *s.Chance == 0 {
			return acc, nil
		}
		switch s.Do {
		case "pick":
			worst := acc
			for j := range s.From {
				a, err := step(&s.From[j], fmt.Sprintf("%s.from[%d]", sp, j), acc)
				if err != nil {
					return 0, err
				}
				worst = math.Max(worst, a)
			}
			return worst, nil
		case "flip":
			for _, c := range classes {
				if c.Flip != nil && !*c.Flip {
					return 0, usageErrorf("plan %s (flip %s) would mirror class %q, whose label does not survive a flip (dataset classes: flip false); remove the step or pass --allow-label-change", sp, s.Axis, c.Name)
				}
			}
			if reads != "" {
				return 0, usageErrorf("plan %s (flip %s) would mirror samples whose target %q reads text; remove the step or pass --allow-label-change", sp, s.Axis, reads)
			}
		case "rotate", "warp":
			turn := 0.0
			if s.Angle != nil {
				turn = math.Max(math.Abs(s.Angle.Min), math.Abs(s.Angle.Max))
			}
			if s.Slant != nil {
				turn = math.Max(turn, math.Max(math.Abs(s.Slant.Min), math.Abs(s.Slant.Max)))
			}
			total := acc + turn
			also := ""
			if acc > 0 && turn > 0 {
				also = fmt.Sprintf(", %s° with the turns before it", fmtDeg(total))
			}
			for _, c := range classes {
				if c.MaxRotate != nil && total > *c.MaxRotate {
					return 0, usageErrorf("plan %s (%s up to %s°%s) turns class %q beyond the %s° that keep its label; narrow the range or pass --allow-label-change", sp, s.Do, fmtDeg(turn), also, c.Name, fmtDeg(*c.MaxRotate))
				}
			}
			if reads != "" && total > 90 {
				return 0, usageErrorf("plan %s (%s up to %s°%s) could turn samples whose target %q reads text upside down; keep turns within ±90° or pass --allow-label-change", sp, s.Do, fmtDeg(turn), also, reads)
			}
			return total, nil
		}
		return acc, nil
	}
	acc := 0.0
	for i := range p.Geometry.Moves {
		var err error
		if acc, err = step(&p.Geometry.Moves[i], fmt.Sprintf("geometry.moves[%d]", i), acc); err != nil {
			return err
		}
	}
	return nil
}

func fmtDeg(f float64) string { return fmt.Sprintf("%g", manifest.Round(f, 3)) }
