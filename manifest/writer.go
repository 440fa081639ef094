package manifest

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"hash"
	"image"
	"os"
	"path/filepath"
)

// Writer writes one dataset folder: sample files (from any goroutine), then
// records in index order, then dataset.json, which marks it complete.
type Writer struct {
	Dir   string
	f     *os.File
	bw    *bufio.Writer
	sum   hash.Hash
	bytes int64
}

// Create prepares dir for a new dataset. A folder that already holds files is
// refused unless force is set.
func Create(dir string, force bool) (*Writer, error) {
	if ents, err := os.ReadDir(dir); err == nil && len(ents) > 0 && !force {
		return nil, fmt.Errorf("%s is not empty; choose a new folder or pass --force to write over a previous dataset", dir)
	}
	for _, sub := range []string{ImagesDir, MasksDir, InstancesDir} {
		if err := os.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
			return nil, err
		}
	}
	// A stale dataset.json would mark a half-written folder complete.
	for _, name := range []string{DatasetFile, ShardFile} {
		if err := os.Remove(filepath.Join(dir, name)); err != nil && !os.IsNotExist(err) {
			return nil, err
		}
	}
	f, err := os.Create(filepath.Join(dir, ManifestFile))
	if err != nil {
		return nil, err
	}
	return &Writer{Dir: dir, f: f, bw: bufio.NewWriterSize(f, 1<<16), sum: sha256.New()}, nil
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
	for _, it := range []struct {
		key, rel string
		m        image.Image
	}{{"image", rec.Image, img}, {"mask", rec.Mask, mask}, {"instances", rec.Instances, inst}} {
		b, err := enc.Encode(it.m)
		if err != nil {
			return n, fmt.Errorf("encode %s: %w", it.rel, err)
		}
		if err := WriteFileAtomic(filepath.Join(w.Dir, it.rel), b); err != nil {
			return n, err
		}
		rec.SHA256[it.key] = SHA256Hex(b)
		n += int64(len(b))
	}
	return n, nil
}

// Append adds one record to manifest.jsonl; call in index order.
func (w *Writer) Append(rec *Record) error {
	b, err := MarshalRecord(rec)
	if err != nil {
		return err
	}
	b = append(b, '\n')
	w.sum.Write(b)
	w.bytes += int64(len(b))
	if _, err := w.bw.Write(b); err != nil {
		return fmt.Errorf("write %s: %w", filepath.Join(w.Dir, ManifestFile), err)
	}
	return nil
}

// Abort closes the manifest without marking the dataset complete.
func (w *Writer) Abort() {
	w.bw.Flush()
	w.f.Close()
}

func (w *Writer) flush() error {
	p := filepath.Join(w.Dir, ManifestFile)
	if err := w.bw.Flush(); err != nil {
		w.f.Close()
		return fmt.Errorf("write %s: %w", p, err)
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
	if err := w.flush(); err != nil {
		return 0, err
	}
	d.Format = Format
	d.ManifestSHA256 = hex.EncodeToString(w.sum.Sum(nil))
	b, err := MarshalDataset(d)
	if err != nil {
		return 0, err
	}
	if err := WriteFileAtomic(filepath.Join(w.Dir, DatasetFile), b); err != nil {
		return 0, err
	}
	return w.bytes + int64(len(b)), nil
}
