package manifest

import (
	"bytes"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"github.com/trueset/trueset/internal/safefile"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
)

// ShardFile marks a finished shard folder, as dataset.json marks a finished
// dataset.
const ShardFile = "shard.json"

// Shard describes one shard's output: samples [First, End) of the dataset
// described by Dataset (which lacks only the whole manifest's checksum).
type Shard struct {
	Shard      int     `json:"shard"`
	Shards     int     `json:"shards"`
	First      int     `json:"first"`
	End        int     `json:"end"`
	PartSHA256 string  `json:"part_sha256"` // SHA-256 of this shard's manifest.jsonl
	Dataset    Dataset `json:"dataset"`
}

// FinishShard flushes the shard's manifest and writes shard.json last.
func (w *Writer) FinishShard(s *Shard) (int64, error) {
	defer w.lock.Unlock()
	if err := w.flush(); err != nil {
		return 0, err
	}
	s.PartSHA256 = hex.EncodeToString(w.sum.Sum(nil))
	s.Dataset.Format = Format
	if err := w.finishPacks(&s.Dataset); err != nil {
		return 0, err
	}
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetIndent("", "  ")
	if err := enc.Encode(s); err != nil {
		return 0, err
	}
	if err := writeAtomic(w.fs, filepath.Join(w.Dir, ShardFile), buf.Bytes()); err != nil {
		return 0, err
	}
	if err := w.dropMarker(); err != nil {
		return 0, err
	}
	return w.bytes + int64(buf.Len()), nil
}

func readShard(dir string) (*Shard, error) {
	p := filepath.Join(dir, ShardFile)
	b, err := safefile.Read(p, "shard.json", MaxDatasetBytes)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%s: missing: %s is not a finished shard", p, dir)
		}
		return nil, err
	}
	var s Shard
	if err := json.Unmarshal(b, &s); err != nil {
		return nil, fmt.Errorf("%s: %w", p, err)
	}
	if err := CheckFormat(p, s.Dataset.Format); err != nil {
		return nil, err
	}
	return &s, nil
}

// Merge joins finished shard folders into one dataset at out. The shards
// must come from the same recipe, seed, count, tool version and shard count,
// and cover every shard exactly once; the result is byte-identical to a
// single-machine run.
// MergeOptions configures Merge.
type MergeOptions struct {
	Force     bool
	Layout    string // "" = the shards' layout (and pack bound)
	PackBytes int64  // LayoutPacked: the bound on a pack (0 = the shards', else DefaultPackBytes)
}

func Merge(dirs []string, out string, o MergeOptions) (int64, error) {
	if len(dirs) == 0 {
		return 0, fmt.Errorf("no shard folders given")
	}
	if err := CheckDisjoint(out, dirs...); err != nil {
		return 0, err
	}
	shards := make([]*Shard, len(dirs))
	for i, d := range dirs {
		s, err := readShard(d)
		if err != nil {
			return 0, err
		}
		shards[i] = s
	}
	ref := shards[0]
	byIndex := map[int]string{}
	for i, s := range shards {
		a, b := &ref.Dataset, &s.Dataset
		switch {
		case a.RecipeSHA256 != b.RecipeSHA256:
			return 0, fmt.Errorf("%s: recipe hash %s differs from %s's %s", dirs[i], b.RecipeSHA256, dirs[0], a.RecipeSHA256)
		case a.Seed != b.Seed:
			return 0, fmt.Errorf("%s: seed %d differs from %s's %d", dirs[i], b.Seed, dirs[0], a.Seed)
		case a.ToolVersion != b.ToolVersion:
			return 0, fmt.Errorf("%s: tool version %s differs from %s's %s", dirs[i], b.ToolVersion, dirs[0], a.ToolVersion)
		case a.Count != b.Count || s.Shards != ref.Shards:
			return 0, fmt.Errorf("%s: shard %d/%d of %d samples does not match %s (shard %d/%d of %d)", dirs[i], s.Shard, s.Shards, b.Count, dirs[0], ref.Shard, ref.Shards, a.Count)
		}
		if other, dup := byIndex[s.Shard]; dup {
			return 0, fmt.Errorf("shard %d/%d is given twice: %s and %s", s.Shard, s.Shards, other, dirs[i])
		}
		byIndex[s.Shard] = dirs[i]
		ja, _ := json.Marshal(a.Splits)
		jb, _ := json.Marshal(b.Splits)
		if !bytes.Equal(ja, jb) {
			return 0, fmt.Errorf("%s: split table differs from %s's", dirs[i], dirs[0])
		}
	}
	var missing []int
	for i := 0; i < ref.Shards; i++ {
		if _, ok := byIndex[i]; !ok {
			missing = append(missing, i)
		}
	}
	if len(missing) > 0 {
		return 0, fmt.Errorf("shards %v of %d are missing", missing, ref.Shards)
	}
	sort.Slice(shards, func(a, b int) bool { return shards[a].Shard < shards[b].Shard })
	co := CreateOptions{Force: o.Force, Layout: o.Layout, PackBytes: o.PackBytes}
	if l := ref.Dataset.Layout; l != nil {
		if co.Layout == "" {
			co.Layout = LayoutPacked
		}
		if co.PackBytes == 0 && co.Layout == LayoutPacked {
			co.PackBytes = l.PackBytes
		}
	}
	w, err := CreateWith(out, co)
	if err != nil {
		return 0, err
	}
	var total int64
	next := 0
	for _, s := range shards {
		dir := byIndex[s.Shard]
		if s.First != next {
			w.Abort()
			return 0, fmt.Errorf("%s: shard %d starts at sample %d, want %d", dir, s.Shard, s.First, next)
		}
		part, err := os.ReadFile(filepath.Join(dir, ManifestFile))
		if err != nil {
			w.Abort()
			return 0, err
		}
		if got := SHA256Hex(part); got != s.PartSHA256 {
			w.Abort()
			return 0, fmt.Errorf("%s: manifest.jsonl SHA-256 %s, shard.json says %s", dir, got, s.PartSHA256)
		}
		err = DecodeManifest(bytes.NewReader(part), filepath.Join(dir, ManifestFile), func(r *Record) error {
			if r.Index != next {
				return fmt.Errorf("record %s has index %d, want %d", r.ID, r.Index, next)
			}
			for _, f := range [][2]string{{"image", r.Image}, {"mask", r.Mask}, {"instances", r.Instances}} {
				b, err := readChecked(dir, f[1], f[0], r)
				if err != nil {
					return err
				}
				if err := w.WriteRaw(f[1], b); err != nil {
					return err
				}
				total += int64(len(b))
			}
			next++
			return w.Append(r)
		})
		if err != nil {
			w.Abort()
			return 0, err
		}
		if next != s.End {
			w.Abort()
			return 0, fmt.Errorf("%s: shard %d holds samples up to %d, shard.json says %d", dir, s.Shard, next, s.End)
		}
	}
	d := ref.Dataset
	n, err := w.Finish(&d)
	return total + n, err
}

// readChecked reads a record's file rel from a shard, to be copied. It is
// read through ReadSample (in the folder layout a regular file inside the
// shard, a symbolic link out of it refused) and its SHA-256 must be the one
// the record gives.
func readChecked(dir, rel, kind string, r *Record) ([]byte, error) {
	src := filepath.Join(dir, rel)
	b, err := ReadSample(dir, rel)
	if err != nil {
		var se *SampleError
		if errors.As(err, &se) && se.Check == KindPath {
			return nil, fmt.Errorf("record %s: %s: %s", r.ID, kind, se.Msg)
		}
		if errors.As(err, &se) {
			return nil, fmt.Errorf("record %s: %s: %s", r.ID, src, se.Msg)
		}
		return nil, fmt.Errorf("record %s: %w", r.ID, err)
	}
	if got, want := SHA256Hex(b), r.SHA256[kind]; got != want {
		return nil, fmt.Errorf("record %s: %s: SHA-256 %s, the record says %q; the shard is damaged: generate it again", r.ID, src, got, want)
	}
	return b, nil
}
