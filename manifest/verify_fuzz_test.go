package manifest_test

import (
	"bytes"
	"image"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// FuzzVerifyManifest runs Verify on a real dataset whose manifest.jsonl is
// replaced by the input (its checksum recorded, so the records themselves
// are judged): it must return, never panic, and count no more records than
// the input has lines.
func FuzzVerifyManifest(f *testing.F) {
	m, d := fuzzDataset(f)
	fuzzBroken(f, m)
	f.Add([]byte("{\"id\":\"../x\"}\n\n{\"id\":\"\x1b\"}\r\n"))
	f.Add(append(bytes.Repeat([]byte("a"), 70000), '\n'))
	f.Fuzz(func(t *testing.T, b []byte) {
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), d, 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, manifest.ManifestFile), b, 0o644); err != nil {
			t.Fatal(err)
		}
		editDataset(t, dir, func(ds *manifest.Dataset) { ds.ManifestSHA256 = manifest.SHA256Hex(b) })
		n, err := manifest.Verify(dir, func(manifest.Problem) {})
		if err != nil {
			t.Fatal(err)
		}
		if lines := bytes.Count(b, []byte("\n")) + 1; n > lines {
			t.Errorf("%d records from %d lines", n, lines)
		}
	})
}

// FuzzSampleHeader opens arbitrary bytes as a record's 4×3 PNG: the header
// check refuses anything not 4×3 before decoding, and what decodes after it
// passed has the header's bounds.
func FuzzSampleHeader(f *testing.F) {
	for _, m := range []image.Image{image.NewGray(image.Rect(0, 0, 4, 3)), image.NewGray16(image.Rect(0, 0, 4, 3)),
		image.NewPaletted(image.Rect(0, 0, 4, 3), color.Palette{color.Black}), image.NewRGBA(image.Rect(0, 0, 5, 3))} {
		var buf bytes.Buffer
		if err := png.Encode(&buf, m); err != nil {
			f.Fatal(err)
		}
		f.Add(buf.Bytes())
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		dir := t.TempDir()
		if err := os.Mkdir(filepath.Join(dir, "images"), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, "images", "a.png"), b, 0o644); err != nil {
			t.Fatal(err)
		}
		s, err := manifest.OpenSample(dir, "images/a.png")
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		if sum, err := s.SHA256(); err != nil || sum != manifest.SHA256Hex(b) {
			t.Fatalf("SHA256 %s, %v; want %s", sum, err, manifest.SHA256Hex(b))
		}
		cfg, err := s.Header(4, 3)
		if err != nil {
			return
		}
		if cfg.Width != 4 || cfg.Height != 3 {
			t.Fatalf("header %dx%d passed as 4x3", cfg.Width, cfg.Height)
		}
		m, err := s.Decode()
		if err == nil && m.Bounds() != image.Rect(0, 0, 4, 3) {
			t.Fatalf("decoded %v", m.Bounds())
		}
	})
}
