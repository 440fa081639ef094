package manifest_test

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// FuzzVerifyPacked runs Verify and OpenSample on a real 3-sample packed
// dataset whose packs/index.jsonl (and, in the second half of the input,
// its first pack) are replaced by the input, their checksums recorded so
// the contents themselves are judged. It must return, never panic, and
// report a problem whenever the bytes differ from the real ones.
func FuzzVerifyPacked(f *testing.F) {
	r, err := gen.Preset(gen.DefaultPreset)
	if err != nil {
		f.Fatal(err)
	}
	src := filepath.Join(f.TempDir(), "packed")
	if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: src, Count: 3, Seed: 42, Workers: 1, Version: "fuzz",
		Layout: manifest.LayoutPacked, PackBytes: manifest.MinPackBytes}); err != nil {
		f.Fatal(err)
	}
	d, err := manifest.ReadDataset(src)
	if err != nil {
		f.Fatal(err)
	}
	first := d.Layout.Packs[0].Name
	index, _ := os.ReadFile(filepath.Join(src, manifest.PacksDir, manifest.IndexFile))
	pack, _ := os.ReadFile(filepath.Join(src, first))
	f.Add(index, pack)
	f.Add(index[:len(index)/2], pack)
	f.Add(index, pack[:len(pack)/2])
	f.Add(bytes.Replace(index, []byte(`"images/`), []byte(`"../images/`), 1), pack)
	f.Add(bytes.Replace(index, []byte(`,1536,`), []byte(`,99999999999,`), 1), pack)
	f.Fuzz(func(t *testing.T, ib, pb []byte) {
		dir := filepath.Join(t.TempDir(), "set")
		if err := os.CopyFS(dir, os.DirFS(src)); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, manifest.PacksDir, manifest.IndexFile), ib, 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, first), pb, 0o644); err != nil {
			t.Fatal(err)
		}
		ds := *d
		l := *d.Layout
		l.Packs = append([]manifest.PackInfo(nil), l.Packs...)
		l.IndexSHA256 = manifest.SHA256Hex(ib)
		l.Packs[0].SHA256, l.Packs[0].Bytes = manifest.SHA256Hex(pb), int64(len(pb))
		ds.Layout = &l
		b, err := manifest.MarshalDataset(&ds)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), b, 0o644); err != nil {
			t.Fatal(err)
		}
		problems := 0
		if _, err := manifest.Verify(dir, func(manifest.Problem) { problems++ }); err != nil {
			t.Fatal(err)
		}
		if (!bytes.Equal(ib, index) || !bytes.Equal(pb, pack)) && problems == 0 {
			t.Errorf("verify found nothing wrong with a changed index or pack")
		}
		if s, err := manifest.OpenSample(dir, "images/000000.png"); err == nil {
			if s.Size() > manifest.MaxSampleFileBytes {
				t.Errorf("a member of %d bytes was opened", s.Size())
			}
			s.Close()
		}
	})
}
