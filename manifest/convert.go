package manifest

import (
	"bufio"
	"fmt"
	"io"
	"path/filepath"

	"github.com/trueset/trueset/internal/safefile"
)

// ConvertOptions configures Convert.
type ConvertOptions struct {
	Layout    string // LayoutFolder or LayoutPacked
	PackBytes int64  // LayoutPacked: the bound on a pack (0 = DefaultPackBytes)
	Force     bool
	Progress  func(done, total int) // nil = none
}

// Convert writes the finished dataset in dir to out in another layout (or
// the same one, with another pack bound). Nothing is decoded or re-encoded:
// each record's files are read (OpenSample's checks) and checked against
// its SHA-256s, and its manifest line is kept as it is, so manifest.jsonl
// and every sample file are the same bytes in both layouts, and a folder
// converted to packed and back is the folder it was, dataset.json
// included. It returns the output's dataset.json as written.
func Convert(dir, out string, o ConvertOptions) (*Dataset, error) {
	d, err := ReadDataset(dir)
	if err != nil {
		return nil, err
	}
	if err := CheckDisjoint(out, dir); err != nil {
		return nil, err
	}
	w, err := CreateWith(out, CreateOptions{Force: o.Force, Layout: o.Layout, PackBytes: o.PackBytes})
	if err != nil {
		return nil, err
	}
	ok := false
	defer func() {
		if !ok {
			w.Abort()
		}
	}()
	mp := filepath.Join(dir, ManifestFile)
	f, err := safefile.Open(mp)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	lr := &lineReader{br: bufio.NewReaderSize(f, 1<<16), max: MaxRecordBytes}
	no := 0
	for {
		line, over, err := lr.next()
		if err == io.EOF {
			break
		}
		no++
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %v", mp, no, err)
		}
		if over {
			return nil, fmt.Errorf("%s:%d: the line is over %d bytes, the most a record may take", mp, no, MaxRecordBytes)
		}
		rec, _, err := decodeRecordLine(line)
		if rec == nil && err == nil {
			return nil, fmt.Errorf("%s:%d: a blank line; run trueset verify %s", mp, no, dir)
		}
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %v", mp, no, err)
		}
		for _, k := range [3][2]string{{"image", rec.Image}, {"mask", rec.Mask}, {"instances", rec.Instances}} {
			b, err := ReadSample(dir, k[1])
			if err != nil {
				return nil, fmt.Errorf("record %s: %w", rec.ID, err)
			}
			if got := SHA256Hex(b); got != rec.SHA256[k[0]] {
				return nil, fmt.Errorf("record %s: %s: SHA-256 %s, the record says %q; run trueset verify %s", rec.ID, k[1], got, rec.SHA256[k[0]], dir)
			}
			if err := w.WriteRaw(k[1], b); err != nil {
				return nil, err
			}
		}
		if err := w.AppendRaw(rec, line); err != nil {
			return nil, err
		}
		if o.Progress != nil {
			o.Progress(no, d.Count)
		}
	}
	if no != d.Count {
		return nil, fmt.Errorf("%s has %d records, %s says %d; run trueset verify %s", mp, no, filepath.Join(dir, DatasetFile), d.Count, dir)
	}
	want := d.ManifestSHA256
	if _, err := w.Finish(d); err != nil {
		return nil, err
	}
	ok = true
	if d.ManifestSHA256 != want {
		return nil, fmt.Errorf("%s: SHA-256 %s, %s says %s; the output in %s is not a copy: run trueset verify %s", mp, d.ManifestSHA256, filepath.Join(dir, DatasetFile), want, out, dir)
	}
	return d, nil
}
