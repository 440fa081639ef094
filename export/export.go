package export

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/trueset/trueset/manifest"
)

// The formats Run writes.
const (
	// FormatObjectsJSON is one JSON file of images, annotations (boxes as
	// x, y, width, height; masks as column-major run-length counts) and
	// categories.
	FormatObjectsJSON = "objects-json"
	// FormatCenterBoxes is a folder of one text file per image, a line per
	// object: class index and the box's normalized center and size.
	FormatCenterBoxes = "center-boxes"
)

// Formats lists the formats in the order the help names them.
var Formats = []string{FormatObjectsJSON, FormatCenterBoxes}

// Options say what to export and where.
type Options struct {
	Dir    string // the dataset folder
	Format string // FormatObjectsJSON or FormatCenterBoxes
	Out    string // the JSON file, or the folder for center boxes
	Split  string // only this split; "" = every sample
}

// Summary is what an export wrote.
type Summary struct {
	Format      string   `json:"format"`
	Out         string   `json:"out"`
	Images      int      `json:"images"`
	Objects     int      `json:"objects"`
	Categories  []string `json:"categories"`
	EmptyImages int      `json:"empty_images"` // samples with no object
}

// InputError is a dataset the export cannot take as it is (missing,
// inconsistent, an unknown split): the user's input, not a failure while
// working.
type InputError struct{ Err error }

func (e *InputError) Error() string { return e.Err.Error() }
func (e *InputError) Unwrap() error { return e.Err }

func inputf(format string, args ...any) error {
	return &InputError{fmt.Errorf(format, args...)}
}

// Run exports o.Dir in o.Format to o.Out.
func Run(o Options) (*Summary, error) {
	if !slices.Contains(Formats, o.Format) {
		return nil, inputf("format %q: trueset exports %s (objects-json: the trade's common JSON of images, annotations and categories, with [x, y, width, height] boxes and run-length masks, for detection and instance segmentation; center-boxes: one text file per image of class index and normalized center x, center y, width, height)", o.Format, strings.Join(Formats, " or "))
	}
	if err := manifest.CheckDisjoint(o.Out, o.Dir); err != nil {
		return nil, err
	}
	d, err := manifest.ReadDataset(o.Dir)
	if err != nil {
		return nil, &InputError{err}
	}
	if o.Split != "" && !slices.Contains(d.Splits.Names, o.Split) {
		return nil, inputf("%s: no split %q; its splits are %s", filepath.Join(o.Dir, manifest.DatasetFile), o.Split, strings.Join(d.Splits.Names, ", "))
	}
	cats, err := categories(d)
	if err != nil {
		return nil, err
	}
	if o.Format == FormatObjectsJSON {
		return writeObjectsJSON(o, d, cats)
	}
	return writeCenterBoxes(o, cats)
}

// category is one exported class.
type category struct {
	ID    int    `json:"id"`
	Name  string `json:"name"`
	Super string `json:"supercategory"`
	index int    // 0-based position, for center boxes
}

// categories are the dataset's classes but background and ignore, in
// ascending id.
func categories(d *manifest.Dataset) (map[int]*category, error) {
	out := map[int]*category{}
	var ids []int
	for _, c := range d.Classes {
		if c.ID == 0 || c.ID == manifest.IgnoreID {
			continue
		}
		if _, dup := out[c.ID]; dup {
			return nil, inputf("dataset.json: classes: id %d appears twice", c.ID)
		}
		if strings.ContainsAny(c.Name, "\r\n") || c.Name == "" {
			return nil, inputf("dataset.json: classes: id %d has name %q; a class name is one non-empty line", c.ID, c.Name)
		}
		out[c.ID] = &category{ID: c.ID, Name: c.Name, Super: "object"}
		ids = append(ids, c.ID)
	}
	slices.Sort(ids)
	for i, id := range ids {
		out[id].index = i
	}
	return out, nil
}

func sortedCategories(cats map[int]*category) []*category {
	list := make([]*category, 0, len(cats))
	for _, c := range cats {
		list = append(list, c)
	}
	slices.SortFunc(list, func(a, b *category) int { return a.ID - b.ID })
	return list
}

// sample is one record with its instance mask, checked against each other.
type sample struct {
	rec  *manifest.Record
	inst *image.Gray16
	objs []*manifest.Object // objects with pixels, in record order
}

// eachRecord calls fn for every record of o.Split (all when "").
func eachRecord(o Options, fn func(*manifest.Record) error) error {
	err := manifest.ReadManifest(o.Dir, func(r *manifest.Record) error {
		if o.Split != "" && r.Split != o.Split {
			return nil
		}
		return fn(r)
	})
	var ie *InputError
	if err != nil && !errors.As(err, &ie) && !errors.Is(err, errWrite) {
		return &InputError{err} // the manifest reader's errors name file and line
	}
	return err
}

// errWrite marks an error writing the output (exit 1, not bad input).
var errWrite = errors.New("writing the export")

type writeError struct{ err error }

func (e writeError) Error() string { return e.err.Error() }
func (e writeError) Is(t error) bool {
	return t == errWrite
}

// load reads rec's instance mask and checks it against the record: the
// file's SHA-256, its size, and every object's box and area measured again.
func load(o Options, rec *manifest.Record, cats map[int]*category) (*sample, error) {
	where := fmt.Sprintf("%s: record %s", filepath.Join(o.Dir, manifest.ManifestFile), rec.ID)
	f, err := manifest.OpenSample(o.Dir, rec.Instances)
	if err != nil {
		return nil, inputf("%s: %v", where, err)
	}
	defer f.Close()
	sum, err := f.SHA256()
	if err != nil {
		return nil, inputf("%s: %v", where, err)
	}
	if want := rec.SHA256["instances"]; sum != want {
		return nil, inputf("%s: %s has SHA-256 %s, the record says %s; run trueset verify %s", where, rec.Instances, sum, want, o.Dir)
	}
	if _, err := f.Header(rec.Width, rec.Height); err != nil {
		return nil, inputf("%s: %v", where, err)
	}
	m, err := f.Decode()
	if err != nil {
		return nil, inputf("%s: %v", where, err)
	}
	g, ok := m.(*image.Gray16)
	if !ok {
		return nil, inputf("%s: %s is %T, not a 16-bit gray instance mask", where, rec.Instances, m)
	}
	measured := manifest.MeasureInstances(g)
	s := &sample{rec: rec, inst: g}
	claimed := map[int]bool{}
	for i := range rec.Objects {
		ob := &rec.Objects[i]
		if claimed[ob.Instance] {
			return nil, inputf("%s: instance %d appears twice among the objects", where, ob.Instance)
		}
		claimed[ob.Instance] = true
		st := measured[ob.Instance]
		if ob.Area == 0 && st == nil {
			continue // an object with no pixels: nothing to export
		}
		if st == nil || st.Area != ob.Area || st.BBox != ob.Box {
			got := "no pixels"
			if st != nil {
				got = fmt.Sprintf("area %d, box %v", st.Area, st.BBox)
			}
			return nil, inputf("%s: object instance %d: the record says area %d, box %v; %s has %s; run trueset verify %s", where, ob.Instance, ob.Area, ob.Box, rec.Instances, got, o.Dir)
		}
		if cats[ob.Class] == nil {
			return nil, inputf("%s: object instance %d has class %d, which is not an object class of dataset.json", where, ob.Instance, ob.Class)
		}
		s.objs = append(s.objs, ob)
	}
	for id := range measured {
		if !claimed[id] {
			return nil, inputf("%s: %s holds instance %d, which no object of the record names; run trueset verify %s", where, rec.Instances, id, o.Dir)
		}
	}
	return s, nil
}

// RLE returns the pixels of instance id in m as run-length counts in
// column-major order (down each column, columns left to right), starting
// with a run of pixels that are not id (0 when the first pixel is id) and
// alternating; the counts sum to the pixel count of m. box must contain
// every pixel of id ([x0, y0, x1, y1), as MeasureInstances gives); only it
// is scanned.
func RLE(m *image.Gray16, id int, box [4]int) []int {
	b := m.Bounds()
	w, h := b.Dx(), b.Dy()
	var counts []int
	next := 0             // the first position no count covers yet
	start, last := -1, -2 // the open run of id's pixels, [start, last]
	// Within the box, x outer and y inner visit positions x·h + y in
	// increasing order.
	for x := max(box[0], b.Min.X); x < min(box[2], b.Max.X); x++ {
		for y := max(box[1], b.Min.Y); y < min(box[3], b.Max.Y); y++ {
			i := (y-b.Min.Y)*m.Stride + 2*(x-b.Min.X)
			if int(m.Pix[i])<<8|int(m.Pix[i+1]) != id {
				continue
			}
			p := (x-b.Min.X)*h + (y - b.Min.Y)
			if p == last+1 {
				last = p
				continue
			}
			if start >= 0 {
				counts = append(counts, start-next, last+1-start)
				next = last + 1
			}
			start, last = p, p
		}
	}
	if start >= 0 {
		counts = append(counts, start-next, last+1-start)
		next = last + 1
	}
	// The mask ends outside the object: one more run. A mask ending inside
	// it ends with the object's run (the counts alternate and sum to w·h).
	if rest := w*h - next; rest > 0 {
		counts = append(counts, rest)
	}
	return counts
}

// CenterBox returns a box [x0, y0, x1, y1) in pixels of a w × h image as
// its center and size divided by the image size: cx, cy, bw, bh.
func CenterBox(box [4]int, w, h int) [4]float64 {
	return [4]float64{
		float64(box[0]+box[2]) / 2 / float64(w),
		float64(box[1]+box[3]) / 2 / float64(h),
		float64(box[2]-box[0]) / float64(w),
		float64(box[3]-box[1]) / float64(h),
	}
}

// Num writes f in the shortest decimal form that reads back as f, without
// an exponent.
func Num(f float64) string { return strconv.FormatFloat(f, 'f', -1, 64) }

// objectsDoc are the parts of the JSON document written before the lists.
type info struct {
	Description  string `json:"description"`
	Dataset      string `json:"dataset_format"`
	ToolVersion  string `json:"tool_version"`
	Seed         uint64 `json:"seed"`
	RecipeSHA256 string `json:"recipe_sha256,omitempty"`
	Split        string `json:"split,omitempty"`
}

type imageEntry struct {
	ID       int    `json:"id"`
	FileName string `json:"file_name"`
	Width    int    `json:"width"`
	Height   int    `json:"height"`
	SampleID string `json:"sample_id"`
	Split    string `json:"split"`
}

type rleSeg struct {
	Size   [2]int `json:"size"`
	Counts []int  `json:"counts"`
}

type annotation struct {
	ID           int    `json:"id"`
	ImageID      int    `json:"image_id"`
	CategoryID   int    `json:"category_id"`
	BBox         [4]int `json:"bbox"`
	Area         int    `json:"area"`
	IsCrowd      int    `json:"iscrowd"`
	Segmentation rleSeg `json:"segmentation"`
	InstanceID   int    `json:"instance_id"`
}

// writeObjectsJSON streams the document to a temporary file beside o.Out
// and renames it into place when complete: categories, then images (from
// the records alone), then annotations (a second pass, reading the masks).
func writeObjectsJSON(o Options, d *manifest.Dataset, cats map[int]*category) (*Summary, error) {
	sum := &Summary{Format: o.Format, Out: o.Out}
	for _, c := range sortedCategories(cats) {
		sum.Categories = append(sum.Categories, c.Name)
	}
	if st, err := os.Stat(o.Out); err == nil && st.IsDir() {
		return nil, inputf("--out %s is a folder; %s writes one JSON file", o.Out, o.Format)
	}
	tmp, err := os.CreateTemp(filepath.Dir(o.Out), "."+filepath.Base(o.Out)+".tmp*")
	if err != nil {
		return nil, writeError{err}
	}
	done := false
	defer func() {
		if !done {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	w := bufio.NewWriterSize(tmp, 1<<20)
	put := func(s string) { w.WriteString(s) }
	item := func(first bool, v any) error {
		b, err := json.Marshal(v)
		if err != nil {
			return err
		}
		if !first {
			put(",")
		}
		put("\n  ")
		_, err = w.Write(b)
		return err
	}
	hdr, err := json.Marshal(info{
		Description: "objects exported by trueset export from a trueset dataset", Dataset: d.Format,
		ToolVersion: d.ToolVersion, Seed: d.Seed, RecipeSHA256: d.RecipeSHA256, Split: o.Split,
	})
	if err != nil {
		return nil, err
	}
	put("{\n\"info\": ")
	w.Write(hdr)
	put(",\n\"categories\": [")
	for i, c := range sortedCategories(cats) {
		if err := item(i == 0, c); err != nil {
			return nil, err
		}
	}
	put("\n],\n\"images\": [")
	n := 0
	err = eachRecord(o, func(r *manifest.Record) error {
		n++
		return item(n == 1, imageEntry{ID: n, FileName: r.Image, Width: r.Width, Height: r.Height, SampleID: r.ID, Split: r.Split})
	})
	if err != nil {
		return nil, err
	}
	sum.Images = n
	put("\n],\n\"annotations\": [")
	img, ann := 0, 0
	err = eachRecord(o, func(r *manifest.Record) error {
		img++
		s, err := load(o, r, cats)
		if err != nil {
			return err
		}
		if len(s.objs) == 0 {
			sum.EmptyImages++
		}
		for _, ob := range s.objs {
			ann++
			a := annotation{
				ID: ann, ImageID: img, CategoryID: ob.Class,
				BBox:         [4]int{ob.Box[0], ob.Box[1], ob.Box[2] - ob.Box[0], ob.Box[3] - ob.Box[1]},
				Area:         ob.Area,
				Segmentation: rleSeg{Size: [2]int{r.Height, r.Width}, Counts: RLE(s.inst, ob.Instance, ob.Box)},
				InstanceID:   ob.Instance,
			}
			if err := item(ann == 1, a); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	if img != n {
		return nil, inputf("%s changed while it was exported (%d records, then %d)", filepath.Join(o.Dir, manifest.ManifestFile), n, img)
	}
	sum.Objects = ann
	put("\n]\n}\n")
	if err := w.Flush(); err != nil {
		return nil, writeError{fmt.Errorf("write %s: %w", o.Out, err)}
	}
	if err := finishFile(tmp, o.Out); err != nil {
		return nil, err
	}
	done = true
	return sum, nil
}

// finishFile makes tmp readable like any written file, syncs, closes and
// renames it to out.
func finishFile(tmp *os.File, out string) error {
	name := tmp.Name()
	if err := tmp.Chmod(0o644); err != nil {
		return writeError{err}
	}
	if err := tmp.Sync(); err != nil {
		return writeError{fmt.Errorf("write %s: %w", out, err)}
	}
	if err := tmp.Close(); err != nil {
		return writeError{fmt.Errorf("write %s: %w", out, err)}
	}
	if err := os.Rename(name, out); err != nil {
		os.Remove(name)
		return writeError{err}
	}
	return nil
}

// writeCenterBoxes writes o.Out/labels/<stem>.txt for every sample and
// o.Out/classes.txt, holding o.Out's lock. labels/ is filled under a
// temporary name and renamed when every file is written; classes.txt is
// written last.
func writeCenterBoxes(o Options, cats map[int]*category) (*Summary, error) {
	if err := manifest.CheckUnlocked(o.Out); err != nil {
		return nil, err
	}
	if manifest.HasEntries(o.Out) {
		return nil, inputf("--out %s is not empty; %s writes a new folder", o.Out, o.Format)
	}
	lock, err := manifest.LockDir(o.Out)
	if err != nil {
		return nil, err
	}
	defer lock.Unlock()
	tmpDir, err := os.MkdirTemp(o.Out, ".labels.tmp")
	if err != nil {
		return nil, writeError{err}
	}
	done := false
	defer func() {
		if !done {
			os.RemoveAll(tmpDir)
		}
	}()
	sum := &Summary{Format: o.Format, Out: o.Out}
	list := sortedCategories(cats)
	for _, c := range list {
		sum.Categories = append(sum.Categories, c.Name)
	}
	seen := map[string]string{}
	var line []byte
	err = eachRecord(o, func(r *manifest.Record) error {
		stem := strings.TrimSuffix(path.Base(r.Image), path.Ext(r.Image))
		if err := manifest.SafeName("image file stem", stem); err != nil {
			return inputf("%s: record %s: %v", filepath.Join(o.Dir, manifest.ManifestFile), r.ID, err)
		}
		if other, dup := seen[stem]; dup {
			return inputf("%s: records %s and %s both have an image named %s; their label files would clash", filepath.Join(o.Dir, manifest.ManifestFile), other, r.ID, stem)
		}
		seen[stem] = r.ID
		s, err := load(o, r, cats)
		if err != nil {
			return err
		}
		line = line[:0]
		for _, ob := range s.objs {
			b := CenterBox(ob.Box, r.Width, r.Height)
			line = strconv.AppendInt(line, int64(cats[ob.Class].index), 10)
			for _, v := range b {
				line = append(line, ' ')
				line = strconv.AppendFloat(line, v, 'f', -1, 64)
			}
			line = append(line, '\n')
		}
		if len(s.objs) == 0 {
			sum.EmptyImages++
		}
		sum.Images++
		sum.Objects += len(s.objs)
		if err := os.WriteFile(filepath.Join(tmpDir, stem+".txt"), line, 0o644); err != nil {
			return writeError{err}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	if err := syncDir(tmpDir); err != nil {
		return nil, writeError{err}
	}
	if err := os.Rename(tmpDir, filepath.Join(o.Out, "labels")); err != nil {
		return nil, writeError{err}
	}
	done = true
	var names strings.Builder
	for _, c := range list {
		names.WriteString(c.Name)
		names.WriteByte('\n')
	}
	if err := manifest.WriteFileAtomic(filepath.Join(o.Out, "classes.txt"), []byte(names.String())); err != nil {
		return nil, writeError{err}
	}
	return sum, nil
}

func syncDir(dir string) error {
	f, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer f.Close()
	return f.Sync()
}
