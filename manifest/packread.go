package manifest

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"

	"github.com/trueset/trueset/internal/safefile"
)

// MaxIndexBytes bounds packs/index.jsonl (about 300 bytes a sample: ten
// million samples and more).
const MaxIndexBytes = 4 << 30

// maxIndexLine bounds one index line (ids are at most a few hundred bytes).
const maxIndexLine = 64 << 10

// memberPrefixes are the folders of a sample's four members, in pack order,
// and their suffixes.
var memberPrefixes = [4][2]string{{RecordsDir + "/", ".json"}, {ImagesDir + "/", ".png"}, {MasksDir + "/", ".png"}, {InstancesDir + "/", ".png"}}

// MemberNames are the four member names of sample id, in pack order.
func MemberNames(id string) [4]string {
	var n [4]string
	for i, p := range memberPrefixes {
		n[i] = p[0] + id + p[1]
	}
	return n
}

// packIndex is a packed dataset's index, loaded once per process and kept
// small: an id, a pack number and four offsets and sizes per sample.
type packIndex struct {
	dir     string
	packs   []string // names relative to dir
	byID    map[string]int32
	entries []packEntry
}

type packEntry struct {
	pack int32
	off  [4]int64
	size [4]int64
}

type indexCacheKey struct {
	dir        string
	size, mod  int64
	layoutFile string
}

var (
	indexMu    sync.Mutex
	indexCache = map[string]struct {
		key indexCacheKey
		px  *packIndex
	}{}
)

// packIndexFor returns the index of the packed dataset (or job shard) in
// dir, or nil when dir is in the folder layout. It is read again when
// dataset.json (shard.json) changes.
func packIndexFor(dir string) (*packIndex, error) {
	dir = filepath.Clean(dir)
	var key indexCacheKey
	for _, name := range []string{DatasetFile, ShardFile} {
		st, err := os.Stat(filepath.Join(dir, name))
		if err == nil && st.Mode().IsRegular() {
			key = indexCacheKey{dir: dir, size: st.Size(), mod: st.ModTime().UnixNano(), layoutFile: name}
			break
		}
	}
	if key.layoutFile == "" {
		return nil, nil // no finished dataset here: the folder layout's checks report it
	}
	indexMu.Lock()
	defer indexMu.Unlock()
	if c, ok := indexCache[dir]; ok && c.key == key {
		return c.px, nil
	}
	l, err := readLayout(dir, key.layoutFile)
	if err != nil {
		return nil, err
	}
	var px *packIndex
	if l != nil {
		if px, err = loadIndex(dir, l); err != nil {
			return nil, err
		}
	}
	indexCache[dir] = struct {
		key indexCacheKey
		px  *packIndex
	}{key, px}
	return px, nil
}

// readLayout returns the layout dataset.json (or shard.json) records; nil
// for the folder layout.
func readLayout(dir, name string) (*Layout, error) {
	p := filepath.Join(dir, name)
	b, err := safefile.Read(p, name, MaxDatasetBytes)
	if err != nil {
		return nil, err
	}
	var probe struct {
		Layout  *Layout `json:"layout"`
		Dataset struct {
			Layout *Layout `json:"layout"`
		} `json:"dataset"`
	}
	if err := json.Unmarshal(b, &probe); err != nil {
		return nil, fmt.Errorf("%s: %w", p, err)
	}
	l := probe.Layout
	if name == ShardFile {
		l = probe.Dataset.Layout
	}
	if l == nil {
		return nil, nil
	}
	if l.Kind != LayoutPacked {
		return nil, fmt.Errorf("%s: layout.kind %q is not one this trueset knows; it reads %q (or no layout: the folder layout)", p, l.Kind, LayoutPacked)
	}
	return l, nil
}

// loadIndex reads DIR/packs/index.jsonl, checking that every line names
// its sample's members as the packed layout does and a pack the layout
// lists.
func loadIndex(dir string, l *Layout) (*packIndex, error) {
	ip := filepath.Join(dir, PacksDir, IndexFile)
	f, err := safefile.Open(ip)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	px := &packIndex{dir: dir, byID: map[string]int32{}}
	packNum := map[string]int32{}
	for _, p := range l.Packs {
		if _, dup := packNum[p.Name]; dup {
			return nil, fmt.Errorf("%s: layout.packs lists %s twice", filepath.Join(dir, DatasetFile), p.Name)
		}
		if err := checkPackName(p.Name); err != nil {
			return nil, fmt.Errorf("%s: layout.packs: %w", filepath.Join(dir, DatasetFile), err)
		}
		packNum[p.Name] = int32(len(px.packs))
		px.packs = append(px.packs, p.Name)
	}
	sc := bufio.NewScanner(io.LimitReader(f, MaxIndexBytes+1))
	sc.Buffer(make([]byte, 0, 4096), maxIndexLine)
	line := 0
	var read int64
	for sc.Scan() {
		line++
		read += int64(len(sc.Bytes())) + 1
		if read > MaxIndexBytes {
			return nil, fmt.Errorf("%s: more than %d bytes", ip, int64(MaxIndexBytes))
		}
		var e IndexEntry
		if err := json.Unmarshal(sc.Bytes(), &e); err != nil {
			return nil, fmt.Errorf("%s:%d: %v", ip, line, err)
		}
		pe, err := checkEntry(&e, packNum)
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %v", ip, line, err)
		}
		if _, dup := px.byID[e.ID]; dup {
			return nil, fmt.Errorf("%s:%d: id %q is indexed twice", ip, line, e.ID)
		}
		px.byID[e.ID] = int32(len(px.entries))
		px.entries = append(px.entries, pe)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s:%d: %v", ip, line+1, err)
	}
	return px, nil
}

// checkPackName refuses a pack name that is not packs/<split>-<NNNNN>.tar.
func checkPackName(name string) error {
	base, ok := strings.CutPrefix(name, PacksDir+"/")
	m := packNameRE.FindStringSubmatch(base)
	if !ok || m == nil || SafeName("split", m[1]) != nil {
		return fmt.Errorf("pack name %q is not %s/<split>-<NNNNN>.tar", name, PacksDir)
	}
	return nil
}

// checkEntry checks one index line and returns its compact form.
func checkEntry(e *IndexEntry, packNum map[string]int32) (packEntry, error) {
	var pe packEntry
	if err := SafeName("record id", e.ID); err != nil {
		return pe, err
	}
	n, ok := packNum[e.Pack]
	if !ok {
		return pe, fmt.Errorf("sample %s: pack %q is not in dataset.json's layout.packs", e.ID, e.Pack)
	}
	pe.pack = n
	if e.At[0] < 0 || e.At[1] < e.At[0] {
		return pe, fmt.Errorf("sample %s: at %v is not [start, end)", e.ID, e.At)
	}
	want := MemberNames(e.ID)
	prev := e.At[0]
	for i, f := range e.Files {
		if f.Name != want[i] {
			return pe, fmt.Errorf("sample %s: member %d is %q; the packed layout names it %q", e.ID, i+1, f.Name, want[i])
		}
		if f.Off < prev || f.Off+f.Size > e.At[1] || f.Size > MaxSampleFileBytes {
			return pe, fmt.Errorf("sample %s: %s at [%d, %d) is not inside the sample's [%d, %d) after the previous member", e.ID, f.Name, f.Off, f.Off+f.Size, e.At[0], e.At[1])
		}
		prev = f.Off + f.Size
		pe.off[i], pe.size[i] = f.Off, f.Size
	}
	return pe, nil
}

// open opens member rel through its pack.
func (px *packIndex) open(rel string) (*SampleFile, error) {
	k, id := -1, ""
	for i, p := range memberPrefixes {
		if s, ok := strings.CutPrefix(rel, p[0]); ok {
			if s, ok = strings.CutSuffix(s, p[1]); ok {
				k, id = i, s
			}
			break
		}
	}
	j, ok := px.byID[id]
	if k < 0 || !ok {
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: fmt.Sprintf("not a member of any pack (%s lists none by that name)", PacksDir+"/"+IndexFile)}
	}
	e := px.entries[j]
	name := px.packs[e.pack]
	p, err := ResolveInside(px.dir, name)
	if err != nil {
		return nil, &SampleError{Rel: rel, Check: KindPath, Msg: name + ": " + err.Error()}
	}
	f, err := safefile.Open(p)
	if err != nil {
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: name + ": " + safefile.Msg(err)}
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: name + ": " + err.Error()}
	}
	if end := e.off[k] + e.size[k]; end > st.Size() {
		f.Close()
		return nil, &SampleError{Rel: rel, Check: KindMissing, Msg: fmt.Sprintf("%s ends at byte %d; the index puts this member at [%d, %d) (a truncated pack)", name, st.Size(), e.off[k], end)}
	}
	return &SampleFile{Rel: rel, ra: f, off: e.off[k], size: e.size[k], closer: f}, nil
}
