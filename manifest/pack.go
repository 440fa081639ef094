package manifest

import (
	"archive/tar"
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"hash"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"sync"
	"time"

	"github.com/trueset/trueset/internal/safefile"
)

// The packed layout (DEVELOPERS.md, "Packed layout"): each split's samples
// in a sequence of POSIX tar archives of the pax format, PacksDir/
// <split>-<NNNNN>.tar, each at most Layout.PackBytes (a pack holds whole
// samples; a single sample larger than the bound gets a pack of its own).
// A pack starts with a pax global extended header whose one record is a
// comment naming the layout and the pack (PackComment), so the archive is
// pax whatever its members need. A sample is four consecutive members, in
// this order: records/<id>.json (its manifest line without the newline),
// then the record's image, mask and instances paths. Every member is a
// regular file with mode 0644, owner 0:0, no owner names and mtime 0, in a
// ustar header (a pax extended header only where a name needs one). The
// record's SHA-256s check the PNG members; verify checks the record member
// against manifest.jsonl. PacksDir/index.jsonl has one IndexEntry per
// sample in manifest order. manifest.jsonl is the folder layout's, byte
// for byte.

// Layout names, the values of Layout.Kind and of the --layout flags.
const (
	LayoutFolder = "folder"
	LayoutPacked = "packed"
)

// PacksDir holds the packs and their index; IndexFile is the index's name
// inside it; RecordsDir is the members' folder for records.
const (
	PacksDir   = "packs"
	IndexFile  = "index.jsonl"
	RecordsDir = "records"
)

// DefaultPackBytes is the default bound on one pack's size.
const DefaultPackBytes = 256 << 20

// MinPackBytes is the least bound a pack may be given.
const MinPackBytes = 64 << 10

// PackComment is the comment record of a pack's global header.
func PackComment(name string) string { return "trueset packed layout: " + name }

// globalHeader is the pax global extended header a pack starts with.
func globalHeader(name string) *tar.Header {
	return &tar.Header{Typeflag: tar.TypeXGlobalHeader, PAXRecords: map[string]string{"comment": PackComment(name)}}
}

// tarTrailer is the end-of-archive marker: two zero 512-byte blocks
// (POSIX.1-2017, pax, "ustar Interchange Format").
const tarTrailer = 1024

// Layout is dataset.json's "layout", present only for the packed layout.
type Layout struct {
	Kind        string     `json:"kind"`       // LayoutPacked
	PackBytes   int64      `json:"pack_bytes"` // the bound each pack keeps to
	Packs       []PackInfo `json:"packs"`      // every pack, in name order
	IndexSHA256 string     `json:"index_sha256"`
}

// PackInfo describes one pack.
type PackInfo struct {
	Name    string `json:"name"` // relative to the dataset folder: packs/train-00000.tar
	Split   string `json:"split"`
	Samples int    `json:"samples"`
	Bytes   int64  `json:"bytes"`
	SHA256  string `json:"sha256"`
}

// IndexEntry is one line of packs/index.jsonl: where a sample's members
// are. At is [start of its first header, end of its last member's
// padding); each of Files is [member name, data offset, data size].
type IndexEntry struct {
	ID    string         `json:"id"`
	Split string         `json:"split"`
	Pack  string         `json:"pack"`
	At    [2]int64       `json:"at"`
	Files [4]IndexedFile `json:"files"`
}

// IndexedFile is one member of IndexEntry.Files, written as the JSON
// array [name, offset, size].
type IndexedFile struct {
	Name      string
	Off, Size int64
}

// MarshalJSON writes [name, offset, size].
func (f IndexedFile) MarshalJSON() ([]byte, error) {
	return json.Marshal([3]any{f.Name, f.Off, f.Size})
}

// UnmarshalJSON reads [name, offset, size].
func (f *IndexedFile) UnmarshalJSON(b []byte) error {
	var raw []json.RawMessage
	if err := json.Unmarshal(b, &raw); err != nil || len(raw) != 3 {
		return fmt.Errorf("a file is [name, offset, size], not %.40s", b)
	}
	if err := json.Unmarshal(raw[0], &f.Name); err != nil {
		return fmt.Errorf("a file's name: %w", err)
	}
	if err := json.Unmarshal(raw[1], &f.Off); err != nil || f.Off < 0 {
		return fmt.Errorf("file %q: offset %s is not a byte offset", f.Name, raw[1])
	}
	if err := json.Unmarshal(raw[2], &f.Size); err != nil || f.Size < 0 {
		return fmt.Errorf("file %q: size %s is not a byte count", f.Name, raw[2])
	}
	return nil
}

// RunLayout is a run's layout and pack bound as its run marker and
// CreateOptions take them: ("", 0) for the folder layout ("" or
// LayoutFolder), else LayoutPacked and the bound (DefaultPackBytes for 0).
func RunLayout(layout string, bound int64) (string, int64) {
	if layout != LayoutPacked {
		return "", 0
	}
	if bound <= 0 {
		bound = DefaultPackBytes
	}
	return layout, bound
}

// appendJSON appends the entry as json.Marshal writes it (keys in field
// order, no spaces), without reflection: the ordered writer does this once
// per sample. TestIndexEntryJSON holds it to json.Marshal.
func (e *IndexEntry) appendJSON(b []byte) []byte {
	b = append(b, `{"id":`...)
	b = appendJSONString(b, e.ID)
	b = append(b, `,"split":`...)
	b = appendJSONString(b, e.Split)
	b = append(b, `,"pack":`...)
	b = appendJSONString(b, e.Pack)
	b = append(b, `,"at":[`...)
	b = strconv.AppendInt(b, e.At[0], 10)
	b = append(b, ',')
	b = strconv.AppendInt(b, e.At[1], 10)
	b = append(b, `],"files":[`...)
	for i, f := range e.Files {
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, '[')
		b = appendJSONString(b, f.Name)
		b = append(b, ',')
		b = strconv.AppendInt(b, f.Off, 10)
		b = append(b, ',')
		b = strconv.AppendInt(b, f.Size, 10)
		b = append(b, ']')
	}
	return append(b, "]}"...)
}

// appendJSONString appends s as a JSON string as json.Marshal writes it;
// names here are safe names (no quote, backslash or control character), so
// only the HTML characters json.Marshal escapes need care: those go
// through json.Marshal itself.
func appendJSONString(b []byte, s string) []byte {
	for i := 0; i < len(s); i++ {
		if c := s[i]; c < 0x20 || c == '"' || c == '\\' || c == '<' || c == '>' || c == '&' || c >= 0x80 {
			q, _ := json.Marshal(s)
			return append(b, q...)
		}
	}
	b = append(b, '"')
	b = append(b, s...)
	return append(b, '"')
}

// PackName is the name of split's pack number n.
func PackName(split string, n int) string {
	return fmt.Sprintf("%s/%s-%05d.tar", PacksDir, split, n)
}

var packNameRE = regexp.MustCompile(`^(.+)-([0-9]{5})\.tar$`)

// RecordMember is the pack member that holds record id's manifest line.
func RecordMember(id string) string { return RecordsDir + "/" + id + ".json" }

// ParseSize reads a size such as 268435456, 64KiB, 256MiB or 1GiB (also
// KB, MB, GB as the same powers of 1024, which is what people mean here).
func ParseSize(s string) (int64, error) {
	num, mul := s, int64(1)
	for _, u := range []struct {
		suffix string
		m      int64
	}{{"KiB", 1 << 10}, {"MiB", 1 << 20}, {"GiB", 1 << 30}, {"KB", 1 << 10}, {"MB", 1 << 20}, {"GB", 1 << 30}, {"K", 1 << 10}, {"M", 1 << 20}, {"G", 1 << 30}, {"B", 1}} {
		if len(s) > len(u.suffix) && s[len(s)-len(u.suffix):] == u.suffix {
			num, mul = s[:len(s)-len(u.suffix)], u.m
			break
		}
	}
	n, err := strconv.ParseInt(num, 10, 64)
	if err != nil || n < 1 {
		return 0, fmt.Errorf("%q is not a size; write bytes or a number with KiB, MiB or GiB, such as 256MiB", s)
	}
	if n > (1<<62)/mul {
		return 0, fmt.Errorf("%q is too large", s)
	}
	return n * mul, nil
}

// countWriter counts and hashes what passes through it to a buffered file.
type countWriter struct {
	w   *bufio.Writer
	n   int64
	sum hash.Hash
}

func (c *countWriter) Write(b []byte) (int, error) {
	n, err := c.w.Write(b)
	c.n += int64(n)
	c.sum.Write(b[:n])
	return n, err
}

// openPack is the pack a split is writing now.
type openPack struct {
	info PackInfo
	num  int
	f    File
	cw   *countWriter
	tw   *tar.Writer
}

// packer is the packed layout's part of a Writer.
type packer struct {
	dir   string
	bound int64
	fs    FS
	open  map[string]*openPack // by split
	next  map[string]int       // next pack number per split
	done  []PackInfo
	index File
	ibw   *bufio.Writer
	isum  hash.Hash

	mu     sync.Mutex
	staged map[string][]byte // record path -> bytes, from WriteFiles/WriteRaw until Append
	line   []byte            // the index line being written, reused
}

func newPacker(dir string, bound int64, fsys FS) *packer {
	if bound <= 0 {
		bound = DefaultPackBytes
	}
	return &packer{dir: dir, bound: bound, fs: fsys, open: map[string]*openPack{}, next: map[string]int{}, isum: sha256.New(), staged: map[string][]byte{}}
}

// stage keeps a copy of b for rel until the record is appended.
func (p *packer) stage(rel string, b []byte) {
	c := append([]byte(nil), b...)
	p.mu.Lock()
	p.staged[rel] = c
	p.mu.Unlock()
}

func (p *packer) take(rel string) ([]byte, bool) {
	p.mu.Lock()
	defer p.mu.Unlock()
	b, ok := p.staged[rel]
	delete(p.staged, rel)
	return b, ok
}

var epoch = time.Unix(0, 0).UTC()

// header is the fixed tar header of a member.
func header(name string, b []byte) *tar.Header {
	return &tar.Header{Typeflag: tar.TypeReg, Name: name, Size: int64(len(b)), Mode: 0o644, ModTime: epoch, Format: tar.FormatPAX}
}

// memberBytes is the exact size a member takes in a pack: its ustar header
// (and a pax extended header where its name needs one) and its data
// padded to 512 bytes. Short names, the usual case, take one block;
// others are measured by writing the headers to a counter, so it is
// exactly what archive/tar writes.
func memberBytes(name string, b []byte) (int64, error) {
	if len(name) <= 100 && isASCII(name) {
		return 512 + (int64(len(b))+511)/512*512, nil
	}
	c := &countOnly{}
	tw := tar.NewWriter(c)
	if err := tw.WriteHeader(header(name, b)); err != nil {
		return 0, err
	}
	return c.n + (int64(len(b))+511)/512*512, nil
}

func isASCII(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] == 0 || s[i] >= 0x80 {
			return false
		}
	}
	return true
}

type countOnly struct{ n int64 }

func (c *countOnly) Write(b []byte) (int, error) { c.n += int64(len(b)); return len(b), nil }

// appendSample writes one sample's four members to its split's pack, and
// its index line. line is the manifest line without the newline.
func (p *packer) appendSample(rec *Record, line []byte) error {
	names := MemberNames(rec.ID)
	if rec.Image != names[1] || rec.Mask != names[2] || rec.Instances != names[3] {
		return fmt.Errorf("record %s: files %s, %s, %s; the packed layout stores a sample's files as %s, %s, %s", rec.ID, rec.Image, rec.Mask, rec.Instances, names[1], names[2], names[3])
	}
	var data [4][]byte
	data[0] = line
	for i, rel := range names[1:] {
		b, ok := p.take(rel)
		if !ok {
			return fmt.Errorf("record %s: %s was not written before its record (packed layout)", rec.ID, rel)
		}
		data[i+1] = b
	}
	var size int64
	for i := range names {
		n, err := memberBytes(names[i], data[i])
		if err != nil {
			return fmt.Errorf("record %s: %s: %w", rec.ID, names[i], err)
		}
		size += n
	}
	op := p.open[rec.Split]
	if op != nil && op.info.Samples > 0 && op.cw.n+size+tarTrailer > p.bound {
		if err := p.close(op); err != nil {
			return err
		}
		op = nil
	}
	if op == nil {
		var err error
		if op, err = p.start(rec.Split); err != nil {
			return err
		}
	}
	e := IndexEntry{ID: rec.ID, Split: rec.Split, Pack: op.info.Name}
	e.At[0] = op.cw.n
	for i := range names {
		if err := op.tw.WriteHeader(header(names[i], data[i])); err != nil {
			return fmt.Errorf("write %s: %w", filepath.Join(p.dir, op.info.Name), unwrapPath(err))
		}
		off := op.cw.n
		if _, err := op.tw.Write(data[i]); err != nil {
			return fmt.Errorf("write %s: %w", filepath.Join(p.dir, op.info.Name), unwrapPath(err))
		}
		if err := op.tw.Flush(); err != nil { // the member's padding
			return fmt.Errorf("write %s: %w", filepath.Join(p.dir, op.info.Name), unwrapPath(err))
		}
		e.Files[i] = IndexedFile{names[i], off, int64(len(data[i]))}
	}
	e.At[1] = op.cw.n
	op.info.Samples++
	p.line = e.appendJSON(p.line[:0])
	b := append(p.line, '\n')
	p.line = b
	p.isum.Write(b)
	if _, err := p.ibw.Write(b); err != nil {
		return fmt.Errorf("write %s: %w", filepath.Join(p.dir, PacksDir, IndexFile), unwrapPath(err))
	}
	return nil
}

// start opens split's next pack.
func (p *packer) start(split string) (*openPack, error) {
	if err := SafeName("split", split); err != nil {
		return nil, err
	}
	n := p.next[split]
	p.next[split] = n + 1
	name := PackName(split, n)
	f, err := p.fs.OpenFile(filepath.Join(p.dir, name), os.O_RDWR|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return nil, err
	}
	op := &openPack{info: PackInfo{Name: name, Split: split}, num: n, f: f}
	op.cw = &countWriter{w: bufio.NewWriterSize(f, 1<<20), sum: sha256.New()}
	op.tw = tar.NewWriter(op.cw)
	err = op.tw.WriteHeader(globalHeader(name))
	if err == nil {
		err = op.tw.Flush() // its records' padding, so the first sample starts on a block
	}
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("write %s: %w", filepath.Join(p.dir, name), unwrapPath(err))
	}
	p.open[split] = op
	return op, nil
}

// close ends a pack: the end-of-archive blocks, flushed and synced.
func (p *packer) close(op *openPack) error {
	path := filepath.Join(p.dir, op.info.Name)
	if err := op.tw.Close(); err != nil {
		return fmt.Errorf("write %s: %w", path, unwrapPath(err))
	}
	if err := op.cw.w.Flush(); err != nil {
		return fmt.Errorf("write %s: %w", path, unwrapPath(err))
	}
	if err := op.f.Sync(); err != nil {
		return fmt.Errorf("sync %s: %w", path, err)
	}
	if err := op.f.Close(); err != nil {
		return fmt.Errorf("close %s: %w", path, err)
	}
	op.info.Bytes = op.cw.n
	op.info.SHA256 = hex.EncodeToString(op.cw.sum.Sum(nil))
	p.done = append(p.done, op.info)
	delete(p.open, op.info.Split)
	return nil
}

// finish closes every open pack and the index and returns the layout.
func (p *packer) finish() (*Layout, error) {
	splits := make([]string, 0, len(p.open))
	for s := range p.open {
		splits = append(splits, s)
	}
	sort.Strings(splits)
	for _, s := range splits {
		if err := p.close(p.open[s]); err != nil {
			return nil, err
		}
	}
	ip := filepath.Join(p.dir, PacksDir, IndexFile)
	if err := p.ibw.Flush(); err != nil {
		return nil, fmt.Errorf("write %s: %w", ip, unwrapPath(err))
	}
	if err := p.index.Sync(); err != nil {
		return nil, fmt.Errorf("sync %s: %w", ip, err)
	}
	if err := p.index.Close(); err != nil {
		return nil, fmt.Errorf("close %s: %w", ip, err)
	}
	packs := append([]PackInfo(nil), p.done...)
	sort.Slice(packs, func(i, j int) bool { return packs[i].Name < packs[j].Name })
	return &Layout{Kind: LayoutPacked, PackBytes: p.bound, Packs: packs, IndexSHA256: hex.EncodeToString(p.isum.Sum(nil))}, nil
}

// abort flushes what is buffered (so a resume finds it) and closes files.
func (p *packer) abort() {
	for _, op := range p.open {
		op.cw.w.Flush()
		op.f.Close()
	}
	if p.ibw != nil {
		p.ibw.Flush()
		p.index.Close()
	}
}

// createIndex makes packs/ and an empty index.
func (p *packer) createIndex() error {
	if err := p.fs.MkdirAll(filepath.Join(p.dir, PacksDir), 0o755); err != nil {
		return err
	}
	f, err := p.fs.OpenFile(filepath.Join(p.dir, PacksDir, IndexFile), os.O_RDWR|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return err
	}
	p.index, p.ibw = f, bufio.NewWriterSize(f, 1<<16)
	return nil
}

// packScan checks, sample by sample in manifest order, that an
// interrupted packed run's index lines and members are all on disk with
// their checksums: the resume keeps the longest such prefix.
type packScan struct {
	dir     string
	index   []byte // packs/index.jsonl as found
	off     int    // bytes of index consumed by intact samples
	ends    []int  // index byte offset after each intact sample
	entries []IndexEntry
	files   map[string]*os.File
}

func newPackScan(dir string) (*packScan, error) {
	ip := filepath.Join(dir, PacksDir, IndexFile)
	var b []byte
	if _, err := os.Lstat(ip); err == nil {
		if b, err = safefile.Read(ip, "pack index", MaxIndexBytes); err != nil {
			return nil, err
		}
	}
	return &packScan{dir: dir, index: b, files: map[string]*os.File{}}, nil
}

func (s *packScan) close() {
	for _, f := range s.files {
		f.Close()
	}
}

// intact reports whether rec (manifest line line) is the next index
// line's sample and its four members are in its pack as recorded.
func (s *packScan) intact(rec *Record, line []byte) bool {
	nl := -1
	for i := s.off; i < len(s.index); i++ {
		if s.index[i] == '\n' {
			nl = i
			break
		}
	}
	if nl < 0 {
		return false
	}
	var e IndexEntry
	if json.Unmarshal(s.index[s.off:nl], &e) != nil || e.ID != rec.ID || e.Split != rec.Split || e.Pack != PackName(rec.Split, packNumber(e.Pack)) {
		return false
	}
	want := MemberNames(rec.ID)
	if rec.Image != want[1] || rec.Mask != want[2] || rec.Instances != want[3] {
		return false
	}
	f := s.files[e.Pack]
	if f == nil {
		var err error
		if f, err = openPackFile(s.dir, e.Pack); err != nil {
			return false
		}
		s.files[e.Pack] = f
	}
	sums := [4]string{SHA256Hex(line), rec.SHA256["image"], rec.SHA256["mask"], rec.SHA256["instances"]}
	for i, m := range e.Files {
		if m.Name != want[i] || m.Size > MaxSampleFileBytes {
			return false
		}
		b := make([]byte, m.Size)
		if _, err := f.ReadAt(b, m.Off); err != nil && !(err == io.EOF && m.Size == 0) {
			return false
		}
		if SHA256Hex(b) != sums[i] {
			return false
		}
	}
	if st, err := f.Stat(); err != nil || st.Size() < e.At[1] {
		return false
	}
	s.entries = append(s.entries, e)
	s.off = nl + 1
	s.ends = append(s.ends, s.off)
	return true
}

// packNumber is the NNNNN of a pack name, -1 if it has none.
func packNumber(name string) int {
	m := packNameRE.FindStringSubmatch(filepath.Base(name))
	if m == nil {
		return -1
	}
	n, _ := strconv.Atoi(m[2])
	return n
}

// rebuild makes the packer that continues after the first n intact
// samples: the index is cut to their lines; every pack holding some of
// them is cut to its last one's end (the last pack of each split stays open
// to append to, earlier ones get their end-of-archive blocks again); packs
// holding none are removed.
func (s *packScan) rebuild(n int, fsys FS, bound int64) (*packer, error) {
	s.close()
	p := newPacker(s.dir, bound, fsys)
	if err := fsys.MkdirAll(filepath.Join(s.dir, PacksDir), 0o755); err != nil {
		return nil, err
	}
	type state struct {
		split   string
		num     int
		end     int64
		samples int
	}
	packs := map[string]*state{}
	last := map[string]string{} // split -> its last pack
	for _, e := range s.entries[:n] {
		st := packs[e.Pack]
		if st == nil {
			st = &state{split: e.Split, num: packNumber(e.Pack)}
			packs[e.Pack] = st
		}
		st.end, st.samples = e.At[1], st.samples+1
		if l, ok := last[e.Split]; !ok || packNumber(l) < st.num {
			last[e.Split] = e.Pack
		}
	}
	// Packs no kept sample is in (named as trueset names them) go.
	ents, _ := os.ReadDir(filepath.Join(s.dir, PacksDir))
	for _, de := range ents {
		name := PacksDir + "/" + de.Name()
		if packs[name] == nil && de.Type().IsRegular() && packNameRE.MatchString(de.Name()) {
			if err := fsys.Remove(filepath.Join(s.dir, name)); err != nil {
				return nil, err
			}
		}
	}
	names := make([]string, 0, len(packs))
	for name := range packs {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		st := packs[name]
		path := filepath.Join(s.dir, name)
		f, err := fsys.OpenFile(path, os.O_RDWR, 0o644)
		if err != nil {
			return nil, err
		}
		if err := f.Truncate(st.end); err != nil {
			f.Close()
			return nil, fmt.Errorf("truncate %s: %w", path, err)
		}
		sum := sha256.New()
		if err := hashPrefix(sum, path, st.end); err != nil {
			f.Close()
			return nil, err
		}
		if _, err := f.Seek(st.end, io.SeekStart); err != nil {
			f.Close()
			return nil, err
		}
		op := &openPack{info: PackInfo{Name: name, Split: st.split, Samples: st.samples}, num: st.num, f: f}
		op.cw = &countWriter{w: bufio.NewWriterSize(f, 1<<20), n: st.end, sum: sum}
		op.tw = tar.NewWriter(op.cw)
		if p.next[st.split] <= st.num {
			p.next[st.split] = st.num + 1
		}
		p.open[st.split] = op
		if last[st.split] != name {
			if err := p.close(op); err != nil {
				return nil, err
			}
		}
	}
	ip := filepath.Join(s.dir, PacksDir, IndexFile)
	f, err := fsys.OpenFile(ip, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, err
	}
	cut := 0
	if n > 0 {
		cut = s.ends[n-1]
	}
	if err := f.Truncate(int64(cut)); err != nil {
		f.Close()
		return nil, fmt.Errorf("truncate %s: %w", ip, err)
	}
	if _, err := f.Seek(int64(cut), io.SeekStart); err != nil {
		f.Close()
		return nil, err
	}
	p.index, p.ibw = f, bufio.NewWriterSize(f, 1<<16)
	p.isum.Write(s.index[:cut])
	return p, nil
}

// openPackFile opens pack name inside dir: a regular file, no link out.
func openPackFile(dir, name string) (*os.File, error) {
	p, err := ResolveInside(dir, name)
	if err != nil {
		return nil, err
	}
	return safefile.Open(p)
}

// hashPrefix feeds the first n bytes of the file at path to h.
func hashPrefix(h hash.Hash, path string, n int64) error {
	f, err := safefile.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	if _, err := io.Copy(h, io.NewSectionReader(f, 0, n)); err != nil {
		return fmt.Errorf("read %s: %w", path, err)
	}
	return nil
}
