package manifest_test

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// fuzzDataset generates a real 2-sample dataset from the default preset
// and returns its manifest.jsonl and dataset.json.
func fuzzDataset(f *testing.F) (manifestJSONL, datasetJSON []byte) {
	f.Helper()
	r, err := gen.Preset(gen.DefaultPreset)
	if err != nil {
		f.Fatal(err)
	}
	dir := filepath.Join(f.TempDir(), "out")
	if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: dir, Count: 2, Seed: 42, Workers: 1, Version: "fuzz"}); err != nil {
		f.Fatal(err)
	}
	m, err := os.ReadFile(filepath.Join(dir, manifest.ManifestFile))
	if err != nil {
		f.Fatal(err)
	}
	d, err := os.ReadFile(filepath.Join(dir, manifest.DatasetFile))
	if err != nil {
		f.Fatal(err)
	}
	return m, d
}

// fuzzBroken adds b and broken variants of it: truncated halfway, one bit
// flipped, and its first line only.
func fuzzBroken(f *testing.F, b []byte) {
	f.Add(b)
	f.Add(b[:len(b)/2])
	flipped := bytes.Clone(b)
	flipped[len(flipped)/3] ^= 0x04
	f.Add(flipped)
	if i := bytes.IndexByte(b, '\n'); i >= 0 {
		f.Add(b[:i])
	}
}

// FuzzDecodeManifest feeds any bytes, as manifest.jsonl, to DecodeManifest.
// It must never panic, every record it accepts has safe relative paths, and
// every refusal names the file.
func FuzzDecodeManifest(f *testing.F) {
	m, _ := fuzzDataset(f)
	fuzzBroken(f, m)
	line := m[:bytes.IndexByte(m, '\n')]
	for _, evil := range []string{"../x.png", "/etc/passwd", `images\..\..\x.png`, "images/../../x.png", "images//a.png", "./a.png", ".", ""} {
		f.Add(bytes.Replace(line, []byte(`"images/000000.png"`), []byte(`"`+strings.ReplaceAll(evil, `\`, `\\`)+`"`), 1))
	}
	f.Add([]byte("\n\n{}\n"))
	f.Add([]byte(`{"id":"a","image":"a","mask":"b","instances":"c","targets":{"n":1e400}}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		n := 0
		err := manifest.DecodeManifest(bytes.NewReader(b), manifest.ManifestFile, func(r *manifest.Record) error {
			n++
			for _, p := range []string{r.Image, r.Mask, r.Instances} {
				if !manifest.SafeRel(p) {
					t.Fatalf("record %q accepted with unsafe path %q", r.ID, p)
				}
				if strings.HasPrefix(p, "/") || p == ".." || strings.HasPrefix(p, "../") || strings.Contains(p, "/../") {
					t.Fatalf("record %q: SafeRel accepted %q", r.ID, p)
				}
			}
			return nil
		})
		if err != nil && !strings.HasPrefix(err.Error(), manifest.ManifestFile+":") {
			t.Fatalf("error does not name the file and line: %v", err)
		}
	})
}

// FuzzReadDataset writes any bytes as dataset.json and reads them with
// ReadDataset. It must never panic, a refusal names the file, and an
// accepted dataset.json encodes again.
func FuzzReadDataset(f *testing.F) {
	_, d := fuzzDataset(f)
	fuzzBroken(f, d)
	f.Add([]byte("{}"))
	f.Add([]byte("null"))
	f.Add([]byte(`{"recipe": 1, "seed": -1, "splits": {"ratios": {"a": 1e309}}}`))
	// One folder per fuzz worker, rewritten by every input: a fresh
	// t.TempDir per input would cost more than reading the file.
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, b []byte) {
		p := filepath.Join(dir, manifest.DatasetFile)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		ds, err := manifest.ReadDataset(dir)
		if err != nil {
			if !strings.Contains(err.Error(), p) {
				t.Fatalf("error does not name %s: %v", p, err)
			}
			return
		}
		if ds == nil {
			t.Fatal("ReadDataset returned neither a dataset nor an error")
		}
		if _, err := manifest.MarshalDataset(ds); err != nil {
			t.Fatalf("an accepted dataset.json does not encode again: %v", err)
		}
	})
}
