package manifest

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/png"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
)

// Problem is one discrepancy found by Verify: the record (ID, "" for
// dataset-wide problems), the file it is in (relative to the dataset folder:
// a sample file, dataset.json or manifest.jsonl), the kind of check that
// failed (one of ProblemKinds) and a message.
type Problem struct {
	ID    string
	File  string
	Check string
	Msg   string
}

// The kinds of check a Problem names (its Check). They are stable: scripts may match
// them.
const (
	KindIncomplete  = "incomplete"   // dataset.json is missing: the folder is not a complete dataset
	KindFormat      = "format"       // a file cannot be parsed: dataset.json, manifest.jsonl, a PNG, or a PNG of the wrong kind
	KindMissing     = "missing"      // a file a record names does not exist or cannot be read
	KindPath        = "path"         // a record path leaves the dataset folder
	KindSHA256      = "sha256"       // a file's SHA-256 differs from the one recorded
	KindSize        = "size"         // an image's width and height differ from the record's, or exceed verify's budget
	KindInstance    = "instance"     // the record's objects and the instance mask's ids disagree
	KindBox         = "box"          // an object's box differs from its mask pixels' box
	KindArea        = "area"         // an object's area differs from its mask pixel count
	KindClassPixels = "class-pixels" // semantic mask pixels disagree with their instance's class
	KindTarget      = "target"       // a count target differs from the objects in the instance mask
	KindDuplicateID = "duplicate-id" // two records share an id
	KindSplit       = "split"        // a record's split is unknown, or not the one the seeded allocation gives
	KindSplitTable  = "split-table"  // record counts, split counts or the strata table disagree with dataset.json
	KindGroupLeak   = "group-leak"   // one group's records are in more than one split
)

// ProblemKinds lists every kind of check, in the order above.
var ProblemKinds = []string{KindIncomplete, KindFormat, KindMissing, KindPath, KindSHA256, KindSize, KindInstance,
	KindBox, KindArea, KindClassPixels, KindTarget, KindDuplicateID, KindSplit, KindSplitTable, KindGroupLeak}

func (p Problem) String() string {
	if p.ID == "" {
		return p.Msg
	}
	return "record " + p.ID + ": " + p.Msg
}

// Plural returns one when n is 1, else many: "1 problem", "2 problems".
func Plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// Verify checks a dataset folder and calls report for every discrepancy:
// dataset.json present (else the dataset is incomplete); the manifest's
// SHA-256; every path inside DIR and every file's SHA-256; records against
// the masks (instance ids, bbox, area, semantic class per pixel, count
// targets); splits and the strata table against dataset.json; groups that
// span splits; and, from the seed, split spec and strata in
// dataset.json, every record in the split the seeded allocation deals it to.
// It returns the number of records read.
func Verify(dir string, report func(Problem)) (int, error) {
	d, err := ReadDataset(dir)
	if err != nil {
		check := KindFormat
		if _, serr := os.Stat(filepath.Join(dir, DatasetFile)); errors.Is(serr, fs.ErrNotExist) {
			check = KindIncomplete
		}
		report(Problem{File: DatasetFile, Check: check, Msg: err.Error()})
		return 0, nil
	}
	mpath := filepath.Join(dir, ManifestFile)
	mb, err := os.ReadFile(mpath)
	if err != nil {
		report(Problem{File: ManifestFile, Check: KindMissing, Msg: fmt.Sprintf("%s: %v", mpath, err)})
		return 0, nil
	}
	if got := SHA256Hex(mb); got != d.ManifestSHA256 {
		report(Problem{File: ManifestFile, Check: KindSHA256, Msg: fmt.Sprintf("%s: SHA-256 %s, dataset.json says %s", ManifestFile, got, d.ManifestSHA256)})
	}
	defs := d.TargetDefs
	classByName := map[string]int{}
	for _, c := range d.Classes {
		classByName[c.Name] = c.ID
	}
	splitOK := map[string]bool{}
	for _, n := range d.Splits.Names {
		splitOK[n] = true
	}
	groupSplit := map[string]string{}
	// For naming records that sit in another split than the seeded
	// allocation puts them: each group's index and stratum (of its first
	// record), and each record's group.
	groupIdx := map[string]int{}
	var groupKeys []string
	type placed struct {
		id, split string
		group     int
	}
	var placedRecs []placed
	spans := false
	counts := map[string]int{}
	strata := map[string]map[string]int{} // stratum → split → groups
	stratumGroups := map[string]bool{}
	n := 0
	seen := map[string]bool{}
	err = DecodeManifest(bytes.NewReader(mb), mpath, func(r *Record) error {
		n++
		bad := func(check, file, format string, args ...any) {
			report(Problem{ID: r.ID, File: file, Check: check, Msg: fmt.Sprintf(format, args...)})
		}
		if seen[r.ID] {
			bad(KindDuplicateID, ManifestFile, "duplicate id")
		}
		seen[r.ID] = true
		if !splitOK[r.Split] {
			bad(KindSplit, ManifestFile, "split %q is not one of dataset.json's (%s)", r.Split, strings.Join(d.Splits.Names, ", "))
		}
		counts[r.Split]++
		g, ok := groupIdx[r.Group]
		if !ok {
			g = len(groupKeys)
			groupIdx[r.Group] = g
			groupKeys = append(groupKeys, r.Stratum)
		}
		placedRecs = append(placedRecs, placed{r.ID, r.Split, g})
		if s, ok := groupSplit[r.Group]; ok && s != r.Split {
			spans = true
			bad(KindGroupLeak, ManifestFile, "group %q spans splits %s and %s", r.Group, s, r.Split)
		} else if !ok {
			groupSplit[r.Group] = r.Split
			if strata[r.Stratum] == nil {
				strata[r.Stratum] = map[string]int{}
			}
			strata[r.Stratum][r.Split]++
			stratumGroups[r.Group] = true
		}
		verifyRecord(dir, d, r, defs, classByName, bad)
		return nil
	})
	if err != nil {
		report(Problem{File: ManifestFile, Check: KindFormat, Msg: err.Error()})
	}
	if n != d.Count {
		report(Problem{File: ManifestFile, Check: KindSplitTable, Msg: fmt.Sprintf("manifest has %d %s, dataset.json says %d", n, Plural(n, "record", "records"), d.Count)})
	}
	// The split is a function of the seed, the splits and the groups' strata
	// (AllocateStrata, as generate and split deal it): name every record
	// that is elsewhere. Skipped when the records are incomplete or a group
	// spans splits, where the allocation cannot be recomputed meaningfully.
	// An augmented set that skipped bad sources lacks their groups, so its
	// split is the source's allocation minus them and cannot be recomputed.
	skipped := d.Augment != nil && len(d.Augment.Skipped) > 0
	if sp, perr := ParseSplits(d.Splits.Spec); err == nil && perr == nil && n == d.Count && !spans && !skipped && slices.Equal(sp.Names, d.Splits.Names) {
		if a, aerr := AllocateStrata(d.Seed, groupKeys, sp); aerr == nil {
			for _, p := range placedRecs {
				if want := sp.Names[a.Split[p.group]]; splitOK[p.split] && p.split != want {
					report(Problem{ID: p.id, File: ManifestFile, Check: KindSplit, Msg: fmt.Sprintf("is in split %s, but seed %d's allocation (split %s, stratified by %q) puts it in split %s", p.split, d.Seed, d.Splits.Spec, d.Splits.Stratify, want)})
				}
			}
		}
	}
	for _, s := range d.Splits.Names {
		if counts[s] != d.Splits.Counts[s] {
			report(Problem{File: DatasetFile, Check: KindSplitTable, Msg: fmt.Sprintf("split %s has %d %s, dataset.json says %d", s, counts[s], Plural(counts[s], "record", "records"), d.Splits.Counts[s])})
		}
	}
	declared := map[string]bool{}
	for _, st := range d.Splits.Strata {
		declared[st.Key] = true
		for _, s := range d.Splits.Names {
			if got := strata[st.Key][s]; got != st.Splits[s] {
				report(Problem{File: DatasetFile, Check: KindSplitTable, Msg: fmt.Sprintf("stratum %q in split %s has %d %s, dataset.json says %d", st.Key, s, got, Plural(got, "group", "groups"), st.Splits[s])})
			}
		}
	}
	keys := make([]string, 0, len(strata))
	for k := range strata {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if !declared[k] {
			report(Problem{File: DatasetFile, Check: KindSplitTable, Msg: fmt.Sprintf("stratum %q is not in dataset.json's table", k)})
		}
	}
	return n, nil
}

// MaxVerifyPixels bounds one image verify decodes (width × height).
const MaxVerifyPixels = 64 << 20

func decodePNG(dir, rel string, want string, w, h int, bad func(check, file, format string, args ...any)) image.Image {
	p, err := ResolveInside(dir, rel)
	if err != nil {
		bad(KindPath, ManifestFile, "%s: %v", want, err)
		return nil
	}
	b, err := os.ReadFile(p)
	if err != nil {
		bad(KindMissing, rel, "%s: %v", rel, err)
		return nil
	}
	cfg, err := png.DecodeConfig(bytes.NewReader(b))
	if err != nil {
		bad(KindFormat, rel, "%s: not a readable PNG: %v", rel, err)
		return nil
	}
	if cfg.Width != w || cfg.Height != h {
		bad(KindSize, rel, "%s is %dx%d, the record says %dx%d", rel, cfg.Width, cfg.Height, w, h)
		return nil
	}
	if int64(w)*int64(h) > MaxVerifyPixels {
		bad(KindSize, rel, "%s: %dx%d is over verify's budget of %d pixels", rel, w, h, MaxVerifyPixels)
		return nil
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		bad(KindFormat, rel, "%s: not a readable PNG: %v", rel, err)
		return nil
	}
	return m
}

func verifyRecord(dir string, d *Dataset, r *Record, targets []TargetDef, classByName map[string]int, bad func(check, file, format string, args ...any)) {
	for _, f := range [][2]string{{"image", r.Image}, {"mask", r.Mask}, {"instances", r.Instances}} {
		key, rel := f[0], f[1]
		if !SafeRel(rel) {
			continue // reported when decoded
		}
		p, err := ResolveInside(dir, rel)
		if err != nil {
			continue // reported when decoded
		}
		b, err := os.ReadFile(p)
		if err != nil {
			continue // reported when decoded
		}
		if got := SHA256Hex(b); got != r.SHA256[key] {
			bad(KindSHA256, rel, "%s: SHA-256 %s, record says %s", rel, got, r.SHA256[key])
		}
	}
	img := decodePNG(dir, r.Image, "image", r.Width, r.Height, bad)
	mk := decodePNG(dir, r.Mask, "mask", r.Width, r.Height, bad)
	in := decodePNG(dir, r.Instances, "instances", r.Width, r.Height, bad)
	want := image.Rect(0, 0, r.Width, r.Height)
	for i, m := range []image.Image{img, mk, in} {
		if m != nil && m.Bounds() != want {
			rel := []string{r.Image, r.Mask, r.Instances}[i]
			bad(KindSize, rel, "%s is %dx%d, record says %dx%d", rel, m.Bounds().Dx(), m.Bounds().Dy(), r.Width, r.Height)
			return
		}
	}
	mask, ok1 := mk.(*image.Paletted)
	inst, ok2 := in.(*image.Gray16)
	if mk != nil && !ok1 {
		bad(KindFormat, r.Mask, "%s: semantic mask is not an indexed PNG", r.Mask)
	}
	if in != nil && !ok2 {
		bad(KindFormat, r.Instances, "%s: instance mask is not a 16-bit gray PNG", r.Instances)
	}
	if !ok1 || !ok2 {
		return
	}
	stats := MeasureInstances(inst)
	byID := map[int]*Object{}
	for i := range r.Objects {
		o := &r.Objects[i]
		byID[o.Instance] = o
		st := stats[o.Instance]
		if st == nil {
			bad(KindInstance, r.Instances, "object %d is in the record but not in the instance mask", o.Instance)
			continue
		}
		if st.BBox != o.Box {
			bad(KindBox, r.Instances, "object %d: box %v in the record, %v in the instance mask", o.Instance, o.Box, st.BBox)
		}
		if st.Area != o.Area {
			bad(KindArea, r.Instances, "object %d: area %d in the record, %d in the instance mask", o.Instance, o.Area, st.Area)
		}
	}
	ids := make([]int, 0, len(stats))
	for id := range stats {
		ids = append(ids, id)
	}
	sort.Ints(ids)
	for _, id := range ids {
		if byID[id] == nil {
			bad(KindInstance, r.Instances, "instance %d is in the instance mask but not in the record", id)
		}
	}
	// Every pixel's class is its instance's class; no instance means
	// background or the ignore id.
	mismatch := 0
	b := want
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			id := int(inst.Gray16At(x, y).Y)
			cls := int(mask.ColorIndexAt(x, y))
			wantCls := 0
			if o := byID[id]; o != nil {
				wantCls = o.Class
			} else if id != 0 {
				continue
			}
			if cls != wantCls && !(id == 0 && cls == IgnoreID) {
				if mismatch == 0 {
					bad(KindClassPixels, r.Mask, "%s: pixel (%d, %d) has class %d, its instance %d is class %d", r.Mask, x, y, cls, id, wantCls)
				}
				mismatch++
			}
		}
	}
	if mismatch > 1 {
		bad(KindClassPixels, r.Mask, "%s: %d pixels in all disagree with the instance mask", r.Mask, mismatch)
	}
	for _, t := range targets {
		if t.Kind != "count" {
			continue
		}
		want := map[int]bool{}
		for _, c := range t.Classes {
			want[classByName[c]] = true
		}
		n := 0
		for _, id := range ids {
			if o := byID[id]; o != nil && (len(t.Classes) == 0 || want[o.Class]) {
				n++
			}
		}
		v, ok := r.Targets[t.Name]
		if !ok || v.IsStr || int(v.Num) != n || v.Num != float64(int(v.Num)) {
			bad(KindTarget, ManifestFile, "target %s is %v, the instance mask holds %d such %s", t.Name, v, n, Plural(n, "object", "objects"))
		}
	}
}
