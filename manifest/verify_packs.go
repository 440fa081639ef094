package manifest

import (
	"archive/tar"
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/trueset/trueset/internal/safefile"
)

// packMember is what verify expects of one member of a pack.
type packMember struct {
	id, name  string
	off, size int64
	sum       string // the manifest line's SHA-256 for records/<id>.json, the record's own for the PNGs
}

// checkPacks does the packed layout's checks (KindPack): the index is the
// one dataset.json records and lists the manifest's samples in order, each
// in a pack of its split; every pack is the file dataset.json describes
// (bytes, SHA-256, samples), a pax tar archive holding exactly the members
// the index gives, in order, after the pax global header naming the pack,
// at the index's offsets, each with the fixed header fields, the record
// member equal to its manifest line, then the end-of-archive
// blocks and nothing after them; packs/ holds nothing else. The members'
// contents are checked against the records by the per-record checks,
// which read them through the index.
func (v *verifier) checkPacks() {
	l := v.d.Layout
	if l == nil {
		return
	}
	bad := func(file, format string, args ...any) {
		v.report(Problem{File: file, Check: KindPack, Msg: fmt.Sprintf(format, args...)})
	}
	if l.Kind != LayoutPacked {
		bad(DatasetFile, "%s: layout.kind %q; this trueset knows %q", DatasetFile, l.Kind, LayoutPacked)
		return
	}
	if _, err := packIndexFor(v.dir); err != nil {
		bad(PacksDir+"/"+IndexFile, "%v", err)
		return
	}
	info := map[string]PackInfo{}
	for _, p := range l.Packs {
		info[p.Name] = p
	}
	// The index against the manifest, line by line.
	ip := filepath.Join(v.dir, PacksDir, IndexFile)
	irel := PacksDir + "/" + IndexFile
	f, err := safefile.Open(ip)
	if err != nil {
		bad(irel, "%v", err)
		return
	}
	defer f.Close()
	isum := sha256.New()
	tee := io.TeeReader(io.LimitReader(f, MaxIndexBytes), isum)
	sc := bufio.NewScanner(tee)
	sc.Buffer(make([]byte, 0, 4096), maxIndexLine)
	members := map[string][]packMember{}
	samples := map[string]int{}
	no, short := 0, false
	_, err = v.eachLine(func(_ int, line []byte) {
		if line == nil {
			return
		}
		var r struct {
			ID     string            `json:"id"`
			Split  string            `json:"split"`
			SHA256 map[string]string `json:"sha256"`
		}
		if json.Unmarshal(line, &r) != nil {
			return // the record checks report it
		}
		no++
		if short || !sc.Scan() {
			if !short {
				bad(irel, "%s ends before manifest record %d (%s)", irel, no, r.ID)
			}
			short = true
			return
		}
		var e IndexEntry
		if err := json.Unmarshal(sc.Bytes(), &e); err != nil {
			bad(irel, "%s:%d: %v", irel, no, err)
			return
		}
		if e.ID != r.ID || e.Split != r.Split {
			bad(irel, "%s:%d: sample %s of split %q; manifest.jsonl:%d is %s of split %q", irel, no, e.ID, e.Split, no, r.ID, r.Split)
			return
		}
		pi, ok := info[e.Pack]
		if !ok || pi.Split != e.Split {
			bad(irel, "%s:%d: sample %s is in %s, not a pack of split %q in dataset.json's layout", irel, no, e.ID, e.Pack, e.Split)
			return
		}
		samples[e.Pack]++
		sum := sha256.Sum256(line)
		for i, m := range e.Files {
			pm := packMember{id: e.ID, name: m.Name, off: m.Off, size: m.Size}
			pm.sum = r.SHA256[[4]string{"", "image", "mask", "instances"}[i]]
			if i == 0 {
				pm.sum = hex.EncodeToString(sum[:])
			}
			members[e.Pack] = append(members[e.Pack], pm)
		}
	})
	if err != nil {
		return // the manifest checks report it
	}
	for sc.Scan() {
		no++
		bad(irel, "%s:%d: a line past the manifest's last record", irel, no)
		break
	}
	io.Copy(io.Discard, tee) // the rest of the file, for its checksum
	if got := hex.EncodeToString(isum.Sum(nil)); got != l.IndexSHA256 {
		bad(irel, "%s: SHA-256 %s, dataset.json's layout says %s", irel, got, l.IndexSHA256)
	}
	names := make([]string, 0, len(info))
	for n := range info {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		if samples[n] != info[n].Samples {
			bad(n, "%s: the index puts %d samples in it, dataset.json's layout says %d", n, samples[n], info[n].Samples)
		}
		v.checkPack(info[n], members[n], bad)
	}
	// Nothing else in packs/.
	ents, err := os.ReadDir(filepath.Join(v.dir, PacksDir))
	if err != nil {
		bad(PacksDir, "%v", err)
		return
	}
	for _, de := range ents {
		rel := PacksDir + "/" + de.Name()
		if _, ok := info[rel]; !ok && rel != irel {
			bad(rel, "%s is not in dataset.json's layout: a pack from another run, or a stray file", rel)
		}
	}
}

// checkPack reads one pack from start to end.
func (v *verifier) checkPack(pi PackInfo, want []packMember, bad func(file, format string, args ...any)) {
	p, err := ResolveInside(v.dir, pi.Name)
	if err != nil {
		bad(pi.Name, "%s: %v", pi.Name, err)
		return
	}
	f, err := safefile.Open(p)
	if err != nil {
		bad(pi.Name, "%s: %s", pi.Name, safefile.Msg(err))
		return
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		bad(pi.Name, "%v", err)
		return
	}
	if st.Size() != pi.Bytes {
		bad(pi.Name, "%s: %d bytes, dataset.json's layout says %d", pi.Name, st.Size(), pi.Bytes)
	}
	h := sha256.New()
	cr := &countReader{r: bufio.NewReaderSize(io.TeeReader(io.LimitReader(f, st.Size()), h), 64<<10)}
	tr := tar.NewReader(cr)
	// The global header first, naming the pack.
	g, err := tr.Next()
	if err != nil || g.Typeflag != tar.TypeXGlobalHeader || g.PAXRecords["comment"] != PackComment(pi.Name) {
		got := "no header"
		if err != nil {
			got = err.Error()
		} else if g != nil {
			got = fmt.Sprintf("a header of type %q (%s) with comment %q", g.Typeflag, g.Name, g.PAXRecords["comment"])
		}
		bad(pi.Name, "%s: does not start with the pax global header whose comment is %q: %s", pi.Name, PackComment(pi.Name), got)
		return
	}
	k := 0
	for {
		hdr, err := tr.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			bad(pi.Name, "%s: after %d members: not a readable tar archive: %v", pi.Name, k, err)
			return
		}
		if k >= len(want) {
			bad(pi.Name, "%s: member %d (%s) is not in the index", pi.Name, k+1, hdr.Name)
			return
		}
		m := want[k]
		k++
		at := cr.n // tar.Reader reads no further than the header
		switch {
		case hdr.Name != m.name:
			bad(pi.Name, "%s: member %d is %s, the index says %s", pi.Name, k, hdr.Name, m.name)
			return
		case hdr.Typeflag != tar.TypeReg:
			bad(pi.Name, "%s: %s is not a regular file (type %q)", pi.Name, hdr.Name, hdr.Typeflag)
		case hdr.Mode != 0o644 || hdr.Uid != 0 || hdr.Gid != 0 || hdr.Uname != "" || hdr.Gname != "" || !hdr.ModTime.Equal(epoch):
			bad(pi.Name, "%s: %s has mode %o, owner %d:%d (%q:%q), mtime %v; the packed layout fixes 644, 0:0, no names, 1970-01-01", pi.Name, hdr.Name, hdr.Mode, hdr.Uid, hdr.Gid, hdr.Uname, hdr.Gname, hdr.ModTime.UTC())
		case at != m.off || hdr.Size != m.size:
			bad(pi.Name, "%s: %s has its %d bytes at offset %d; the index says %d at %d", pi.Name, hdr.Name, hdr.Size, at, m.size, m.off)
			return
		}
		ms := sha256.New()
		if _, err := io.Copy(ms, tr); err != nil {
			bad(pi.Name, "%s: %s: %v", pi.Name, hdr.Name, err)
			return
		}
		got := hex.EncodeToString(ms.Sum(nil))
		if m.sum != got {
			if strings.HasPrefix(hdr.Name, RecordsDir+"/") {
				bad(pi.Name, "%s: %s is not record %s's manifest line", pi.Name, hdr.Name, m.id)
			} else {
				bad(pi.Name, "%s: %s: SHA-256 %s, record %s says %q", pi.Name, hdr.Name, got, m.id, m.sum)
			}
		}
	}
	if k < len(want) {
		bad(pi.Name, "%s: ends after %d members; the index lists %d (from %s)", pi.Name, k, len(want), want[k].name)
	}
	// Nothing may follow the two zero blocks that end the archive.
	if rest, _ := io.Copy(io.Discard, cr); rest > 0 {
		bad(pi.Name, "%s: %d bytes follow the end of the archive", pi.Name, rest)
	}
	if got := hex.EncodeToString(h.Sum(nil)); got != pi.SHA256 {
		bad(pi.Name, "%s: SHA-256 %s, dataset.json's layout says %s", pi.Name, got, pi.SHA256)
	}
}

// countReader counts the bytes read through it.
type countReader struct {
	r *bufio.Reader
	n int64
}

func (c *countReader) Read(b []byte) (int, error) {
	n, err := c.r.Read(b)
	c.n += int64(n)
	return n, err
}
