package gen

import (
	"bytes"
	"context"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// TestDiskFull runs generate on a file system that fails every write with
// ENOSPC after N bytes (manifest.FailAfter), for N inside the run marker,
// inside the first image, mid-run, inside the manifest (written at the end,
// as 30 records fit its buffer) and inside dataset.json. Each run must stop
// with an error naming a path inside the output folder and "no space left on
// device"; every whole record left in manifest.jsonl must name files that are
// there with its SHA-256; there must be no dataset.json and no temporary
// file; manifest.Verify must call the folder incomplete; and resuming on the
// real file system must give the bytes of an uninterrupted run.
func TestDiskFull(t *testing.T) {
	r, err := Preset(DefaultPreset)
	if err != nil {
		t.Fatal(err)
	}
	opts := func(out string) RunOptions {
		return RunOptions{Recipe: r, Out: out, Count: 30, Seed: 3, Workers: 2, Version: "test"} // 30: the manifest stays under one 64 KiB flush
	}
	tmp := t.TempDir()
	ref := filepath.Join(tmp, "ref")
	counted := &diskCountFS{inner: manifest.OS, by: map[string]int64{}}
	o := opts(ref)
	o.FS = counted
	if _, err := Run(context.Background(), o); err != nil {
		t.Fatal(err)
	}
	total := counted.total
	marker := counted.by[manifest.RunMarkerFile]
	mf := counted.by[manifest.ManifestFile]
	ds := counted.by[manifest.DatasetFile]
	samples := total - marker - mf - ds
	if marker == 0 || mf == 0 || ds == 0 || samples <= 0 {
		t.Fatalf("byte counts: marker %d, manifest %d, dataset.json %d, total %d", marker, mf, ds, total)
	}
	if mf >= 1<<16 {
		t.Fatalf("manifest.jsonl is %d bytes: the cases below assume it is written in one flush at the end", mf)
	}
	refFiles := diskSnapshot(t, ref)

	for _, c := range []struct {
		name string
		n    int64
		in   string // the file the failure must name, "" = any
	}{
		{"in the run marker", 0, manifest.RunMarkerFile},
		{"in the first image", marker + 100, ""},
		{"mid-run", marker + samples/2, ""},
		{"in the manifest", marker + samples + mf/2, manifest.ManifestFile},
		{"in dataset.json", total - ds/2, manifest.DatasetFile},
	} {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "out")
			o := opts(out)
			o.FS = manifest.FailAfter(manifest.OS, c.n)
			_, err := Run(context.Background(), o)
			if err == nil {
				t.Fatal("a run on a full disk succeeded")
			}
			msg := err.Error()
			t.Logf("N=%d: %v", c.n, err)
			if !strings.Contains(msg, "no space left on device") {
				t.Errorf("error %q does not say no space left on device", msg)
			}
			if !strings.Contains(msg, out+string(filepath.Separator)) {
				t.Errorf("error %q names no path inside %s", msg, out)
			}
			if c.in != "" && !strings.Contains(msg, filepath.Join(out, c.in)) {
				t.Errorf("error %q does not name %s", msg, c.in)
			}
			diskCheckFailed(t, out)

			o = opts(out)
			o.Resume = true
			if c.n < marker {
				// Nothing was started, so there is nothing to resume and the
				// folder is left empty for a new run.
				if _, err := Run(context.Background(), o); err == nil || !strings.Contains(err.Error(), "no interrupted trueset run") {
					t.Fatalf("resume after a failed marker: %v", err)
				}
				if ents, err := os.ReadDir(out); err != nil || len(ents) != 0 {
					t.Fatalf("the folder holds %d entries (%v), want it empty", len(ents), err)
				}
				o.Resume = false
			}
			if _, err := Run(context.Background(), o); err != nil {
				t.Fatalf("resume: %v", err)
			}
			diskSameFiles(t, refFiles, diskSnapshot(t, out))
		})
	}
}

// diskCheckFailed checks a folder left by a failed run: whole records name
// intact files, no dataset.json, no temporary file, and Verify says the
// dataset is incomplete.
func diskCheckFailed(t *testing.T, out string) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(out, manifest.ManifestFile))
	if err != nil && !os.IsNotExist(err) {
		t.Fatal(err)
	}
	whole := b[:bytes.LastIndexByte(b, '\n')+1]
	n := 0
	err = manifest.DecodeManifest(bytes.NewReader(whole), manifest.ManifestFile, func(r *manifest.Record) error {
		n++
		for key, rel := range map[string]string{"image": r.Image, "mask": r.Mask, "instances": r.Instances} {
			fb, err := os.ReadFile(filepath.Join(out, rel))
			if err != nil {
				t.Errorf("record %s names %s: %v", r.ID, rel, err)
			} else if got := manifest.SHA256Hex(fb); got != r.SHA256[key] {
				t.Errorf("record %s: %s has SHA-256 %s, the record says %s", r.ID, rel, got, r.SHA256[key])
			}
		}
		return nil
	})
	if err != nil {
		t.Errorf("the whole lines of manifest.jsonl do not decode: %v", err)
	}
	t.Logf("%d whole records, %d bytes of a torn line", n, len(b)-len(whole))
	if _, err := os.Stat(filepath.Join(out, manifest.DatasetFile)); err == nil {
		t.Error("a failed run left dataset.json")
	}
	for p := range diskSnapshot(t, out) {
		if base := filepath.Base(p); strings.HasPrefix(base, ".") && strings.Contains(base, ".tmp") {
			t.Errorf("a failed run left a temporary file: %s", p)
		}
	}
	var problems []string
	if _, err := manifest.Verify(out, func(p manifest.Problem) { problems = append(problems, p.String()) }); err != nil {
		t.Fatal(err)
	}
	found := false
	for _, p := range problems {
		if strings.Contains(p, manifest.DatasetFile) && (strings.Contains(p, "missing") || strings.Contains(p, "incomplete")) {
			found = true
		}
	}
	if !found {
		t.Errorf("Verify does not call the folder incomplete; problems: %q", problems)
	}
}

func diskSnapshot(t *testing.T, root string) map[string]string {
	t.Helper()
	m := map[string]string{}
	err := filepath.WalkDir(root, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, p)
		if e.IsDir() {
			m[rel+"/"] = ""
			return nil
		}
		b, err := os.ReadFile(p)
		m[rel] = string(b)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func diskSameFiles(t *testing.T, want, got map[string]string) {
	t.Helper()
	for p, w := range want {
		if g, ok := got[p]; !ok {
			t.Errorf("%s is missing", p)
		} else if g != w {
			t.Errorf("%s differs from the uninterrupted run", p)
		}
	}
	for p := range got {
		if _, ok := want[p]; !ok {
			t.Errorf("%s is extra", p)
		}
	}
}

// diskCountFS counts the bytes written through it, in all and per file (a
// temporary file counts for the file it becomes).
type diskCountFS struct {
	inner manifest.FS
	mu    sync.Mutex
	total int64
	by    map[string]int64
}

type diskCountFile struct {
	manifest.File
	fs   *diskCountFS
	name string
}

func (c *diskCountFS) MkdirAll(p string, perm os.FileMode) error { return c.inner.MkdirAll(p, perm) }
func (c *diskCountFS) CreateTemp(dir, pattern string) (manifest.File, error) {
	f, err := c.inner.CreateTemp(dir, pattern)
	if err != nil {
		return nil, err
	}
	return diskCountFile{f, c, diskCountName(f.Name())}, nil
}
func (c *diskCountFS) OpenFile(p string, flag int, perm os.FileMode) (manifest.File, error) {
	f, err := c.inner.OpenFile(p, flag, perm)
	if err != nil {
		return nil, err
	}
	return diskCountFile{f, c, diskCountName(p)}, nil
}
func (c *diskCountFS) Rename(a, b string) error { return c.inner.Rename(a, b) }
func (c *diskCountFS) Remove(p string) error    { return c.inner.Remove(p) }

func (f diskCountFile) Write(b []byte) (int, error) {
	n, err := f.File.Write(b)
	f.fs.mu.Lock()
	f.fs.total += int64(n)
	f.fs.by[f.name] += int64(n)
	f.fs.mu.Unlock()
	return n, err
}

// diskCountName maps ".NAME.tmp…" to NAME.
func diskCountName(p string) string {
	base := filepath.Base(p)
	if i := strings.Index(base, ".tmp"); strings.HasPrefix(base, ".") && i > 0 {
		return base[1:i]
	}
	return base
}
