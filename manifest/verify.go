package manifest

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"unicode"
	"unicode/utf8"

	"github.com/trueset/trueset/internal/pngread"
	"github.com/trueset/trueset/internal/safefile"
)

// Problem is one discrepancy found by Verify: the record (ID, "" for
// dataset-wide problems and for records whose id is itself unsafe), the file
// it is in (relative to the dataset folder: a sample file, dataset.json or
// manifest.jsonl), the kind of check that failed (one of ProblemKinds) and a
// message.
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
	KindFormat      = "format"       // a file cannot be parsed (dataset.json, its format field, a manifest line, a PNG), or a PNG is of the wrong kind
	KindMissing     = "missing"      // a file a record names does not exist, or is not a regular file that can be read
	KindPath        = "path"         // a record path leaves the dataset folder or its kind's folder, or a record id is not a safe file name
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
	KindClassTable  = "class-table"  // dataset.json's class table cannot describe 8-bit masks (ids, names)
	KindPack        = "pack"         // packed layout: a pack or packs/index.jsonl disagrees with dataset.json's layout, the manifest or the layout's rules
)

// ProblemKinds lists every kind of check, in the order above.
var ProblemKinds = []string{KindIncomplete, KindFormat, KindMissing, KindPath, KindSHA256, KindSize, KindInstance,
	KindBox, KindArea, KindClassPixels, KindTarget, KindDuplicateID, KindSplit, KindSplitTable, KindGroupLeak, KindClassTable, KindPack}

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

// MaxClassNameBytes bounds a class name in a class table verify accepts:
// the recipe's own bound (gen.MaxNameBytes), since every record repeats it.
const MaxClassNameBytes = 64

// CheckClassTable calls bad for every reason classes cannot be the class
// table of 8-bit semantic masks: an id outside 0..254 (the mask value 255
// is IgnoreID, "no label here", not a class), an id or a name listed twice,
// id 0 named anything but "background", a name that is empty, longer than
// MaxClassNameBytes, not UTF-8 or holding control characters, or a name
// with leading or trailing spaces.
func CheckClassTable(classes []Class, bad func(msg string)) {
	ids := map[int]int{}
	names := map[string]int{}
	for i, c := range classes {
		at := fmt.Sprintf("classes[%d] (id %d)", i, c.ID)
		switch {
		case c.ID == IgnoreID:
			bad(fmt.Sprintf("%s: id %d is the ignore value of the masks (\"no label here\"), not a class", at, IgnoreID))
		case c.ID < 0 || c.ID > IgnoreID:
			bad(fmt.Sprintf("%s: class ids are 0..%d, since semantic masks hold 8-bit values and %d means ignore", at, IgnoreID-1, IgnoreID))
		}
		if j, dup := ids[c.ID]; dup {
			bad(fmt.Sprintf("%s: id %d is listed twice (classes[%d] too)", at, c.ID, j))
		} else {
			ids[c.ID] = i
		}
		if c.ID == 0 && c.Name != "background" {
			bad(fmt.Sprintf("%s: id 0 is background, but it is named %.40q", at, c.Name))
		}
		switch {
		case c.Name == "":
			bad(fmt.Sprintf("%s: the name is empty", at))
		case len(c.Name) > MaxClassNameBytes:
			bad(fmt.Sprintf("%s: the name %.40q… is %d bytes; at most %d", at, c.Name, len(c.Name), MaxClassNameBytes))
		case !utf8.ValidString(c.Name):
			bad(fmt.Sprintf("%s: the name %q is not valid UTF-8", at, c.Name))
		case strings.IndexFunc(c.Name, unicode.IsControl) >= 0:
			bad(fmt.Sprintf("%s: the name %q holds a control character", at, c.Name))
		case strings.TrimSpace(c.Name) != c.Name:
			bad(fmt.Sprintf("%s: the name %q starts or ends with a space", at, c.Name))
		}
		if j, dup := names[c.Name]; dup && c.Name != "" {
			bad(fmt.Sprintf("%s: the name %.40q is listed twice (classes[%d] too)", at, c.Name, j))
		} else {
			names[c.Name] = i
		}
	}
}

// Verify checks a dataset folder and calls report for every discrepancy:
// dataset.json present (else the dataset is incomplete) and of this
// format; a class table that fits 8-bit masks; the manifest's SHA-256;
// every record id a safe file name and every path inside its kind's folder;
// every file's SHA-256; records against the masks (instance ids, bbox,
// area, semantic class per pixel, count targets); splits and the strata
// table against dataset.json; groups that span splits; and, from the seed,
// split spec and strata in dataset.json, every record in the split the
// seeded allocation deals it to. It returns the number of records read.
//
// manifest.jsonl is streamed, never held: per record Verify keeps nothing
// while ids and groups come in increasing order (as every trueset command
// writes them) but a few bytes per group (its stratum and split) for the
// allocation check. A manifest out of that order is read a second time for
// the duplicate-id and group checks, with a set of 16-byte id and group
// hashes. At most dataset.json's count of records is tracked; more is a
// split-table problem already. Sample files are read one record at a time,
// each through safefile, its header checked before it is decoded.
func Verify(dir string, report func(Problem)) (int, error) {
	d, err := ReadDataset(dir)
	if err != nil {
		check := KindFormat
		if _, serr := os.Lstat(filepath.Join(dir, DatasetFile)); errors.Is(serr, fs.ErrNotExist) {
			check = KindIncomplete
		}
		report(Problem{File: DatasetFile, Check: check, Msg: err.Error()})
		return 0, nil
	}
	CheckClassTable(d.Classes, func(msg string) {
		report(Problem{File: DatasetFile, Check: KindClassTable, Msg: DatasetFile + ": " + msg})
	})
	v := newVerifier(dir, d, report)
	return v.run()
}

// maxTrackedStrata bounds the distinct stratum keys verify keeps; past it
// the strata checks are given up (with a problem saying so).
const maxTrackedStrata = 1 << 16

// noSplit marks a group whose split is not one of dataset.json's.
const noSplit = 0xff

type verifier struct {
	dir    string
	d      *Dataset
	report func(Problem)
	mpath  string

	splitIdx     map[string]int
	counts       []int
	stratumID    map[string]int32
	stratumNames []string
	strataFull   bool // more distinct strata than maxTrackedStrata
	tracking     bool // per-group state is being kept (at most d.Count records, ≤ 254 splits)

	// Order seen so far: ids strictly increasing, groups in contiguous runs
	// of increasing keys. While both hold, nothing per record is kept.
	lastID, lastGroup string
	idBreak, grpBreak int // record number (1-based) where the order first broke; 0 = never
	grpStratum        []int32
	grpSplit          []uint8
	curSplit          string           // the current group's split (sorted mode)
	spans, broken     bool             // a group spans splits; a line could not be read
	overCount         bool             // more records than dataset.json's count: the rest is not tracked
	unknownSplit      map[int32]string // second pass: a group's first split when not one of dataset.json's
	classByName       map[string]int
	records, tracked  int

	// One PNG decoder per kind of record file (image, mask, instances),
	// reused from record to record: its inflater, rows, palette and image.
	decs [3]pngread.Decoder
}

func newVerifier(dir string, d *Dataset, report func(Problem)) *verifier {
	v := &verifier{dir: dir, d: d, report: report, mpath: filepath.Join(dir, ManifestFile),
		splitIdx: map[string]int{}, stratumID: map[string]int32{}, classByName: map[string]int{}}
	for i, n := range d.Splits.Names {
		v.splitIdx[n] = i
	}
	v.counts = make([]int, len(d.Splits.Names))
	v.tracking = len(d.Splits.Names) < noSplit
	if v.tracking && d.Count > 0 {
		// Room for every group up front (5 bytes each), so growing the
		// slices never holds two copies; capped, since the count is input.
		c := min(d.Count, 1<<22)
		v.grpStratum, v.grpSplit = make([]int32, 0, c), make([]uint8, 0, c)
	}
	if !v.tracking {
		report(Problem{File: DatasetFile, Check: KindSplitTable, Msg: fmt.Sprintf("%s: %d splits; verify checks at most %d", DatasetFile, len(d.Splits.Names), noSplit-1)})
	}
	for _, st := range d.Splits.Strata {
		v.stratum(st.Key)
	}
	for _, c := range d.Classes {
		v.classByName[c.Name] = c.ID
	}
	return v
}

// stratum interns a stratum key; -1 past maxTrackedStrata.
func (v *verifier) stratum(key string) int32 {
	if id, ok := v.stratumID[key]; ok {
		return id
	}
	if len(v.stratumNames) >= maxTrackedStrata {
		if !v.strataFull {
			v.strataFull = true
			v.report(Problem{File: ManifestFile, Check: KindSplitTable, Msg: fmt.Sprintf("%s: more than %d distinct strata; the strata table and the allocation are not checked", ManifestFile, maxTrackedStrata)})
		}
		return -1
	}
	id := int32(len(v.stratumNames))
	v.stratumID[key] = id
	v.stratumNames = append(v.stratumNames, key)
	return id
}

// lineReader reads lines of at most max bytes (newline and a trailing
// carriage return not counted, as bufio.ScanLines), skipping longer ones
// without holding them.
type lineReader struct {
	br  *bufio.Reader
	buf []byte
	max int
}

// next returns the next line, or over = true for a line longer than max
// (skipped), or io.EOF after the last line.
func (lr *lineReader) next() (line []byte, over bool, err error) {
	lr.buf = lr.buf[:0]
	any := false
	for {
		chunk, err := lr.br.ReadSlice('\n')
		if len(chunk) > 0 {
			any = true
		}
		if !over {
			if len(lr.buf)+len(chunk) > lr.max+2 {
				over = true
				lr.buf = lr.buf[:0]
			} else {
				lr.buf = append(lr.buf, chunk...)
			}
		}
		switch {
		case err == bufio.ErrBufferFull:
			continue
		case err == io.EOF && !any:
			return nil, false, io.EOF
		case err != nil && err != io.EOF:
			return nil, false, err
		}
		if over {
			return nil, true, nil
		}
		b := bytes.TrimSuffix(lr.buf, []byte("\n"))
		b = bytes.TrimSuffix(b, []byte("\r"))
		if len(b) > lr.max {
			return nil, true, nil
		}
		return b, false, nil
	}
}

// eachLine streams manifest.jsonl, calling fn with every line's number and
// bytes (nil for a line over MaxRecordBytes), and returns the file's
// SHA-256.
func (v *verifier) eachLine(fn func(no int, line []byte)) (string, error) {
	f, err := safefile.Open(v.mpath)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	lr := &lineReader{br: bufio.NewReaderSize(io.TeeReader(f, h), 64<<10), max: MaxRecordBytes}
	for no := 1; ; no++ {
		line, over, err := lr.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return "", &safefile.Error{Path: v.mpath, Msg: fmt.Sprintf("line %d: %v", no, err)}
		}
		if over {
			fn(no, nil)
			continue
		}
		fn(no, line)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// decodeRecordLine decodes one manifest line as DecodeManifest does,
// telling a line that is not a record (KindFormat) from a record whose id
// or paths are unsafe (KindPath). A blank line gives nil, "", nil.
func decodeRecordLine(line []byte) (*Record, string, error) {
	if len(bytes.TrimSpace(line)) == 0 {
		return nil, "", nil
	}
	var rec Record
	dec := json.NewDecoder(bytes.NewReader(line))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&rec); err != nil {
		return nil, KindFormat, err
	}
	if err := SafeName("record id", rec.ID); err != nil {
		return &rec, KindPath, err
	}
	for _, f := range [][2]string{{"image", rec.Image}, {"mask", rec.Mask}, {"instances", rec.Instances}} {
		if !SafeRel(f[1]) {
			return &rec, KindPath, fmt.Errorf("%s path %q leaves the dataset folder", f[0], f[1])
		}
		if err := recordPath(f[0], f[1]); err != nil {
			return &rec, KindPath, err
		}
	}
	return &rec, "", nil
}

func (v *verifier) run() (int, error) {
	d := v.d
	at := func(no int) string { return fmt.Sprintf("%s:%d", v.mpath, no) }
	pl := newPlanted(d) // the instruments' checks: verify_planted.go
	sum, err := v.eachLine(func(no int, line []byte) {
		if line == nil {
			v.broken = true
			v.report(Problem{File: ManifestFile, Check: KindFormat, Msg: fmt.Sprintf("%s: the line is over %d bytes, the most a record may take", at(no), MaxRecordBytes)})
			return
		}
		r, kind, err := decodeRecordLine(line)
		if r == nil && kind == "" {
			return
		}
		if r == nil {
			v.broken = true
			v.report(Problem{File: ManifestFile, Check: kind, Msg: fmt.Sprintf("%s: %v", at(no), err)})
			return
		}
		v.records++
		id := r.ID
		if kind == KindPath && SafeName("record id", r.ID) != nil {
			id = "" // an unsafe id is named quoted in the message, never printed raw
		}
		bad := func(check, file, format string, args ...any) {
			v.report(Problem{ID: id, File: file, Check: check, Msg: fmt.Sprintf(format, args...)})
		}
		if err != nil {
			bad(kind, ManifestFile, "%s: %v", at(no), err)
		}
		v.record(no, r, bad)
		if err == nil {
			v.verifyRecord(r, bad)
			pl.check(v.dir, r, bad)
		}
	})
	if err != nil {
		v.report(Problem{File: ManifestFile, Check: KindMissing, Msg: err.Error()})
		return v.records, nil
	}
	if sum != d.ManifestSHA256 {
		// Reported after the records, since the sum is known only at the end.
		v.report(Problem{File: ManifestFile, Check: KindSHA256, Msg: fmt.Sprintf("%s: SHA-256 %s, dataset.json says %s", ManifestFile, sum, d.ManifestSHA256)})
	}
	if v.idBreak > 0 || v.grpBreak > 0 {
		if err := v.secondPass(); err != nil {
			v.report(Problem{File: ManifestFile, Check: KindMissing, Msg: err.Error()})
			return v.records, nil
		}
	}
	n := v.records
	if n != d.Count {
		v.report(Problem{File: ManifestFile, Check: KindSplitTable, Msg: fmt.Sprintf("manifest has %d %s, dataset.json says %d", n, Plural(n, "record", "records"), d.Count)})
	}
	v.checkAllocation()
	for i, s := range d.Splits.Names {
		if v.counts[i] != d.Splits.Counts[s] {
			v.report(Problem{File: DatasetFile, Check: KindSplitTable, Msg: fmt.Sprintf("split %s has %d %s, dataset.json says %d", s, v.counts[i], Plural(v.counts[i], "record", "records"), d.Splits.Counts[s])})
		}
	}
	v.checkStrata()
	v.checkPacks()
	return n, nil
}

// record does the checks across records for r, record number no of the
// manifest: its split known and counted, its id unique and its group in
// one split (at once while ids and groups come in order, else in the
// second pass), and its group's stratum and split kept.
func (v *verifier) record(no int, r *Record, bad func(check, file, format string, args ...any)) {
	si, known := v.splitIdx[r.Split]
	if !known {
		bad(KindSplit, ManifestFile, "split %q is not one of dataset.json's (%s)", r.Split, strings.Join(v.d.Splits.Names, ", "))
	} else {
		v.counts[si]++
	}
	if !v.tracking {
		return
	}
	if v.tracked >= v.d.Count {
		// More records than dataset.json says: reported as a split-table
		// problem; nothing more is kept.
		v.overCount = true
		return
	}
	v.tracked++
	if v.idBreak == 0 {
		if v.tracked > 1 && r.ID <= v.lastID {
			v.idBreak = no
		}
		v.lastID = strings.Clone(r.ID)
	}
	if v.grpBreak != 0 {
		return
	}
	switch {
	case v.tracked > 1 && r.Group == v.lastGroup:
		if r.Split != v.curSplit {
			v.spans = true
			bad(KindGroupLeak, ManifestFile, "group %q spans splits %s and %s", r.Group, v.curSplit, r.Split)
		}
	case v.tracked > 1 && r.Group < v.lastGroup:
		v.grpBreak = no
	default:
		v.lastGroup, v.curSplit = strings.Clone(r.Group), strings.Clone(r.Split)
		v.addGroup(r)
	}
}

func (v *verifier) addGroup(r *Record) {
	s := uint8(noSplit)
	if i, ok := v.splitIdx[r.Split]; ok {
		s = uint8(i)
	}
	v.grpStratum = append(v.grpStratum, v.stratum(r.Stratum))
	v.grpSplit = append(v.grpSplit, s)
}

// hash16 is a 16-byte digest of a name, for sets of ids and groups; a
// truncated SHA-256 so that no input can be made to collide on purpose.
func hash16(s string) [16]byte {
	h := sha256.Sum256([]byte(s))
	return [16]byte(h[:16])
}

// secondPass redoes the duplicate-id and group checks of a manifest whose
// ids or groups are not in order, with sets of hashes, reporting only what
// the first pass could not have seen (from where the order broke).
func (v *verifier) secondPass() error {
	ids := map[[16]byte]struct{}{}
	groups := map[[16]byte]int32{}
	if v.grpBreak > 0 && v.tracking {
		v.grpStratum, v.grpSplit = v.grpStratum[:0], v.grpSplit[:0]
		v.unknownSplit = map[int32]string{}
		v.spans = false
	}
	name := func(g int32) string {
		if s := v.grpSplit[g]; s != noSplit {
			return v.d.Splits.Names[s]
		}
		return v.unknownSplit[g]
	}
	tracked := 0
	_, err := v.eachLine(func(no int, line []byte) {
		if line == nil || tracked >= v.d.Count {
			return
		}
		r, kind, _ := decodeRecordLine(line)
		if r == nil {
			return
		}
		tracked++
		id := r.ID
		if kind == KindPath && SafeName("record id", r.ID) != nil {
			id = ""
		}
		if v.idBreak > 0 {
			k := hash16(r.ID)
			if _, dup := ids[k]; dup && no >= v.idBreak {
				v.report(Problem{ID: id, File: ManifestFile, Check: KindDuplicateID, Msg: fmt.Sprintf("%s:%d: duplicate id", v.mpath, no)})
			}
			ids[k] = struct{}{}
		}
		if v.grpBreak > 0 && v.tracking {
			k := hash16(r.Group)
			g, ok := groups[k]
			if !ok {
				g = int32(len(v.grpSplit))
				groups[k] = g
				v.addGroup(r)
				if v.grpSplit[g] == noSplit {
					v.unknownSplit[g] = strings.Clone(r.Split)
				}
				return
			}
			if s := name(g); s != r.Split {
				v.spans = true
				if no >= v.grpBreak {
					v.report(Problem{ID: id, File: ManifestFile, Check: KindGroupLeak, Msg: fmt.Sprintf("group %q spans splits %s and %s", r.Group, s, r.Split)})
				}
			}
		}
	})
	return err
}

// checkAllocation names every record that is not in the split the seeded
// allocation (AllocateStrata, as generate and split deal it) gives its
// group. Skipped when the records are incomplete or unreadable, a group
// spans splits, or strata were not all kept, where the allocation cannot be
// recomputed meaningfully. An augmented set that skipped bad sources lacks
// their groups, so its split is the source's allocation minus them and
// cannot be recomputed either.
func (v *verifier) checkAllocation() {
	d := v.d
	skipped := d.Augment != nil && len(d.Augment.Skipped) > 0
	sp, perr := ParseSplits(d.Splits.Spec)
	sp.Cover = d.Splits.RequireCoverage
	if perr != nil || v.broken || !v.tracking || v.records != d.Count || v.spans || skipped || v.strataFull || !slices.Equal(sp.Names, d.Splits.Names) {
		return
	}
	a, err := AllocateWritten(d, v.grpStratum, v.stratumNames, sp) // held-out strata: verify_planted.go
	if err != nil {
		return
	}
	wrong := make([]bool, len(v.grpSplit))
	any := false
	for g, s := range v.grpSplit {
		if s != noSplit && s != a.Split[g] {
			wrong[g], any = true, true
		}
	}
	if !any {
		return
	}
	// A third pass names the records of the misplaced groups, numbering
	// groups as the pass that kept them did.
	ordered := v.grpBreak == 0
	groups := map[[16]byte]int32{}
	last, g, tracked := "", -1, 0
	v.eachLine(func(no int, line []byte) {
		if line == nil || tracked >= d.Count {
			return
		}
		r, kind, _ := decodeRecordLine(line)
		if r == nil {
			return
		}
		tracked++
		if ordered {
			if g < 0 || r.Group != last {
				g, last = g+1, strings.Clone(r.Group)
			}
		} else {
			k := hash16(r.Group)
			x, ok := groups[k]
			if !ok {
				x = int32(len(groups))
				groups[k] = x
			}
			g = int(x)
		}
		if g >= len(wrong) || !wrong[g] {
			return
		}
		id := r.ID
		if kind == KindPath && SafeName("record id", r.ID) != nil {
			id = ""
		}
		want := sp.Names[a.Split[g]]
		v.report(Problem{ID: id, File: ManifestFile, Check: KindSplit, Msg: fmt.Sprintf("is in split %s, but seed %d's allocation (split %s, stratified by %q) puts it in split %s", r.Split, d.Seed, d.Splits.Spec, d.Splits.Stratify, want)})
	})
}

// checkStrata compares the strata × splits table (groups, by their first
// record) with dataset.json's.
func (v *verifier) checkStrata() {
	if !v.tracking || v.strataFull {
		return
	}
	d := v.d
	cells := make([][]int, len(v.stratumNames))
	seen := make([]bool, len(v.stratumNames))
	for i := range cells {
		cells[i] = make([]int, len(d.Splits.Names))
	}
	for g, s := range v.grpSplit {
		st := v.grpStratum[g]
		if st < 0 {
			continue
		}
		seen[st] = true
		if s != noSplit {
			cells[st][s]++
		}
	}
	declared := map[string]bool{}
	for _, st := range d.Splits.Strata {
		declared[st.Key] = true
		row := cells[v.stratumID[st.Key]]
		for i, s := range d.Splits.Names {
			if got := row[i]; got != st.Splits[s] {
				v.report(Problem{File: DatasetFile, Check: KindSplitTable, Msg: fmt.Sprintf("stratum %q in split %s has %d %s, dataset.json says %d", st.Key, s, got, Plural(got, "group", "groups"), st.Splits[s])})
			}
		}
	}
	var keys []string
	for i, k := range v.stratumNames {
		if seen[i] && !declared[k] {
			keys = append(keys, k)
		}
	}
	sort.Strings(keys)
	for _, k := range keys {
		v.report(Problem{File: DatasetFile, Check: KindSplitTable, Msg: fmt.Sprintf("stratum %q is not in dataset.json's table", k)})
	}
}

// MaxVerifyPixels bounds one image verify (and stats, preview, report)
// decodes (width × height).
const MaxVerifyPixels = 64 << 20

// SHA256 is the hex SHA-256 of the whole file, streamed.
func (s *SampleFile) SHA256() (string, error) {
	r, err := s.reader()
	if err != nil {
		return "", err
	}
	h := sha256.New()
	if _, err := r.WriteTo(h); err != nil {
		return "", &SampleError{Rel: s.Rel, Check: KindMissing, Msg: err.Error()}
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// Header reads the PNG header and checks it against the record: width w
// and height h, at most MaxVerifyPixels. It returns the header; nothing is
// decoded.
func (s *SampleFile) Header(w, h int) (image.Config, error) {
	return s.header(w, h, nil)
}

// header is Header reading with dec (its palette valid until dec's next
// use), or with image/png when dec is nil.
func (s *SampleFile) header(w, h int, dec *pngread.Decoder) (image.Config, error) {
	r, err := s.reader()
	if err != nil {
		return image.Config{}, err
	}
	var cfg image.Config
	if dec != nil {
		cfg, err = dec.DecodeConfig(r)
	} else {
		cfg, err = png.DecodeConfig(r)
	}
	if err != nil {
		return cfg, &SampleError{Rel: s.Rel, Check: KindFormat, Msg: "not a readable PNG: " + err.Error()}
	}
	if cfg.Width != w || cfg.Height != h {
		return cfg, &SampleError{Rel: s.Rel, Check: KindSize, Msg: fmt.Sprintf("is %dx%d, the record says %dx%d", cfg.Width, cfg.Height, w, h)}
	}
	if int64(w)*int64(h) > MaxVerifyPixels {
		return cfg, &SampleError{Rel: s.Rel, Check: KindSize, Msg: fmt.Sprintf("%dx%d is over the budget of %d pixels per image", w, h, MaxVerifyPixels)}
	}
	s.cfg = cfg
	return cfg, nil
}

// Decode decodes the PNG; call Header first.
func (s *SampleFile) Decode() (image.Image, error) {
	return s.decode(nil)
}

// decode decodes the PNG with dec, reusing its memory (the image is valid
// until dec's next use), or with image/png when dec is nil.
func (s *SampleFile) decode(dec *pngread.Decoder) (image.Image, error) {
	if s.cfg.Width == 0 && s.cfg.Height == 0 && s.cfg.ColorModel == nil {
		return nil, &SampleError{Rel: s.Rel, Check: KindFormat, Msg: "header not checked before decoding"}
	}
	r, err := s.reader()
	if err != nil {
		return nil, err
	}
	var m image.Image
	if dec != nil {
		m, err = dec.Decode(r)
	} else {
		m, err = png.Decode(r)
	}
	if err != nil {
		return nil, &SampleError{Rel: s.Rel, Check: KindFormat, Msg: "not a readable PNG: " + err.Error()}
	}
	if m.Bounds() != image.Rect(0, 0, s.cfg.Width, s.cfg.Height) {
		return nil, &SampleError{Rel: s.Rel, Check: KindSize, Msg: fmt.Sprintf("decodes to %v, its header says %dx%d", m.Bounds(), s.cfg.Width, s.cfg.Height)}
	}
	return m, nil
}

// DecodedBytes is the memory the standard library's PNG decoder allocates
// for an image with this header: width × height × bytes per pixel of the
// image type it returns (1 for gray and paletted, 2 for 16-bit gray, 4 for
// 8-bit color, 8 for 16-bit color).
func DecodedBytes(cfg image.Config) int64 {
	per := int64(8)
	switch cfg.ColorModel {
	case color.GrayModel, color.AlphaModel:
		per = 1
	case color.Gray16Model, color.Alpha16Model:
		per = 2
	case color.RGBAModel, color.NRGBAModel:
		per = 4
	}
	if _, ok := cfg.ColorModel.(color.Palette); ok {
		per = 1
	}
	return int64(cfg.Width) * int64(cfg.Height) * per
}

// openSample opens, hashes and header-checks one record file for verify,
// reporting what is wrong; it returns the file ready to decode, or nil.
func (v *verifier) openSample(key, rel, want string, w, h int, dec *pngread.Decoder, bad func(check, file, format string, args ...any)) *SampleFile {
	report := func(err error) {
		var se *SampleError
		if errors.As(err, &se) {
			if se.Check == KindPath {
				bad(KindPath, ManifestFile, "%s: %s", key, se.Msg)
				return
			}
			bad(se.Check, se.Rel, "%s", se.Error())
			return
		}
		bad(KindMissing, rel, "%s: %v", rel, err)
	}
	s, err := OpenSample(v.dir, rel)
	if err != nil {
		report(err)
		return nil
	}
	sum, err := s.SHA256()
	if err != nil {
		s.Close()
		report(err)
		return nil
	}
	if got := sum; got != want {
		bad(KindSHA256, rel, "%s: SHA-256 %s, record says %s", rel, got, want)
	}
	if _, err := s.header(w, h, dec); err != nil {
		s.Close()
		report(err)
		return nil
	}
	return s
}

// decodeOK decodes a header-checked file with dec, reporting a failure.
// The image is dec's: valid until dec decodes the next file.
func decodeOK(s *SampleFile, dec *pngread.Decoder, bad func(check, file, format string, args ...any)) image.Image {
	if s == nil {
		return nil
	}
	defer s.Close()
	m, err := s.decode(dec)
	if err != nil {
		var se *SampleError
		if errors.As(err, &se) {
			bad(se.Check, se.Rel, "%s", se.Error())
		} else {
			bad(KindFormat, s.Rel, "%s: %v", s.Rel, err)
		}
		return nil
	}
	return m
}

func (v *verifier) verifyRecord(r *Record, bad func(check, file, format string, args ...any)) {
	// One record's files at a time: at most three decoded images are alive,
	// each in its kind's decoder, which reuses it for the next record.
	img := decodeOK(v.openSample("image", r.Image, r.SHA256["image"], r.Width, r.Height, &v.decs[0], bad), &v.decs[0], bad)
	mf := v.openSample("mask", r.Mask, r.SHA256["mask"], r.Width, r.Height, &v.decs[1], bad)
	if mf != nil {
		if _, ok := mf.cfg.ColorModel.(color.Palette); !ok {
			bad(KindFormat, r.Mask, "%s: semantic mask is not an indexed PNG", r.Mask)
			mf.Close()
			mf = nil
		}
	}
	mk := decodeOK(mf, &v.decs[1], bad)
	inf := v.openSample("instances", r.Instances, r.SHA256["instances"], r.Width, r.Height, &v.decs[2], bad)
	if inf != nil && inf.cfg.ColorModel != color.Gray16Model {
		bad(KindFormat, r.Instances, "%s: instance mask is not a 16-bit gray PNG", r.Instances)
		inf.Close()
		inf = nil
	}
	in := decodeOK(inf, &v.decs[2], bad)
	targets, classByName := v.d.TargetDefs, v.classByName
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
		if msg := CheckMeasured(o, &st.M); msg != "" {
			bad(KindMeasured, r.Instances, "%s", msg)
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
