package augment

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"time"

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
	MaxPixels        int         // pixel budget per input image; default DefaultMaxPixels
	SplitSpec        string      // plain folders only: how sources are dealt to splits
	Stratify         string      // plain folders only: stratification key
	OnError          string      // "fail" (default): a bad source stops the run; "skip": it is left out and listed
	Resume           bool        // continue an interrupted run of the same input, plan, seed and options in Out
	FS               manifest.FS // nil = the real file system
	Version          string
	Progress         func(done, total int)
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
}

// source is one input sample: its record, and how to get its pixels and
// (for trueset input) its original file bytes.
type source struct {
	rec   manifest.Record
	plain *Source
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
	if o.MaxPixels <= 0 {
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
	if o.OnError == "skip" && in.kind == "trueset" {
		in.dropBadSources(o.MaxPixels)
	}
	augmented := map[string]bool{}
	known := map[string]bool{}
	for _, n := range in.splits.Names {
		known[n] = true
	}
	for _, s := range o.Splits {
		if !known[s] {
			return Summary{}, fmt.Errorf("--split %s: the input has splits %v", s, in.splits.Names)
		}
		augmented[s] = true
	}
	if !o.AllowLabelChange {
		if err := CheckInvariance(o.Plan, in.classes, in.defs); err != nil {
			return Summary{}, err
		}
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
	digits := len(fmt.Sprint(max(o.Copies, 1)))
	if digits < 2 {
		digits = 2
	}

	marker, err := in.marker(o)
	if err != nil {
		return Summary{}, err
	}
	co := manifest.CreateOptions{Force: o.Force, FS: o.FS, Marker: marker}
	var w *manifest.Writer
	startJob, resumed := 0, 0
	if o.Resume {
		w, resumed, err = manifest.Resume(o.Out, co, func(n int) int {
			// Keep whole sources only: the last job may be half appended.
			for startJob < len(in.srcs) && first[startJob+1] <= n {
				startJob++
			}
			return first[startJob]
		})
	} else {
		w, err = manifest.CreateWith(o.Out, co)
	}
	if err != nil {
		return Summary{}, err
	}
	counts := map[string]int{}
	for i, s := range in.srcs {
		counts[s.rec.Split] += first[i+1] - first[i]
	}
	newProduce := func() manifest.Produce {
		enc := manifest.NewEncoder()
		return func(i int) ([]*manifest.Record, int64, error) {
			return in.produce(i, first[i], first[i+1]-first[i]-1, digits, o, enc, w)
		}
	}
	done, bytesOut, err := manifest.RunOrdered(ctx, startJob, len(in.srcs), o.Workers, newProduce, w, o.Progress)
	done += startJob
	sum := Summary{Sources: done, Records: first[done], Copies: first[done] - done, Bytes: bytesOut, Resumed: resumed, Skipped: in.skipped}
	if err != nil {
		w.Abort()
		sum.Elapsed = time.Since(start)
		return sum, err
	}
	d := in.dataset(o, total, counts)
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
// those hold the files' checksums; for a plain folder the pixels are hashed).
func (in *input) marker(o RunOptions) ([]byte, error) {
	h := sha256.New()
	for _, s := range in.srcs {
		b, err := manifest.MarshalRecord(&s.rec)
		if err != nil {
			return nil, err
		}
		h.Write(b)
		if p := s.plain; p != nil {
			for _, v := range p.Image.Pix {
				h.Write([]byte{byte(math.Float32bits(v)), byte(math.Float32bits(v) >> 8), byte(math.Float32bits(v) >> 16), byte(math.Float32bits(v) >> 24)})
			}
			h.Write(p.Mask.Pix)
			h.Write(p.Instances.Pix)
		}
	}
	plan := sha256.Sum256(o.Plan.JSON())
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
	}{"augment", o.Version, hex.EncodeToString(plan[:]), hex.EncodeToString(h.Sum(nil)), o.Seed, o.Copies, o.Splits, o.OnError, o.AllowLabelChange})
}

// dropBadSources leaves out, and lists, the trueset sources whose files are
// missing, altered or undecodable, so a bad source costs only itself.
func (in *input) dropBadSources(maxPixels int) {
	kept := in.srcs[:0]
	for _, s := range in.srcs {
		if err := in.checkSource(&s.rec, maxPixels); err != nil {
			in.skipped = append(in.skipped, err.Error())
			continue
		}
		kept = append(kept, s)
	}
	in.srcs = kept
}

func (in *input) checkSource(rec *manifest.Record, maxPixels int) error {
	for _, f := range [][2]string{{"image", rec.Image}, {"mask", rec.Mask}, {"instances", rec.Instances}} {
		p, err := in.safePath(f[1])
		if err != nil {
			return fmt.Errorf("record %s: %w", rec.ID, err)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return fmt.Errorf("record %s: %w", rec.ID, err)
		}
		if got := manifest.SHA256Hex(b); got != rec.SHA256[f[0]] {
			return fmt.Errorf("record %s: %s: SHA-256 %s, the record says %s", rec.ID, p, got, rec.SHA256[f[0]])
		}
		cfg, err := png.DecodeConfig(bytes.NewReader(b))
		if err != nil {
			return fmt.Errorf("record %s: %s: %v", rec.ID, p, err)
		}
		if int64(cfg.Width)*int64(cfg.Height) > int64(maxPixels) {
			return fmt.Errorf("record %s: %s: %d×%d pixels is over the budget of %d", rec.ID, p, cfg.Width, cfg.Height, maxPixels)
		}
	}
	return nil
}

// safePath resolves a record path inside the input folder, refusing paths
// that leave it, symbolic links included.
func (in *input) safePath(rel string) (string, error) {
	return manifest.ResolveInside(in.dir, rel)
}

// dataset builds the output dataset.json.
func (in *input) dataset(o RunOptions, total int, counts map[string]int) *manifest.Dataset {
	sum := sha256.Sum256(o.Plan.JSON())
	info := &manifest.AugmentInfo{
		Plan: o.Plan.JSON(), PlanSHA256: hex.EncodeToString(sum[:]), Seed: o.Seed, Copies: o.Copies,
		Splits: o.Splits, Source: in.kind, SourceSamples: len(in.srcs), AllowedChanges: o.AllowLabelChange,
		Skipped: in.skipped,
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
		s := in.srcs[0].plain
		d.Width, d.Height, d.Mode = s.Image.W, s.Image.H, modeOf(s.Image)
		for _, o := range in.srcs[1:] {
			if o.plain.Image.W != d.Width || o.plain.Image.H != d.Height {
				d.Width, d.Height = 0, 0
			}
			if modeOf(o.plain.Image) != d.Mode {
				d.Mode = "mixed"
			}
		}
	}
	return d
}

// produce writes source i's original and its copies.
func (in *input) produce(i, index, copies, digits int, o RunOptions, enc *manifest.Encoder, w *manifest.Writer) ([]*manifest.Record, int64, error) {
	s := in.srcs[i]
	orig := s.rec
	orig.Index = index
	var n int64
	var src *Input
	var err error
	if in.kind == "trueset" {
		n, err = in.copyOriginal(&orig, w)
		if err == nil && copies > 0 {
			src, err = in.loadTrueset(&s.rec)
		}
	} else {
		src = &Input{Record: orig, Image: s.plain.Image, Mask: s.plain.Mask, Inst: s.plain.Instances}
		n, err = w.WriteFiles(&orig, enc, s.plain.Image.ToImage(), s.plain.Mask, s.plain.Instances)
	}
	if err != nil {
		return nil, n, err
	}
	recs := []*manifest.Record{&orig}
	for k := 1; k <= copies; k++ {
		out, err := o.Plan.Copy(src, o.Seed, i, k, in.defs)
		if err != nil {
			return nil, n, err
		}
		rec := &out.Record
		rec.ID = fmt.Sprintf("%s-c%0*d", s.rec.ID, digits, k)
		rec.Index = index + k
		m, err := w.WriteFiles(rec, enc, out.Image, out.Mask, out.Inst)
		n += m
		if err != nil {
			return nil, n, err
		}
		recs = append(recs, rec)
	}
	return recs, n, nil
}

// copyOriginal carries a trueset sample over byte for byte.
func (in *input) copyOriginal(rec *manifest.Record, w *manifest.Writer) (int64, error) {
	var n int64
	for _, f := range [][2]string{{"image", rec.Image}, {"mask", rec.Mask}, {"instances", rec.Instances}} {
		p, err := in.safePath(f[1])
		if err != nil {
			return n, fmt.Errorf("record %s: %w", rec.ID, err)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return n, err
		}
		if got := manifest.SHA256Hex(b); got != rec.SHA256[f[0]] {
			return n, fmt.Errorf("%s: SHA-256 %s, the record says %s; run trueset verify on the input", p, got, rec.SHA256[f[0]])
		}
		if err := w.WriteRaw(f[1], b); err != nil {
			return n, err
		}
		n += int64(len(b))
	}
	return n, nil
}

func decodeFile(p string, maxPixels int) (image.Image, error) {
	b, err := os.ReadFile(p)
	if err != nil {
		return nil, err
	}
	cfg, err := png.DecodeConfig(bytes.NewReader(b))
	if err != nil {
		return nil, fmt.Errorf("%s: %v", p, err)
	}
	if int64(cfg.Width)*int64(cfg.Height) > int64(maxPixels) {
		return nil, fmt.Errorf("%s: %d×%d pixels is over the budget of %d", p, cfg.Width, cfg.Height, maxPixels)
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		return nil, fmt.Errorf("%s: %v", p, err)
	}
	return m, nil
}

// loadTrueset decodes a trueset sample's three PNGs.
func (in *input) loadTrueset(rec *manifest.Record) (*Input, error) {
	var ims [3]image.Image
	for i, rel := range []string{rec.Image, rec.Mask, rec.Instances} {
		p, err := in.safePath(rel)
		if err != nil {
			return nil, fmt.Errorf("record %s: %w", rec.ID, err)
		}
		if ims[i], err = decodeFile(p, in.maxPixels); err != nil {
			return nil, err
		}
	}
	img, mk, ins := ims[0], ims[1], ims[2]
	mask, ok1 := mk.(*image.Paletted)
	inst, ok2 := ins.(*image.Gray16)
	if !ok1 || !ok2 {
		return nil, fmt.Errorf("record %s: masks are not an indexed PNG and a 16-bit gray PNG", rec.ID)
	}
	if mask.Rect != img.Bounds() || inst.Rect != img.Bounds() {
		return nil, fmt.Errorf("record %s: image and masks differ in size", rec.ID)
	}
	return &Input{Record: *rec, Image: FromImage(img), Mask: mask, Inst: inst}, nil
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

func readTrueset(o RunOptions) (*input, error) {
	d, err := manifest.ReadDataset(o.In)
	if err != nil {
		return nil, err
	}
	in := &input{kind: "trueset", dir: o.In, base: d, classes: d.Classes, defs: d.TargetDefs, targets: d.Targets, splits: d.Splits, seed: d.Seed, maxPixels: o.MaxPixels}
	err = manifest.ReadManifest(o.In, func(r *manifest.Record) error {
		if r.Lineage != nil {
			return fmt.Errorf("record %s is itself an augmented copy; augment the original dataset instead", r.ID)
		}
		in.srcs = append(in.srcs, source{rec: *r})
		return nil
	})
	return in, err
}

// readPlain reads a plain labeled folder and deals its sources (each its own
// group) to splits.
func readPlain(o RunOptions) (*input, error) {
	f, err := ReadFolderSkipping(o.In, o.MaxPixels, o.OnError == "skip")
	if err != nil {
		return nil, err
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
	in := &input{kind: "plain", dir: o.In, classes: classes, targets: append([]string(nil), f.TargetNames...), seed: o.Seed, skipped: f.Skipped, maxPixels: o.MaxPixels}
	taken := map[string]bool{}
	for _, n := range f.TargetNames {
		taken[n] = true
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
	keys := make([]string, len(f.Sources))
	for i, s := range f.Sources {
		rec := manifest.Record{ID: s.ID, Group: s.ID, Width: s.Image.W, Height: s.Image.H, Objects: s.Objects, Targets: map[string]manifest.Value{}}
		for k, v := range s.Targets {
			rec.Targets[k] = v
		}
		rec.Targets = recompute(in.defs, rec.Objects, rec.Targets)
		k, err := manifest.StratumOf(&rec, o.Stratify)
		if err != nil {
			return nil, err
		}
		keys[i] = k
		rec.Stratum = k
		in.srcs = append(in.srcs, source{rec: rec, plain: s})
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
					return 0, fmt.Errorf("plan %s (flip %s) would mirror class %q, whose label does not survive a flip (dataset classes: flip false); remove the step or pass --allow-label-change", sp, s.Axis, c.Name)
				}
			}
			if reads != "" {
				return 0, fmt.Errorf("plan %s (flip %s) would mirror samples whose target %q reads text; remove the step or pass --allow-label-change", sp, s.Axis, reads)
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
					return 0, fmt.Errorf("plan %s (%s up to %s°%s) turns class %q beyond the %s° that keep its label; narrow the range or pass --allow-label-change", sp, s.Do, fmtDeg(turn), also, c.Name, fmtDeg(*c.MaxRotate))
				}
			}
			if reads != "" && total > 90 {
				return 0, fmt.Errorf("plan %s (%s up to %s°%s) could turn samples whose target %q reads text upside down; keep turns within ±90° or pass --allow-label-change", sp, s.Do, fmtDeg(turn), also, reads)
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

func modeOf(m *Image) string {
	if m.C == 3 {
		return "rgb"
	}
	return "gray"
}
