package manifest

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"github.com/trueset/trueset/internal/safefile"
	"hash"
	"image"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// RunMarkerFile is written when a run starts and removed when it finishes.
// A folder holding it but no dataset.json is an interrupted run that
// --resume can continue; its content names the run (recipe or plan hash,
// seed, count, …) so a resume of anything else is refused.
const RunMarkerFile = ".trueset-run.json"

// Writer writes one dataset folder: sample files (from any goroutine), then
// records in index order, then dataset.json, which marks it complete.
type Writer struct {
	Dir    string
	fs     FS
	f      File
	bw     *bufio.Writer
	sum    hash.Hash
	bytes  int64
	marker bool
	lock   *Lock   // held from Create or Resume to Finish or Abort
	pack   *packer // the packed layout; nil = folder
}

// CreateOptions configures Create and Resume.
type CreateOptions struct {
	Force  bool   // write into a folder that is not empty
	FS     FS     // nil = OS
	Marker []byte // the run's identity, written to RunMarkerFile; nil = no marker
	// Layout is LayoutFolder ("" too) or LayoutPacked; PackBytes bounds a
	// pack (0 = DefaultPackBytes).
	Layout    string
	PackBytes int64
}

// Create prepares dir for a new dataset. A folder that already holds files is
// refused unless force is set.
func Create(dir string, force bool) (*Writer, error) {
	return CreateWith(dir, CreateOptions{Force: force})
}

// CreateWith prepares dir for a new dataset with options.
func CreateWith(dir string, o CreateOptions) (*Writer, error) {
	fsys := o.FS
	if fsys == nil {
		fsys = OS
	}
	// The lock comes first, so two runs started at once into one empty
	// folder cannot both find it empty.
	lk, err := LockDir(dir)
	if err != nil {
		return nil, err
	}
	ok := false
	defer func() {
		if !ok {
			lk.Unlock()
		}
	}()
	if ents, err := os.ReadDir(dir); err == nil && !o.Force {
		for _, e := range ents {
			if e.Name() != LockFile {
				return nil, fmt.Errorf("%s is not empty; choose a new folder or pass --force to write over a previous dataset", dir)
			}
		}
	}
	// A stale dataset.json would mark a half-written folder complete; it is
	// removed only when it is a trueset one (--force never deletes files
	// trueset did not write).
	for _, name := range []string{DatasetFile, ShardFile} {
		p := filepath.Join(dir, name)
		if b, err := os.ReadFile(p); err == nil {
			var probe struct {
				Format  string   `json:"format"`
				Dataset *Dataset `json:"dataset"`
			}
			if json.Unmarshal(b, &probe) != nil || (probe.Format != Format && probe.Dataset == nil) {
				return nil, fmt.Errorf("%s is not a trueset file; move it away before writing a dataset into %s", p, dir)
			}
			if err := fsys.Remove(p); err != nil {
				return nil, err
			}
		}
	}
	// The marker goes first, so a run that cannot even write it (a full
	// disk) leaves nothing behind that a new run would have to --force over.
	if err := fsys.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	w := &Writer{Dir: dir, fs: fsys, sum: sha256.New(), lock: lk}
	if o.Marker != nil {
		if err := writeAtomic(fsys, filepath.Join(dir, RunMarkerFile), o.Marker); err != nil {
			return nil, err
		}
		w.marker = true
	}
	if o.Layout == LayoutPacked {
		w.pack = newPacker(dir, o.PackBytes, fsys)
		if err := w.pack.createIndex(); err != nil {
			return nil, err
		}
	} else {
		for _, sub := range []string{ImagesDir, MasksDir, InstancesDir} {
			if err := fsys.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
				return nil, err
			}
		}
	}
	f, err := fsys.OpenFile(filepath.Join(dir, ManifestFile), os.O_RDWR|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return nil, err
	}
	w.f, w.bw = f, bufio.NewWriterSize(f, 1<<16)
	ok = true
	return w, nil
}

// ErrComplete is returned by Resume for a folder that is already finished.
var ErrComplete = errors.New("the dataset is already complete (dataset.json is there); nothing to resume")

// ErrNoRun matches (errors.Is) Resume's error for a folder without a run
// marker.
var ErrNoRun = errors.New("no run to resume")

type noRunError struct{ dir string }

func (e noRunError) Error() string {
	return fmt.Sprintf("%s holds no interrupted trueset run (%s is missing); start a new run instead", e.dir, RunMarkerFile)
}

func (e noRunError) Is(target error) bool { return target == ErrNoRun }

// MismatchError is Resume's refusal of a folder whose run marker names
// another run (another seed, recipe, count, …).
type MismatchError struct {
	Dir        string
	There, Now []byte // the run markers: in the folder, and of this run
}

func (e *MismatchError) Error() string {
	return fmt.Sprintf("%s was started as a different run (%s); resume with the same recipe, seed and options, or write to a new folder",
		e.Dir, strings.Join(markerDiff(e.There, e.Now), "; "))
}

// markerDiff names the fields in which two run markers differ, as
// "seed is 1 there, 2 now"; both markers whole when they are not JSON objects.
func markerDiff(there, now []byte) []string {
	var a, b map[string]json.RawMessage
	if json.Unmarshal(there, &a) != nil || json.Unmarshal(now, &b) != nil {
		return []string{fmt.Sprintf("there: %s, now: %s", there, now)}
	}
	keys := map[string]bool{}
	for k := range a {
		keys[k] = true
	}
	for k := range b {
		keys[k] = true
	}
	var diffs []string
	for _, k := range sortedKeys(keys) {
		x, y := a[k], b[k]
		if bytes.Equal(x, y) {
			continue
		}
		show := func(v json.RawMessage) string {
			if v == nil {
				return "absent"
			}
			return string(v)
		}
		diffs = append(diffs, fmt.Sprintf("%s is %s there, %s now", k, show(x), show(y)))
	}
	if len(diffs) == 0 {
		return []string{fmt.Sprintf("there: %s, now: %s", there, now)}
	}
	return diffs
}

func sortedKeys(m map[string]bool) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// Resume reopens an interrupted run in dir. The folder's run marker must
// equal o.Marker (else a *MismatchError; no marker: an error wrapping
// ErrNoRun; dataset.json there: ErrComplete, and a stale marker beside it is
// removed). Leftover temporary files are removed; manifest.jsonl is
// cut back to its longest prefix of complete records whose files are all
// present with their SHA-256, then to keep(n) records of those n (so a
// caller can cut back to a whole job). It returns the Writer, positioned to
// append, and the number of records kept.
func Resume(dir string, o CreateOptions, keep func(n int) int) (*Writer, int, error) {
	fsys := o.FS
	if fsys == nil {
		fsys = OS
	}
	if _, err := os.Stat(dir); err != nil {
		return nil, 0, noRunError{dir}
	}
	lk, err := LockDir(dir)
	if err != nil {
		return nil, 0, err
	}
	ok := false
	defer func() {
		if !ok {
			lk.Unlock()
		}
	}()
	mp := filepath.Join(dir, RunMarkerFile)
	for _, name := range []string{DatasetFile, ShardFile} {
		if _, err := os.Stat(filepath.Join(dir, name)); err == nil {
			// Its presence alone proves nothing: it must be a finished
			// run's, agreeing with the manifest beside it.
			if err := checkFinished(dir, name); err != nil {
				return nil, 0, err
			}
			// A run killed between writing dataset.json and removing its
			// marker is complete; the marker and temporary files are stale.
			if _, err := os.Stat(mp); err == nil {
				if err := removeTemps(fsys, dir); err != nil {
					return nil, 0, err
				}
				if err := fsys.Remove(mp); err != nil {
					return nil, 0, err
				}
			}
			return nil, 0, ErrComplete
		}
	}
	got, err := os.ReadFile(mp)
	if err != nil {
		return nil, 0, noRunError{dir}
	}
	if !bytes.Equal(bytes.TrimSpace(got), bytes.TrimSpace(o.Marker)) {
		return nil, 0, &MismatchError{Dir: dir, There: bytes.TrimSpace(got), Now: bytes.TrimSpace(o.Marker)}
	}
	if err := removeTemps(fsys, dir); err != nil {
		return nil, 0, err
	}
	var ps *packScan
	if o.Layout == LayoutPacked {
		if ps, err = newPackScan(dir); err != nil {
			return nil, 0, err
		}
		defer ps.close()
	} else {
		for _, sub := range []string{ImagesDir, MasksDir, InstancesDir} {
			if err := fsys.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
				return nil, 0, err
			}
		}
	}
	path := filepath.Join(dir, ManifestFile)
	data, err := os.ReadFile(path)
	if err != nil && !os.IsNotExist(err) {
		return nil, 0, err
	}
	var ends []int // byte offset after each good record
	off := 0
	for off < len(data) {
		nl := bytes.IndexByte(data[off:], '\n')
		if nl < 0 {
			break // a torn last line
		}
		line := data[off : off+nl]
		var rec Record
		if json.Unmarshal(line, &rec) != nil {
			break
		}
		if ps != nil && !ps.intact(&rec, line) || ps == nil && !filesIntact(dir, &rec) {
			break
		}
		off += nl + 1
		ends = append(ends, off)
	}
	n := len(ends)
	if keep != nil {
		n = keep(n)
	}
	cut := 0
	if n > 0 {
		cut = ends[n-1]
	}
	f, err := fsys.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, 0, err
	}
	if err := f.Truncate(int64(cut)); err != nil {
		f.Close()
		return nil, 0, fmt.Errorf("truncate %s: %w", path, err)
	}
	if _, err := f.Seek(int64(cut), io.SeekStart); err != nil {
		f.Close()
		return nil, 0, err
	}
	w := &Writer{Dir: dir, fs: fsys, f: f, bw: bufio.NewWriterSize(f, 1<<16), sum: sha256.New(), bytes: int64(cut), marker: true, lock: lk}
	if ps != nil {
		if w.pack, err = ps.rebuild(n, fsys, o.PackBytes); err != nil {
			f.Close()
			return nil, 0, err
		}
	}
	w.sum.Write(data[:cut])
	ok = true
	return w, n, nil
}

// filesIntact reports whether a record's three files exist inside dir and
// match their checksums.
func filesIntact(dir string, r *Record) bool {
	for _, f := range [][2]string{{"image", r.Image}, {"mask", r.Mask}, {"instances", r.Instances}} {
		if !SafeRel(f[1]) {
			return false
		}
		b, err := os.ReadFile(filepath.Join(dir, f[1]))
		if err != nil || SHA256Hex(b) != r.SHA256[f[0]] {
			return false
		}
	}
	return true
}

// removeTemps deletes the temporary files an interrupted run left behind
// (names written by writeAtomic: ".NAME.tmp…"); nothing else.
func removeTemps(fsys FS, dir string) error {
	for _, sub := range []string{".", ImagesDir, MasksDir, InstancesDir} {
		ents, err := os.ReadDir(filepath.Join(dir, sub))
		if err != nil {
			continue
		}
		for _, e := range ents {
			if n := e.Name(); !e.IsDir() && strings.HasPrefix(n, ".") && strings.Contains(n, ".tmp") {
				if err := fsys.Remove(filepath.Join(dir, sub, n)); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

// WriteFiles encodes a sample's image, semantic mask and instance mask as
// PNG, writes each atomically and fills the record's paths and checksums.
// Safe to call from several goroutines, each with its own Encoder.
func (w *Writer) WriteFiles(rec *Record, enc *Encoder, img, mask, inst image.Image) (int64, error) {
	rec.Image = ImagesDir + "/" + rec.ID + ".png"
	rec.Mask = MasksDir + "/" + rec.ID + ".png"
	rec.Instances = InstancesDir + "/" + rec.ID + ".png"
	rec.SHA256 = map[string]string{}
	var n int64
	files := [3]struct {
		key, rel string
		m        image.Image
	}{{"image", rec.Image, img}, {"mask", rec.Mask, mask}, {"instances", rec.Instances, inst}}
	// Sample i starts with file i mod 3, so workers on neighbouring samples
	// create files in different folders at the same moment: the kernel
	// serializes creations in one folder (on Linux, under the folder's
	// inode lock; see README, Performance). The bytes written do not depend
	// on the order.
	first := (rec.Index%3 + 3) % 3
	for k := range files {
		it := files[(first+k)%3]
		b, err := enc.Encode(it.m)
		if err != nil {
			return n, fmt.Errorf("encode %s: %w", it.rel, err)
		}
		if w.pack != nil {
			w.pack.stage(it.rel, b)
		} else if err := writeAtomic(w.fs, filepath.Join(w.Dir, it.rel), b); err != nil {
			return n, err
		}
		rec.SHA256[it.key] = SHA256Hex(b)
		n += int64(len(b))
	}
	return n, nil
}

// Append adds one record to manifest.jsonl; call in index order.
func (w *Writer) Append(rec *Record) error {
	b := rec.line
	if b == nil {
		var err error
		if b, err = MarshalRecord(rec); err != nil {
			return err
		}
	}
	if len(b) > MaxRecordBytes {
		return fmt.Errorf("record %s is %d bytes of JSON; a manifest line may hold at most %d (too many objects, or names too long)", rec.ID, len(b), MaxRecordBytes)
	}
	return w.appendLine(rec, b)
}

// AppendRaw adds a record whose manifest line is line (without its
// newline) as it is, so a conversion keeps manifest.jsonl byte for byte.
func (w *Writer) AppendRaw(rec *Record, line []byte) error {
	if len(line) > MaxRecordBytes {
		return fmt.Errorf("record %s is %d bytes of JSON; a manifest line may hold at most %d", rec.ID, len(line), MaxRecordBytes)
	}
	return w.appendLine(rec, line)
}

func (w *Writer) appendLine(rec *Record, b []byte) error {
	if w.pack != nil {
		if err := w.pack.appendSample(rec, b); err != nil {
			return err
		}
	}
	b = append(b[:len(b):len(b)], '\n')
	w.sum.Write(b)
	w.bytes += int64(len(b))
	if _, err := w.bw.Write(b); err != nil {
		return fmt.Errorf("write %s: %w", filepath.Join(w.Dir, ManifestFile), unwrapPath(err))
	}
	return nil
}

// WriteRaw writes b to rel inside the dataset atomically (files carried over
// byte for byte).
func (w *Writer) WriteRaw(rel string, b []byte) error {
	if w.pack != nil {
		w.pack.stage(rel, b)
		return nil
	}
	return writeAtomic(w.fs, filepath.Join(w.Dir, rel), b)
}

// finishPacks closes the packs and the index and sets d.Layout (nil in
// the folder layout).
func (w *Writer) finishPacks(d *Dataset) error {
	d.Layout = nil
	if w.pack == nil {
		return nil
	}
	l, err := w.pack.finish()
	if err != nil {
		return err
	}
	d.Layout = l
	return nil
}

func (w *Writer) dropMarker() error {
	if !w.marker {
		return nil
	}
	if err := w.fs.Remove(filepath.Join(w.Dir, RunMarkerFile)); err != nil && !os.IsNotExist(err) {
		return err
	}
	return nil
}

// Abort closes the manifest without marking the dataset complete.
func (w *Writer) Abort() {
	if w.pack != nil {
		w.pack.abort()
	}
	w.bw.Flush()
	w.f.Close()
	w.lock.Unlock()
}

func (w *Writer) flush() error {
	p := filepath.Join(w.Dir, ManifestFile)
	if err := w.bw.Flush(); err != nil {
		w.f.Close()
		return fmt.Errorf("write %s: %w", p, unwrapPath(err))
	}
	if err := w.f.Sync(); err != nil {
		w.f.Close()
		return fmt.Errorf("sync %s: %w", p, err)
	}
	if err := w.f.Close(); err != nil {
		return fmt.Errorf("close %s: %w", p, err)
	}
	return nil
}

// Finish flushes the manifest to disk, records its SHA-256 in d and writes
// dataset.json last. It returns the bytes of manifest and dataset.json.
func (w *Writer) Finish(d *Dataset) (int64, error) {
	defer w.lock.Unlock()
	if err := w.flush(); err != nil {
		return 0, err
	}
	d.Format = Format
	d.ManifestSHA256 = hex.EncodeToString(w.sum.Sum(nil))
	if err := w.finishPacks(d); err != nil {
		return 0, err
	}
	b, err := MarshalDataset(d)
	if err != nil {
		return 0, err
	}
	if err := writeAtomic(w.fs, filepath.Join(w.Dir, DatasetFile), b); err != nil {
		return 0, err
	}
	if err := w.dropMarker(); err != nil {
		return 0, err
	}
	return w.bytes + int64(len(b)), nil
}

// checkFinished confirms that DIR/name (dataset.json or shard.json) is what a
// finished run writes: known format, and the checksum it records equals the
// manifest beside it.
func checkFinished(dir, name string) error {
	p := filepath.Join(dir, name)
	b, err := safefile.Read(p, name, MaxDatasetBytes)
	if err != nil {
		return err
	}
	var d Dataset
	want := ""
	if name == ShardFile {
		var s Shard
		if err := json.Unmarshal(b, &s); err != nil {
			return fmt.Errorf("%s: %v; the folder is not a finished run: start again with --force", p, err)
		}
		d, want = s.Dataset, s.PartSHA256
	} else {
		if err := json.Unmarshal(b, &d); err != nil {
			return fmt.Errorf("%s: %v; the folder is not a finished run: start again with --force", p, err)
		}
		want = d.ManifestSHA256
	}
	if err := CheckFormat(p, d.Format); err != nil {
		return err
	}
	f, err := safefile.Open(filepath.Join(dir, ManifestFile))
	if err != nil {
		return fmt.Errorf("%s is there but %v; the folder is not a finished run: start again with --force", p, err)
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return err
	}
	if got := hex.EncodeToString(h.Sum(nil)); got != want {
		return fmt.Errorf("%s records manifest SHA-256 %q but manifest.jsonl has %s; the folder is not a finished run: start again with --force", p, want, got)
	}
	return nil
}
