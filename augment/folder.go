package augment

// Reader for a user's own "plain labeled folder":
//
//	FOLDER/images/<stem>.<png|jpg|jpeg|bmp|tif|tiff|webp>
//	FOLDER/masks/<stem>.png      semantic mask: indexed or 8-bit gray PNG, value = class id
//	FOLDER/instances/<stem>.png  optional: 16- or 8-bit gray PNG, value = instance id, 0 = none
//	FOLDER/labels.csv            optional: header row with an "id" column (the stem) and targets
//	FOLDER/classes.json          optional: [{"id": 1, "name": "leaf", "color": [r,g,b],
//	                                         "flip": false, "max_rotate": 15}, ...]
//	FOLDER/columns.json          optional: what each labels.csv column means (columns.go)
//
// Everything is checked before anything is returned: a folder either reads
// completely or gives one error that names the file (and, where it helps, the
// value, the pixel, the row or the column) and says what is wrong.
//
// Conventions beyond the layout above:
//   - Names starting with "." (.DS_Store, editor swap files) are skipped in the
//     three sub-folders; any other entry must be a file of the expected kind.
//     Extensions are matched without regard to case (A.PNG is stem "A").
//   - An image's format is taken from its content, not its extension (a PNG
//     named .jpg reads as a PNG); masks and instances must be PNG content.
//   - Every file is opened through internal/safefile (regular files only;
//     images at most manifest.MaxSampleFileBytes, classes.json 1 MiB,
//     labels.csv 64 MiB with lines of at most 64 KiB and 256 columns).
//   - Every file's header is read with image.DecodeConfig first and a file
//     whose width·height exceeds the pixel budget is refused before any pixel
//     is decoded, so a decompression bomb costs a header read; a JPEG's scans
//     are counted first too (countJPEGScans), so one with thousands of
//     progressive passes costs a read of its bytes.
//   - Stems, labels.csv ids and class names pass manifest.SafeName; class
//     and target names are at most 64 bytes.
//   - Mask value 255 (manifest.IgnoreID) means "no label here": it is not a
//     class and never belongs to an instance.
//   - Given instance files are used as they are; every instance's pixels must
//     lie on one nonzero class. Mask pixels of a class with instance 0 are
//     allowed (regions nobody split into objects) and belong to no object.
//   - labels.csv cells are trimmed of surrounding spaces; a UTF-8 byte-order
//     mark before the header is dropped.

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"golang.org/x/image/bmp"
	"golang.org/x/image/tiff"
	_ "golang.org/x/image/webp" // registers the WebP decoder (VP8 and VP8L)

	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/manifest"
)

// Source is one labeled input sample.
type Source struct {
	ID        string                    // the file stem
	Image     *Image                    // working image (augment/image.go)
	Mask      *image.Paletted           // class ids; palette = manifest.Palette(classes), shared by all sources: do not modify it
	Instances *image.Gray16             // instance ids (from instances/ or connected components)
	Objects   []manifest.Object         // measured from Instances, sorted by instance id
	Targets   map[string]manifest.Value // from labels.csv; empty (not nil) without it

	sum []byte // SHA-256 of the SHA-256s of its image, mask and instance files as read
}

// Folder is a plain labeled folder read into memory, sources sorted by ID.
type Folder struct {
	Dir string
	// Classes has id 0 (background) first, then ascending ids. From
	// classes.json when present (background added if it does not list id 0);
	// otherwise "class-<id>" for every id found in the masks, colored from a
	// fixed palette of distinct colors (golden-angle hues, see
	// folderClassColor).
	Classes []manifest.Class
	// Invariance holds the classes whose classes.json entry declares flip or
	// max_rotate. A class absent from the map keeps its label under any
	// transform.
	Invariance  map[int]Invariance
	Sources     []*Source
	TargetNames []string // labels.csv columns other than id, in file order
	// Columns is columns.json: what each labels.csv column means (nil
	// without it: every column undeclared).
	Columns *Columns
	Skipped []string // with ReadFolderSkipping: the sources left out, each with its error

	names     map[int]string // class id → name
	known     map[int]bool   // class ids
	palette   color.Palette
	maxPixels int
}

// Invariance says which geometric transforms keep a class's label true.
// Flip true means mirror images keep the label (the default when classes.json
// does not say "flip"). MaxRotate is the largest rotation in degrees that keeps
// the label; MaxRotate < 0 means no limit (the default when classes.json does
// not say "max_rotate"), 0 means no rotation at all.
type Invariance struct {
	Flip      bool
	MaxRotate float64
}

// Limits of a plain folder.
const (
	// maxFolderSources is the most images a plain folder may hold.
	maxFolderSources = 1_000_000
	// maxFolderClassID is the largest class id: masks are 8-bit and 255 is
	// manifest.IgnoreID.
	maxFolderClassID = 254
	// folderMaxInstanceID is the largest id a 16-bit instance mask can hold.
	folderMaxInstanceID = 65535
	// maxClassesBytes bounds classes.json (255 classes fit in a few KB).
	maxClassesBytes = 1 << 20
	// maxLabelsBytes bounds labels.csv: a million rows of an id and a few
	// targets fit.
	maxLabelsBytes = 64 << 20
	// maxLabelLineBytes bounds one line of labels.csv, so a huge header or
	// row is refused after reading this much of it.
	maxLabelLineBytes = 64 << 10
	// maxLabelColumns bounds the columns of labels.csv (the id and the
	// targets).
	maxLabelColumns = 256
	// maxNameText bounds class and target names, as recipes do: every
	// record repeats them.
	maxNameText = 64
)

// checkClassName refuses a class name that cannot be used safely: it names
// count targets, appears in every record and may become a file name in
// reports, so it must be a safe file name of at most maxNameText bytes.
func checkClassName(name string) error {
	if len(name) > maxNameText {
		return fmt.Errorf("class name %.40q… is %d bytes; at most %d", name, len(name), maxNameText)
	}
	return manifest.SafeName("class name", name)
}

// checkTargetName refuses a labels.csv column name longer than maxNameText
// bytes or holding control characters or invalid UTF-8.
func checkTargetName(name string) error {
	switch {
	case len(name) > maxNameText:
		return fmt.Errorf("name %.40q… is %d bytes; a target name may have at most %d", name, len(name), maxNameText)
	case !utf8.ValidString(name) || strings.IndexFunc(name, unicode.IsControl) >= 0:
		return fmt.Errorf("name %q holds control characters or is not valid UTF-8", name)
	}
	return nil
}

// lineLimit passes bytes through and fails once a line (bytes between
// newlines) grows over max, so a reader above it never buffers more than
// that of one line. total counts the bytes read.
type lineLimit struct {
	r     io.Reader
	max   int
	cur   int // bytes of the current line so far
	line  int // 1-based line number of the current line
	total int64
}

type lineLimitError struct{ line int }

func (e *lineLimitError) Error() string { return fmt.Sprintf("line %d is too long", e.line) }

func (l *lineLimit) Read(b []byte) (int, error) {
	if l.line == 0 {
		l.line = 1
	}
	if len(b) > l.max+1 {
		b = b[:l.max+1]
	}
	n, err := l.r.Read(b)
	for i, c := range b[:n] {
		if c == '\n' {
			l.cur = 0
			l.line++
			continue
		}
		l.cur++
		if l.cur > l.max {
			l.total += int64(i)
			return i, &lineLimitError{l.line}
		}
	}
	l.total += int64(n)
	return n, err
}

// File and folder names of a plain folder (images/, masks/ and instances/ are
// manifest.ImagesDir, MasksDir and InstancesDir).
const (
	folderLabelsFile  = "labels.csv"
	folderClassesFile = "classes.json"
)

// folderImageExts are the image extensions read from images/ (lower case).
var folderImageExts = map[string]bool{
	".png": true, ".jpg": true, ".jpeg": true, ".bmp": true,
	".tif": true, ".tiff": true, ".webp": true,
}

const folderImagePattern = "<stem>.<png|jpg|jpeg|bmp|tif|tiff|webp>"

// folderFormats are the image.DecodeConfig format names we accept; anything
// else registered in the binary (say, GIF) is refused as an unknown format.
var folderFormats = map[string]bool{"png": true, "jpeg": true, "bmp": true, "tiff": true, "webp": true}

// IsPlainFolder reports whether dir has images/ and masks/ folders and no
// dataset.json (a folder with dataset.json is a trueset dataset).
func IsPlainFolder(dir string) bool {
	if _, err := os.Lstat(filepath.Join(dir, manifest.DatasetFile)); !errors.Is(err, fs.ErrNotExist) {
		return false
	}
	return folderIsDir(filepath.Join(dir, manifest.ImagesDir)) && folderIsDir(filepath.Join(dir, manifest.MasksDir))
}

func folderIsDir(p string) bool {
	st, err := os.Stat(p)
	return err == nil && st.IsDir()
}

// ReadFolder reads a plain labeled folder. maxPixels bounds width·height of
// every image, mask and instance file; it must be positive.
func ReadFolder(dir string, maxPixels int) (*Folder, error) {
	return ReadFolderSkipping(dir, maxPixels, false)
}

// ReadFolderSkipping is ReadFolder, but with skip set a source whose image,
// mask or instances cannot be read (corrupt, truncated, over the pixel
// budget, mismatched sizes, unknown mask values) is left out and its error
// listed in Folder.Skipped instead of failing the whole folder. Problems of
// the folder itself (layout, labels.csv, classes.json) still fail.
func ReadFolderSkipping(dir string, maxPixels int, skip bool) (*Folder, error) {
	f, err := scanFolder(dir, maxPixels, skip, nil)
	if err != nil {
		return nil, err
	}
	for _, s := range f.Sources {
		f.finishSource(s)
	}
	return f, nil
}

// scanFolder reads a plain labeled folder one source at a time. With each
// nil every source is kept in Folder.Sources (not yet finished, see
// finishSource); otherwise each is handed to each in stem order and not
// kept, so only one source's pixels are in memory at a time.
func scanFolder(dir string, maxPixels int, skip bool, each func(s *Source, files folderSourceFiles) error) (*Folder, error) {
	if maxPixels <= 0 {
		return nil, fmt.Errorf("read %s: the pixel budget must be positive, got %d", dir, maxPixels)
	}
	if _, err := os.Lstat(filepath.Join(dir, manifest.DatasetFile)); !errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("%s: has %s: it is a trueset dataset, not a plain labeled folder", dir, manifest.DatasetFile)
	}
	// A trueset folder without dataset.json is an incomplete dataset (an
	// interrupted or failed run), not a plain folder to read afresh.
	for _, name := range []string{manifest.ManifestFile, manifest.RunMarkerFile} {
		if _, err := os.Lstat(filepath.Join(dir, name)); !errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%s: has %s but no %s: it is an incomplete trueset dataset (an interrupted run; finish it with --resume), not a plain labeled folder",
				dir, name, manifest.DatasetFile)
		}
	}
	imagesDir := filepath.Join(dir, manifest.ImagesDir)
	masksDir := filepath.Join(dir, manifest.MasksDir)
	instDir := filepath.Join(dir, manifest.InstancesDir)
	for _, d := range []string{imagesDir, masksDir} {
		if !folderIsDir(d) {
			return nil, fmt.Errorf("%s: missing folder: a plain labeled folder needs %s/ and %s/", d, manifest.ImagesDir, manifest.MasksDir)
		}
	}

	images, err := folderList(imagesDir, func(ext string) bool { return folderImageExts[ext] },
		"an image (.png, .jpg, .jpeg, .bmp, .tif, .tiff or .webp)", folderImagePattern)
	if err != nil {
		return nil, err
	}
	if len(images) == 0 {
		return nil, fmt.Errorf("%s: no images", imagesDir)
	}
	if err := folderCaseClash(imagesDir, images); err != nil {
		return nil, err
	}
	isPNG := func(ext string) bool { return ext == ".png" }
	masks, err := folderList(masksDir, isPNG, "a PNG mask (.png)", "<stem>.png")
	if err != nil {
		return nil, err
	}
	var insts map[string]string
	if _, err := os.Stat(instDir); err == nil {
		if !folderIsDir(instDir) {
			return nil, fmt.Errorf("%s: not a folder", instDir)
		}
		if insts, err = folderList(instDir, isPNG, "a PNG instance mask (.png)", "<stem>.png"); err != nil {
			return nil, err
		}
	}
	stems := folderSortedKeys(images)
	if err := folderPair(imagesDir, images, masksDir, masks, instDir, insts); err != nil {
		return nil, err
	}

	// The small text files first, so a typo there costs no decoding.
	classes, inv, err := readFolderClasses(filepath.Join(dir, folderClassesFile))
	if err != nil {
		return nil, err
	}
	cols, err := readFolderColumns(filepath.Join(dir, folderColumnsFile), classes)
	if err != nil {
		return nil, err
	}
	var targetNames []string
	targets := map[string]map[string]manifest.Value{}
	var lines map[string]int
	lp := filepath.Join(dir, folderLabelsFile)
	if _, err := os.Lstat(lp); err == nil {
		if targetNames, targets, lines, err = readFolderLabels(lp, images, cols); err != nil {
			return nil, err
		}
	} else if !errors.Is(err, fs.ErrNotExist) {
		return nil, err
	}
	if cols != nil {
		inCSV := map[string]bool{}
		for _, n := range targetNames {
			inCSV[n] = true
		}
		for _, n := range sortedKeys(cols.Columns) {
			if cols.Columns[n].Kind == "image" && !inCSV[n] {
				return nil, fmt.Errorf("%s: columns.%s is an image column, but %s has no column %q; an image column is carried from labels.csv", filepath.Join(dir, folderColumnsFile), n, folderLabelsFile, n)
			}
		}
	}
	// The class names and glyphs of objects, before the class table is
	// complete (without classes.json it is class-<id>).
	nameOf := func(id int) string { return fmt.Sprintf("class-%d", id) }
	if classes != nil {
		byID := map[int]string{}
		for _, c := range classes {
			byID[c.ID] = c.Name
		}
		nameOf = func(id int) string { return byID[id] }
	}
	known := map[int]bool{}
	for _, c := range classes {
		known[c.ID] = true
	}

	f := &Folder{Dir: dir, Invariance: inv, TargetNames: targetNames, Columns: cols}
	var seen [256]bool // class ids found in the masks
	classOf := make([]int32, folderMaxInstanceID+1)
	where := make([]int32, folderMaxInstanceID+1)
	for _, stem := range stems {
		files := folderSourceFiles{
			stem:      stem,
			image:     filepath.Join(imagesDir, images[stem]),
			mask:      filepath.Join(masksDir, masks[stem]),
			instances: folderOptionalPath(instDir, insts[stem]),
		}
		s, err := readFolderSource(files, maxPixels, classes != nil, known, &seen, classOf, where)
		if err != nil {
			if skip {
				f.Skipped = append(f.Skipped, err.Error())
				continue
			}
			return nil, err
		}
		if t := targets[stem]; t != nil {
			s.Targets = t
		}
		if cols != nil {
			if err := cols.checkSource(s, nameOf, filepath.Join(dir, folderLabelsFile), lines[stem]); err != nil {
				return nil, err
			}
		}
		if each == nil {
			f.Sources = append(f.Sources, s)
		} else if err := each(s, files); err != nil {
			return nil, err
		}
	}

	if classes == nil {
		classes = []manifest.Class{{ID: 0, Name: "background", Color: folderClassColor(0)}}
		for id := 1; id <= maxFolderClassID; id++ {
			if seen[id] {
				classes = append(classes, manifest.Class{ID: id, Name: fmt.Sprintf("class-%d", id), Color: folderClassColor(id)})
			}
		}
	}
	f.Classes = classes
	f.names = map[int]string{}
	f.known = map[int]bool{}
	for _, c := range classes {
		f.names[c.ID] = c.Name
		f.known[c.ID] = true
	}
	f.palette = manifest.Palette(classes)
	f.maxPixels = maxPixels
	return f, nil
}

// finishSource gives a source read by scanFolder the folder's palette and
// its objects their class names and declared glyphs.
func (f *Folder) finishSource(s *Source) {
	s.Mask.Palette = f.palette
	for i := range s.Objects {
		s.Objects[i].ClassName = f.names[s.Objects[i].Class]
		s.Objects[i].Glyph = f.Columns.glyph(s.Objects[i].ClassName)
	}
}

// reread reads a source of a scanned folder again (augment works on one
// source at a time) and checks that its files are the bytes scanFolder read.
func (f *Folder) reread(files folderSourceFiles, sum []byte, targets map[string]manifest.Value) (*Source, error) {
	var seen [256]bool
	classOf := make([]int32, folderMaxInstanceID+1)
	where := make([]int32, folderMaxInstanceID+1)
	s, err := readFolderSource(files, f.maxPixels, true, f.known, &seen, classOf, where)
	if err != nil {
		return nil, err
	}
	if !bytes.Equal(s.sum, sum) {
		return nil, fmt.Errorf("%s: changed while augment was reading the folder (its files differ from the first read); run again on a folder nobody is changing", filepath.Join(f.Dir, manifest.ImagesDir, filepath.Base(files.image)))
	}
	f.finishSource(s)
	s.Targets = targets
	return s, nil
}

func folderOptionalPath(dir, name string) string {
	if name == "" {
		return ""
	}
	return filepath.Join(dir, name)
}

func folderSortedKeys(m map[string]string) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	return keys
}

// folderList maps stem → file name for the files of dir. It refuses
// sub-folders, files whose extension ok rejects, two files with one stem, and
// more than maxFolderSources files (reading the listing in batches so a huge
// folder is refused without listing all of it).
func folderList(dir string, ok func(ext string) bool, want, pattern string) (map[string]string, error) {
	d, err := os.Open(dir)
	if err != nil {
		return nil, err
	}
	defer d.Close()
	out := map[string]string{}
	for {
		batch, err := d.ReadDir(4096)
		for _, e := range batch {
			name := e.Name()
			if strings.HasPrefix(name, ".") {
				continue
			}
			p := filepath.Join(dir, name)
			regular := e.Type().IsRegular()
			if !regular && !e.IsDir() {
				st, err := os.Stat(p) // follow symbolic links
				if err != nil {
					return nil, err
				}
				regular = st.Mode().IsRegular()
			}
			if !regular {
				return nil, fmt.Errorf("%s: not a regular file; %s/ must hold only files named %s", p, filepath.Base(dir), pattern)
			}
			ext := filepath.Ext(name)
			if !ok(strings.ToLower(ext)) {
				return nil, fmt.Errorf("%s: not %s", p, want)
			}
			stem := strings.TrimSuffix(name, ext)
			if stem == "" {
				return nil, fmt.Errorf("%s: empty file stem", p)
			}
			// The stem becomes the sample id and its output file names.
			if err := manifest.SafeName("file stem", stem); err != nil {
				return nil, fmt.Errorf("%s: %w; rename the file", p, err)
			}
			if prev, dup := out[stem]; dup {
				return nil, fmt.Errorf("%s and %s: two files with the stem %q; keep one", filepath.Join(dir, prev), p, stem)
			}
			out[stem] = name
			if len(out) > maxFolderSources {
				return nil, fmt.Errorf("%s: more than %d files; a plain folder holds at most %d samples", dir, maxFolderSources, maxFolderSources)
			}
		}
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return nil, fmt.Errorf("%s: %w", dir, err)
		}
	}
}

// folderCaseClash refuses stems that differ only in letter case: their
// outputs would overwrite each other on case-insensitive file systems.
func folderCaseClash(dir string, files map[string]string) error {
	lower := map[string]string{}
	for _, stem := range folderSortedKeys(files) {
		k := strings.ToLower(stem)
		if prev, ok := lower[k]; ok {
			return fmt.Errorf("%s and %s: stems differ only in letter case; outputs would collide on case-insensitive file systems",
				filepath.Join(dir, files[prev]), filepath.Join(dir, files[stem]))
		}
		lower[k] = stem
	}
	return nil
}

// folderPair checks that images and masks pair one to one and that every
// instance file has an image.
func folderPair(imagesDir string, images map[string]string, masksDir string, masks map[string]string, instDir string, insts map[string]string) error {
	var noMask []string
	for _, stem := range folderSortedKeys(images) {
		if _, ok := masks[stem]; !ok {
			noMask = append(noMask, stem)
		}
	}
	if len(noMask) > 0 {
		s := noMask[0]
		more := ""
		if len(noMask) > 1 {
			more = fmt.Sprintf(" (and %d more images without masks)", len(noMask)-1)
		}
		return fmt.Errorf("%s: image without a mask: expected %s%s", filepath.Join(imagesDir, images[s]), filepath.Join(masksDir, s+".png"), more)
	}
	for _, stem := range folderSortedKeys(masks) {
		if _, ok := images[stem]; !ok {
			return fmt.Errorf("%s: mask without an image: no %s", filepath.Join(masksDir, masks[stem]), filepath.Join(imagesDir, stem+".<png|jpg|jpeg|bmp|tif|tiff|webp>"))
		}
	}
	for _, stem := range folderSortedKeys(insts) {
		if _, ok := images[stem]; !ok {
			return fmt.Errorf("%s: instance mask without an image: no %s", filepath.Join(instDir, insts[stem]), filepath.Join(imagesDir, stem+".<png|jpg|jpeg|bmp|tif|tiff|webp>"))
		}
	}
	return nil
}

// folderClassEntry is one classes.json entry as written; pointers tell an
// absent field from a zero one.
type folderClassEntry struct {
	ID        *int     `json:"id"`
	Name      *string  `json:"name"`
	Color     []int    `json:"color"`
	Flip      *bool    `json:"flip"`
	MaxRotate *float64 `json:"max_rotate"`
}

// readFolderClasses reads classes.json; a missing file gives nil classes.
func readFolderClasses(p string) ([]manifest.Class, map[int]Invariance, error) {
	inv := map[int]Invariance{}
	if _, err := os.Lstat(p); errors.Is(err, fs.ErrNotExist) {
		return nil, inv, nil
	}
	b, err := safefile.Read(p, folderClassesFile, maxClassesBytes)
	if err != nil {
		return nil, nil, err
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var entries []folderClassEntry
	if t := bytes.TrimSpace(b); len(t) == 0 || t[0] != '[' {
		return nil, nil, fmt.Errorf("%s: not a JSON list; expected [{\"id\": 1, \"name\": \"leaf\", \"color\": [r, g, b], \"flip\": false, \"max_rotate\": 15}, ...]", p)
	}
	if err := dec.Decode(&entries); err != nil {
		var syn *json.SyntaxError
		var typ *json.UnmarshalTypeError
		switch {
		case errors.As(err, &syn):
			return nil, nil, fmt.Errorf("%s:%d: %v", p, folderLine(b, syn.Offset), err)
		case errors.As(err, &typ):
			return nil, nil, fmt.Errorf("%s:%d: %q must be %s, not a JSON %s", p, folderLine(b, typ.Offset), typ.Field, folderJSONKind(typ.Type.String()), typ.Value)
		}
		return nil, nil, fmt.Errorf("%s: %v (the fields of a class are \"id\", \"name\", \"color\", \"flip\" and \"max_rotate\")", p, err)
	}
	if dec.More() {
		return nil, nil, fmt.Errorf("%s: data after the list of classes", p)
	}
	byID := map[int]manifest.Class{}
	names := map[string]int{}
	for i, e := range entries {
		at := fmt.Sprintf("%s: entry %d", p, i+1)
		if e.ID == nil {
			return nil, nil, fmt.Errorf("%s: no \"id\"", at)
		}
		id := *e.ID
		at = fmt.Sprintf("%s (id %d)", at, id)
		switch {
		case id == manifest.IgnoreID:
			return nil, nil, fmt.Errorf("%s: id 255 is the ignore value (\"no label here\"), not a class", at)
		case id < 0 || id > maxFolderClassID:
			return nil, nil, fmt.Errorf("%s: class ids are 0..%d (8-bit masks; 255 = ignore)", at, maxFolderClassID)
		}
		if _, dup := byID[id]; dup {
			return nil, nil, fmt.Errorf("%s: id %d is listed twice", at, id)
		}
		c := manifest.Class{ID: id, Name: fmt.Sprintf("class-%d", id), Color: folderClassColor(id)}
		if id == 0 {
			c.Name = "background"
		}
		if e.Name != nil {
			c.Name = strings.TrimSpace(*e.Name)
			if c.Name == "" {
				return nil, nil, fmt.Errorf("%s: empty name", at)
			}
			if id == 0 && c.Name != "background" {
				return nil, nil, fmt.Errorf("%s: id 0 is background in every trueset dataset; name it \"background\" or leave it out (got %q)", at, c.Name)
			}
			if err := checkClassName(c.Name); err != nil {
				return nil, nil, fmt.Errorf("%s: %w", at, err)
			}
		}
		if prev, dup := names[c.Name]; dup {
			return nil, nil, fmt.Errorf("%s: name %q is already class %d", at, c.Name, prev)
		}
		names[c.Name] = id
		if e.Color != nil {
			if len(e.Color) != 3 {
				return nil, nil, fmt.Errorf("%s: color must be [r, g, b], got %d numbers", at, len(e.Color))
			}
			for k, v := range e.Color {
				if v < 0 || v > 255 {
					return nil, nil, fmt.Errorf("%s: color component %d is %d, outside 0..255", at, k+1, v)
				}
				c.Color[k] = uint8(v)
			}
		}
		if e.Flip != nil || e.MaxRotate != nil {
			r := Invariance{Flip: true, MaxRotate: -1}
			if e.Flip != nil {
				r.Flip = *e.Flip
			}
			if e.MaxRotate != nil {
				m := *e.MaxRotate
				if math.IsNaN(m) || m < 0 || m > 180 {
					return nil, nil, fmt.Errorf("%s: max_rotate is %v; it must be 0..180 degrees (leave it out for no limit)", at, m)
				}
				r.MaxRotate = m
			}
			inv[id] = r
		}
		byID[id] = c
	}
	if _, ok := byID[0]; !ok {
		if prev, dup := names["background"]; dup {
			return nil, nil, fmt.Errorf("%s: class %d is named \"background\", the name of id 0", p, prev)
		}
		byID[0] = manifest.Class{ID: 0, Name: "background", Color: folderClassColor(0)}
	}
	classes := make([]manifest.Class, 0, len(byID))
	for _, c := range byID {
		classes = append(classes, c)
	}
	sort.Slice(classes, func(i, j int) bool { return classes[i].ID < classes[j].ID })
	return classes, inv, nil
}

// folderLine is the 1-based line of byte offset off in b.
func folderLine(b []byte, off int64) int {
	if off > int64(len(b)) {
		off = int64(len(b))
	}
	return 1 + bytes.Count(b[:off], []byte("\n"))
}

// folderJSONKind names, for people, the JSON kind a Go field type wants.
func folderJSONKind(goType string) string {
	switch {
	case strings.Contains(goType, "int"):
		return "a whole number"
	case strings.Contains(goType, "float"):
		return "a number"
	case strings.Contains(goType, "bool"):
		return "true or false"
	case strings.Contains(goType, "string"):
		return "a string"
	case strings.HasPrefix(goType, "[]"):
		return "a list"
	}
	return "an object"
}

func folderQuoted(ss []string) string {
	q := make([]string, len(ss))
	for i, s := range ss {
		q[i] = strconv.Quote(s)
	}
	return strings.Join(q, ", ")
}

// folderClassColor is the fixed color of class id when classes.json does not
// give one: black for background, else a hue stepped by the golden angle
// (≈137.5°, so neighbouring ids get far-apart hues; common practice for
// distinct label colors) with saturation and value cycling through two and
// three levels. Ids 1..254 get 254 distinct colors, none black or white.
func folderClassColor(id int) [3]uint8 {
	if id <= 0 {
		return [3]uint8{0, 0, 0}
	}
	k := id - 1
	h := math.Mod(float64(k)*0.3819660112501051, 1) * 6 // 1 − 1/φ of a turn, in sextants
	s := [2]float64{0.85, 0.55}[k%2]
	v := [3]float64{0.95, 0.75, 0.55}[(k/2)%3]
	i := math.Floor(h)
	f := h - i
	p, q, t := v*(1-s), v*(1-s*f), v*(1-s*(1-f))
	var r, g, b float64
	switch int(i) % 6 {
	case 0:
		r, g, b = v, t, p
	case 1:
		r, g, b = q, v, p
	case 2:
		r, g, b = p, v, t
	case 3:
		r, g, b = p, q, v
	case 4:
		r, g, b = t, p, v
	default:
		r, g, b = v, p, q
	}
	c := func(x float64) uint8 { return uint8(math.Round(x * 255)) }
	return [3]uint8{c(r), c(g), c(b)}
}

type folderSourceFiles struct {
	stem, image, mask, instances string // instances "" = none
}

// folderFile is an opened file whose header has been read and checked against
// the pixel budget.
type folderFile struct {
	path   string
	f      *os.File
	cfg    image.Config
	format string
	sum    []byte // SHA-256 of the file's bytes, once decoded
}

// openFolderFile opens p and reads only its header. It refuses an empty file,
// an unknown format, a corrupt header and a size over maxPixels.
func openFolderFile(p string, maxPixels int) (*folderFile, error) {
	f, err := safefile.Open(p)
	if err != nil {
		return nil, err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, err
	}
	switch {
	case st.Size() == 0:
		f.Close()
		return nil, fmt.Errorf("%s: empty file", p)
	case st.Size() > manifest.MaxSampleFileBytes:
		f.Close()
		return nil, fmt.Errorf("%s: %d bytes; an image, mask or instance file may hold at most %d", p, st.Size(), manifest.MaxSampleFileBytes)
	}
	cfg, format, err := image.DecodeConfig(bufio.NewReader(f))
	if err == nil && !folderFormats[format] {
		err = image.ErrFormat
	}
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %s", p, folderDecodeProblem(err))
	}
	if cfg.Width <= 0 || cfg.Height <= 0 {
		f.Close()
		return nil, fmt.Errorf("%s: corrupt: the header gives an empty size %d×%d", p, cfg.Width, cfg.Height)
	}
	if n := int64(cfg.Width) * int64(cfg.Height); n > int64(maxPixels) {
		f.Close()
		return nil, fmt.Errorf("%s: too large: the header says %d×%d = %d pixels, over the budget of %d pixels; not decoded",
			p, cfg.Width, cfg.Height, n, maxPixels)
	}
	if format == "jpeg" {
		// Decode work grows with the scans; count them first.
		limit := jpegScanLimit(cfg.Width, cfg.Height)
		if _, err := f.Seek(0, io.SeekStart); err != nil {
			f.Close()
			return nil, err
		}
		if n, _ := countJPEGScans(io.LimitReader(f, manifest.MaxSampleFileBytes), limit); n > limit {
			f.Close()
			return nil, fmt.Errorf("%s: too much decode work: over %d scans (progressive passes) for %d×%d pixels, at most %d; not decoded (save it again as a baseline JPEG or with the standard progressive passes)",
				p, limit, cfg.Width, cfg.Height, limit)
		}
	}
	return &folderFile{path: p, f: f, cfg: cfg, format: format}, nil
}

func (ff *folderFile) close() {
	if ff != nil {
		ff.f.Close()
	}
}

func (ff *folderFile) size() string { return fmt.Sprintf("%d×%d", ff.cfg.Width, ff.cfg.Height) }

// decode decodes the whole file and checks it has the size its header gave.
func (ff *folderFile) decode() (image.Image, error) {
	if _, err := ff.f.Seek(0, io.SeekStart); err != nil {
		return nil, err
	}
	// The bytes the decoder reads are hashed on the way, then the rest.
	h := sha256.New()
	lr := &io.LimitedReader{R: ff.f, N: manifest.MaxSampleFileBytes}
	m, _, err := image.Decode(bufio.NewReader(io.TeeReader(lr, h)))
	if err != nil {
		return nil, fmt.Errorf("%s: %s", ff.path, folderDecodeProblem(err))
	}
	if _, err := io.Copy(h, lr); err != nil {
		return nil, fmt.Errorf("%s: %v", ff.path, err)
	}
	ff.sum = h.Sum(nil)
	if b := m.Bounds(); b.Dx() != ff.cfg.Width || b.Dy() != ff.cfg.Height {
		return nil, fmt.Errorf("%s: corrupt: the header says %s but the pixels are %d×%d", ff.path, ff.size(), b.Dx(), b.Dy())
	}
	return m, nil
}

// pngKind returns the bit depth and color type from a PNG's IHDR chunk,
// which the PNG standard (ISO/IEC 15948 §11.2.2) puts first: 8 signature
// bytes, length, "IHDR", width, height, bit depth, color type.
func (ff *folderFile) pngKind() (depth, colorType byte, err error) {
	if ff.format != "png" {
		return 0, 0, fmt.Errorf("%s: %s content; masks and instance masks must be PNG (lossless)", ff.path, strings.ToUpper(ff.format))
	}
	var b [26]byte
	if _, err := ff.f.ReadAt(b[:], 0); err != nil || string(b[12:16]) != "IHDR" {
		return 0, 0, fmt.Errorf("%s: corrupt: no PNG header chunk", ff.path)
	}
	return b[24], b[25], nil
}

// folderDecodeProblem says in words what a decoder error means.
func folderDecodeProblem(err error) string {
	var (
		pngU  png.UnsupportedError
		jpegU jpeg.UnsupportedError
		tiffU tiff.UnsupportedError
	)
	switch {
	case errors.Is(err, image.ErrFormat):
		return "unknown format: not a PNG, JPEG, BMP, TIFF or WebP file"
	case errors.Is(err, io.ErrUnexpectedEOF), errors.Is(err, io.EOF):
		return "truncated: the file ends before the image does"
	case errors.As(err, &pngU), errors.As(err, &jpegU), errors.As(err, &tiffU), errors.Is(err, bmp.ErrUnsupported):
		return "unsupported variant of its format: " + err.Error()
	}
	return "corrupt: " + err.Error()
}

func folderColorType(depth, ct byte) string {
	switch ct {
	case 0:
		return fmt.Sprintf("%d-bit gray", depth)
	case 2:
		return fmt.Sprintf("%d-bit RGB", depth)
	case 3:
		return fmt.Sprintf("%d-bit indexed", depth)
	case 4:
		return fmt.Sprintf("%d-bit gray with alpha", depth)
	case 6:
		return fmt.Sprintf("%d-bit RGBA", depth)
	}
	return fmt.Sprintf("color type %d", ct)
}

// readFolderSource reads one image, its mask and its instances. With
// classesGiven, mask values must be in known; otherwise the values found are
// added to seen. classOf and where are scratch space of folderMaxInstanceID+1.
func readFolderSource(files folderSourceFiles, maxPixels int, classesGiven bool, known map[int]bool,
	seen *[256]bool, classOf, where []int32) (*Source, error) {
	img, err := openFolderFile(files.image, maxPixels)
	if err != nil {
		return nil, err
	}
	defer img.close()
	msk, err := openFolderFile(files.mask, maxPixels)
	if err != nil {
		return nil, err
	}
	defer msk.close()
	depth, ct, err := msk.pngKind()
	if err != nil {
		return nil, err
	}
	if !(ct == 3 || ct == 0 && depth == 8) {
		hint := ""
		switch {
		case ct == 0 && depth == 16:
			hint = " (16-bit instance ids belong in instances/)"
		case ct == 0:
			hint = " (gray below 8 bits is read scaled to 0..255, so its values would not be class ids)"
		}
		return nil, fmt.Errorf("%s: the PNG is %s; a semantic mask must be an indexed (paletted) or 8-bit gray PNG whose values are class ids%s",
			msk.path, folderColorType(depth, ct), hint)
	}
	if msk.cfg.Width != img.cfg.Width || msk.cfg.Height != img.cfg.Height {
		return nil, fmt.Errorf("%s is %s but %s is %s: a mask must have its image's size", msk.path, msk.size(), img.path, img.size())
	}
	var inst *folderFile
	if files.instances != "" {
		if inst, err = openFolderFile(files.instances, maxPixels); err != nil {
			return nil, err
		}
		defer inst.close()
		depth, ct, err := inst.pngKind()
		if err != nil {
			return nil, err
		}
		if ct != 0 || depth != 8 && depth != 16 {
			return nil, fmt.Errorf("%s: the PNG is %s; an instance mask must be a 16-bit (or 8-bit) gray PNG whose values are instance ids",
				inst.path, folderColorType(depth, ct))
		}
		if inst.cfg.Width != msk.cfg.Width || inst.cfg.Height != msk.cfg.Height {
			return nil, fmt.Errorf("%s is %s but %s is %s: an instance mask must have its mask's size", inst.path, inst.size(), msk.path, msk.size())
		}
	}

	mm, err := msk.decode()
	if err != nil {
		return nil, err
	}
	w, h := msk.cfg.Width, msk.cfg.Height
	mask := &image.Paletted{Pix: make([]uint8, w*h), Stride: w, Rect: image.Rect(0, 0, w, h)}
	switch m := mm.(type) {
	case *image.Paletted:
		for y := 0; y < h; y++ {
			copy(mask.Pix[y*w:(y+1)*w], m.Pix[y*m.Stride:])
		}
	case *image.Gray:
		for y := 0; y < h; y++ {
			copy(mask.Pix[y*w:(y+1)*w], m.Pix[y*m.Stride:])
		}
	default:
		// Only gray with a tRNS chunk gets here: the color type was checked.
		return nil, fmt.Errorf("%s: the gray PNG declares a transparent value (tRNS chunk), so it decodes to %s instead of class ids; remove the tRNS chunk",
			msk.path, folderModelName(mm.ColorModel()))
	}

	// Mask values: first pixel of each value, checked against the classes.
	var first [256]int
	for i := range first {
		first[i] = -1
	}
	for i, v := range mask.Pix {
		if first[v] < 0 {
			first[v] = i
		}
	}
	for v := 0; v < 256; v++ {
		if first[v] < 0 || v == 0 || v == manifest.IgnoreID {
			continue
		}
		if classesGiven && !known[v] {
			return nil, fmt.Errorf("%s: value %d (first at pixel x=%d, y=%d) is no class in %s; list it there or use 255 for \"ignore\"",
				msk.path, v, first[v]%w, first[v]/w, folderClassesFile)
		}
		seen[v] = true
	}

	var ids *image.Gray16
	var classes []int32 // class per instance id, for components
	if inst != nil {
		m, err := inst.decode()
		if err != nil {
			return nil, err
		}
		ids = image.NewGray16(image.Rect(0, 0, w, h))
		switch m := m.(type) {
		case *image.Gray16:
			for y := 0; y < h; y++ {
				copy(ids.Pix[y*ids.Stride:(y+1)*ids.Stride], m.Pix[y*m.Stride:])
			}
		case *image.Gray:
			for y := 0; y < h; y++ {
				for x := 0; x < w; x++ {
					ids.Pix[y*ids.Stride+2*x+1] = m.Pix[y*m.Stride+x]
				}
			}
		default:
			return nil, fmt.Errorf("%s: the gray PNG declares a transparent value (tRNS chunk), so it decodes to %s instead of instance ids; remove the tRNS chunk",
				inst.path, folderModelName(m.ColorModel()))
		}
		if classes, err = folderInstanceClasses(ids, mask, classOf, where); err != nil {
			return nil, fmt.Errorf("%s with %s: %w", inst.path, msk.path, err)
		}
	} else {
		if ids, classes, err = folderComponents(mask); err != nil {
			return nil, fmt.Errorf("%s: %w; split the objects yourself in %s/%s.png", msk.path, err, manifest.InstancesDir, files.stem)
		}
	}

	im, err := img.decode() // last: the label files are checked first
	if err != nil {
		return nil, err
	}
	stats := manifest.MeasureInstances(ids)
	objIDs := make([]int, 0, len(stats))
	for id := range stats {
		objIDs = append(objIDs, id)
	}
	sort.Ints(objIDs)
	objects := make([]manifest.Object, 0, len(objIDs))
	for _, id := range objIDs {
		st := stats[id]
		o := manifest.Object{Instance: id, Class: int(classes[id]), Box: st.BBox, Area: st.Area, Shown: 1, Shape: "labeled"}
		o.Measured(&st.M)
		objects = append(objects, o)
	}
	sum := sha256.New()
	for _, ff := range []*folderFile{img, msk, inst} {
		if ff != nil {
			sum.Write(ff.sum)
		}
	}
	return &Source{
		sum:       sum.Sum(nil),
		ID:        files.stem,
		Image:     FromImage(im),
		Mask:      mask,
		Instances: ids,
		Objects:   objects,
		Targets:   map[string]manifest.Value{},
	}, nil
}

func folderModelName(m color.Model) string {
	switch m {
	case color.NRGBAModel, color.RGBAModel:
		return "8-bit color with alpha"
	case color.NRGBA64Model, color.RGBA64Model:
		return "16-bit color with alpha"
	}
	return "color"
}

// folderInstanceClasses gives each instance id of a given instance mask the
// semantic class of its pixels, indexed by id (-1 = absent). It refuses an id
// on two classes, on background only, or on an ignore pixel. classOf and where
// are scratch slices of folderMaxInstanceID+1.
func folderInstanceClasses(ids *image.Gray16, mask *image.Paletted, classOf, where []int32) ([]int32, error) {
	for i := range classOf {
		classOf[i] = -1
	}
	w := mask.Rect.Dx()
	for i, c := range mask.Pix {
		id := int(ids.Pix[2*i])<<8 | int(ids.Pix[2*i+1])
		if id == 0 {
			continue
		}
		if c == manifest.IgnoreID {
			return nil, fmt.Errorf("instance %d has pixel x=%d, y=%d where the mask is 255 (ignore); ignore pixels must have instance 0", id, i%w, i/w)
		}
		switch prev := classOf[id]; {
		case prev < 0:
			classOf[id], where[id] = int32(c), int32(i)
		case prev != int32(c):
			p := int(where[id])
			return nil, fmt.Errorf("instance %d lies on two classes: %d (e.g. pixel x=%d, y=%d) and %d (pixel x=%d, y=%d); an instance must have one class",
				id, prev, p%w, p/w, c, i%w, i/w)
		}
	}
	for id, c := range classOf {
		if c == 0 {
			p := int(where[id])
			return nil, fmt.Errorf("instance %d lies on background (class 0) only, e.g. pixel x=%d, y=%d", id, p%w, p/w)
		}
	}
	return classOf, nil
}

// folderComponents labels the 4-connected regions of equal class in a
// semantic mask (pixels sharing an edge, not just a corner; a common-practice
// choice for splitting objects that touch diagonally). Background (0) and
// ignore (255) pixels get instance 0. Ids are 1, 2, … in raster order of each
// region's first pixel; classes[id] is the region's class (classes[0] = 0).
// More than 65535 regions is an error: a 16-bit instance mask cannot hold them.
func folderComponents(mask *image.Paletted) (ids *image.Gray16, classes []int32, err error) {
	b := mask.Rect
	w, h := b.Dx(), b.Dy()
	ids = image.NewGray16(image.Rect(0, 0, w, h))
	label := make([]uint16, w*h)
	classes = []int32{0}
	var stack []int32
	at := func(i int) uint8 { return mask.Pix[(i/w)*mask.Stride+i%w] }
	next := 0
	for i := range label {
		c := at(i)
		if c == 0 || c == manifest.IgnoreID || label[i] != 0 {
			continue
		}
		next++
		if next > folderMaxInstanceID {
			return nil, nil, fmt.Errorf("more than %d connected regions", folderMaxInstanceID)
		}
		classes = append(classes, int32(c))
		label[i] = uint16(next)
		stack = append(stack[:0], int32(i))
		for len(stack) > 0 {
			j := int(stack[len(stack)-1])
			stack = stack[:len(stack)-1]
			x, y := j%w, j/w
			// The four edge neighbours; -1 where the frame ends.
			nb := [4]int{-1, -1, -1, -1}
			if x > 0 {
				nb[0] = j - 1
			}
			if x+1 < w {
				nb[1] = j + 1
			}
			if y > 0 {
				nb[2] = j - w
			}
			if y+1 < h {
				nb[3] = j + w
			}
			for _, k := range nb {
				if k >= 0 && label[k] == 0 && at(k) == c {
					label[k] = uint16(next)
					stack = append(stack, int32(k))
				}
			}
		}
	}
	for i, l := range label {
		ids.Pix[2*i], ids.Pix[2*i+1] = uint8(l>>8), uint8(l)
	}
	return ids, classes, nil
}

// readFolderLabels reads labels.csv for the given stems (stem → image file)
// and returns the target names in column order, each stem's targets and
// each stem's line. A column columns.json declares numeric (a derived
// column other than text, an image column of type number) must hold numbers
// and one declared text stays text; an undeclared column is numeric when
// every cell is a number, text when most are not, and refused when most
// cells are numbers but some are not (a typo in a numeric column).
func readFolderLabels(p string, stems map[string]string, cols *Columns) ([]string, map[string]map[string]manifest.Value, map[string]int, error) {
	f, err := safefile.Open(p)
	if err != nil {
		return nil, nil, nil, err
	}
	defer f.Close()
	if st, err := f.Stat(); err == nil && st.Size() > maxLabelsBytes {
		return nil, nil, nil, fmt.Errorf("%s: %d bytes; a labels table may hold at most %d", p, st.Size(), maxLabelsBytes)
	}
	lr := &lineLimit{r: io.LimitReader(f, maxLabelsBytes+1), max: maxLabelLineBytes}
	r := csv.NewReader(bufio.NewReader(lr))
	r.ReuseRecord = false
	// tooLong turns a bound the reader hit into an error naming the file.
	tooLong := func(err error) error {
		var le *lineLimitError
		switch {
		case errors.As(err, &le):
			return fmt.Errorf("%s:%d: a line longer than %d bytes; a labels table holds short rows (an id and a few targets)", p, le.line, maxLabelLineBytes)
		case lr.total > maxLabelsBytes:
			return fmt.Errorf("%s: over %d bytes; a labels table may hold at most %d", p, maxLabelsBytes, maxLabelsBytes)
		}
		return fmt.Errorf("%s: %v", p, err)
	}
	r.FieldsPerRecord = -1 // checked below with a clearer message
	header, err := r.Read()
	if err == io.EOF && lr.total <= maxLabelsBytes {
		return nil, nil, nil, fmt.Errorf("%s: empty: a header row with an \"id\" column is required", p)
	}
	if err != nil {
		return nil, nil, nil, tooLong(err)
	}
	if len(header) > maxLabelColumns {
		return nil, nil, nil, fmt.Errorf("%s:1: %d columns; a labels table may have at most %d (an id and the targets)", p, len(header), maxLabelColumns)
	}
	header[0] = strings.TrimPrefix(header[0], "\ufeff")
	idCol := -1
	colAt := map[string]int{}
	for j, name := range header {
		name = strings.TrimSpace(name)
		header[j] = name
		if name == "" {
			return nil, nil, nil, fmt.Errorf("%s:1: column %d has no name", p, j+1)
		}
		if err := checkTargetName(name); err != nil {
			return nil, nil, nil, fmt.Errorf("%s:1: column %d: %w", p, j+1, err)
		}
		if prev, dup := colAt[name]; dup {
			return nil, nil, nil, fmt.Errorf("%s:1: columns %d and %d are both named %q", p, prev+1, j+1, name)
		}
		colAt[name] = j
		if name == "id" {
			idCol = j
		}
	}
	if idCol < 0 {
		return nil, nil, nil, fmt.Errorf("%s:1: no \"id\" column in the header (%s); the id column holds each image's file stem", p, strings.Join(header, ","))
	}
	type row struct {
		line  int
		id    string
		cells []string
	}
	var rows []row
	lineOf := map[string]int{}
	for {
		rec, err := r.Read()
		if err == io.EOF && lr.total <= maxLabelsBytes {
			break
		}
		if err != nil {
			return nil, nil, nil, tooLong(err)
		}
		line, _ := r.FieldPos(0)
		for j := range rec {
			rec[j] = strings.TrimSpace(rec[j])
		}
		if len(rec) != len(header) {
			return nil, nil, nil, fmt.Errorf("%s:%d: row has %d fields but the header has %d columns", p, line, len(rec), len(header))
		}
		id := rec[idCol]
		if id == "" {
			return nil, nil, nil, fmt.Errorf("%s:%d: empty id", p, line)
		}
		if err := manifest.SafeName("id", id); err != nil {
			return nil, nil, nil, fmt.Errorf("%s:%d: %w; the id column holds each image's file stem", p, line, err)
		}
		if _, ok := stems[id]; !ok {
			return nil, nil, nil, fmt.Errorf("%s:%d: id %q matches no image in %s/", p, line, id, manifest.ImagesDir)
		}
		if prev, dup := lineOf[id]; dup {
			return nil, nil, nil, fmt.Errorf("%s:%d: id %q already has a row on line %d", p, line, id, prev)
		}
		lineOf[id] = line
		for j, cell := range rec {
			if cell == "" {
				return nil, nil, nil, fmt.Errorf("%s:%d: column %q is empty for id %q; every cell needs a value", p, line, header[j], id)
			}
		}
		rows = append(rows, row{line, id, rec})
	}
	if len(lineOf) < len(stems) {
		var missing []string
		for id := range stems {
			if _, ok := lineOf[id]; !ok {
				missing = append(missing, id)
			}
		}
		sort.Strings(missing)
		more := ""
		if len(missing) > 3 {
			more = fmt.Sprintf(" and %d more", len(missing)-3)
			missing = missing[:3]
		}
		return nil, nil, nil, fmt.Errorf("%s: no row for %s%s; every image needs a row", p, folderQuoted(missing), more)
	}

	targets := make(map[string]map[string]manifest.Value, len(rows))
	for _, rw := range rows {
		targets[rw.id] = make(map[string]manifest.Value, len(header)-1)
	}
	var names []string
	for j, name := range header {
		if j == idCol {
			continue
		}
		names = append(names, name)
		want := cols.columnType(name)
		nums := make([]float64, len(rows))
		bad := -1 // the first row whose cell is not a number
		numbers := 0
		for i, rw := range rows {
			v, err := strconv.ParseFloat(rw.cells[j], 64)
			// An overflowing number (1e999) stays a number and is refused
			// below as not finite, like inf, rather than turning the column
			// into text.
			if err != nil && !(errors.Is(err, strconv.ErrRange) && math.IsInf(v, 0)) {
				if bad < 0 {
					bad = i
				}
				continue
			}
			numbers++
			nums[i] = v
		}
		numeric := bad < 0
		switch {
		case want == "text":
			numeric = false
		case want == "number" && bad >= 0:
			return nil, nil, nil, fmt.Errorf("%s:%d: column %q: %q is not a number; %s declares the column numeric", p, rows[bad].line, name, rows[bad].cells[j], folderColumnsFile)
		case want == "" && bad >= 0 && 2*numbers > len(rows):
			return nil, nil, nil, fmt.Errorf(`%s:%d: column %q: %q is not a number, but %d of the column's %d cells are; fix the cell, or declare the column text in %s ({"columns": {%q: {"kind": "image", "type": "text"}}})`,
				p, rows[bad].line, name, rows[bad].cells[j], numbers, len(rows), folderColumnsFile, name)
		}
		for i, rw := range rows {
			if !numeric {
				targets[rw.id][name] = manifest.Text(rw.cells[j])
				continue
			}
			if math.IsNaN(nums[i]) || math.IsInf(nums[i], 0) {
				return nil, nil, nil, fmt.Errorf("%s:%d: column %q: %q is not a finite number", p, rw.line, name, rw.cells[j])
			}
			targets[rw.id][name] = manifest.Number(nums[i])
		}
	}
	return names, targets, lineOf, nil
}
