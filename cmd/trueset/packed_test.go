package main

import (
	"archive/tar"
	"bytes"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// TestConvertRoundTrip: a folder set converted to packed and back is the
// same folder byte for byte (dataset.json included); the packed copy is the
// packs generate --layout packed writes for the same seed; both verify; and
// GNU tar (an independent reader of the POSIX pax format) extracts from the
// packs exactly the folder's sample files, and the manifest lines as the
// record members.
func TestConvertRoundTrip(t *testing.T) {
	tmp := t.TempDir()
	folder := filepath.Join(tmp, "folder")
	packed := filepath.Join(tmp, "packed")
	genPacked := filepath.Join(tmp, "gen-packed")
	back := filepath.Join(tmp, "back")
	again := filepath.Join(tmp, "again")
	base := []string{"generate", "--preset", "tabletop-dice", "--count", "240", "--seed", "5", "--quiet"}
	wantCode(t, exitOK, append(base, "--out", folder)...)
	wantCode(t, exitOK, append(base, "--layout", "packed", "--pack-size", "64KiB", "--workers", "1", "--out", genPacked)...)
	wantCode(t, exitOK, "convert", "--in", folder, "--out", packed, "--layout", "packed", "--pack-size", "64KiB", "--quiet")
	wantCode(t, exitOK, "convert", "--in", packed, "--out", back, "--layout", "folder", "--quiet")
	wantCode(t, exitOK, "convert", "--in", back, "--out", again, "--layout", "packed", "--pack-size", "64KiB", "--quiet")
	killSameTree(t, folder, back)
	killSameTree(t, genPacked, packed)
	killSameTree(t, packed, again)
	for _, dir := range []string{folder, packed} {
		wantCode(t, exitOK, "verify", dir)
	}
	d, err := manifest.ReadDataset(packed)
	if err != nil {
		t.Fatal(err)
	}
	if d.Layout == nil || len(d.Layout.Packs) < 4 {
		t.Fatalf("layout %+v: want several packs of 64 KiB", d.Layout)
	}
	for _, p := range d.Layout.Packs {
		if p.Bytes > 64<<10 {
			t.Errorf("%s: %d bytes, over the 64 KiB bound", p.Name, p.Bytes)
		}
	}

	// GNU tar extracts every pack; the sample files equal the folder's.
	x := filepath.Join(tmp, "extracted")
	if err := os.Mkdir(x, 0o755); err != nil {
		t.Fatal(err)
	}
	for _, p := range d.Layout.Packs {
		cmd := exec.Command("tar", "--warning=no-unknown-keyword", "-xf", filepath.Join(packed, p.Name), "-C", x)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("tar -xf %s: %v\n%s", p.Name, err, out)
		}
	}
	recs := readRecords(t, folder)
	lines := bytes.Split(bytes.TrimSuffix(mustRead(t, filepath.Join(folder, manifest.ManifestFile)), []byte("\n")), []byte("\n"))
	if len(lines) != len(recs) {
		t.Fatalf("%d lines, %d records", len(lines), len(recs))
	}
	for i, r := range recs {
		for _, rel := range []string{r.Image, r.Mask, r.Instances} {
			if !bytes.Equal(mustRead(t, filepath.Join(x, rel)), mustRead(t, filepath.Join(folder, rel))) {
				t.Errorf("%s extracted by tar differs from the folder's", rel)
			}
		}
		if got := mustRead(t, filepath.Join(x, manifest.RecordMember(r.ID))); !bytes.Equal(got, lines[i]) {
			t.Errorf("%s is not manifest line %d", manifest.RecordMember(r.ID), i+1)
		}
	}
}

func mustRead(t *testing.T, p string) []byte {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestPackedVerifyRefuses damages a packed set in one way per case and
// checks that verify exits 1 naming the pack check and the file, and that
// nothing hangs (a FIFO in place of a pack).
func TestPackedVerifyRefuses(t *testing.T) {
	tmp := t.TempDir()
	ref := filepath.Join(tmp, "ref")
	wantCode(t, exitOK, "generate", "--count", "60", "--quiet", "--layout", "packed", "--pack-size", "64KiB", "--out", ref)
	d, err := manifest.ReadDataset(ref)
	if err != nil {
		t.Fatal(err)
	}
	first := d.Layout.Packs[0].Name
	// A member's data offset in the first pack, from an independent tar
	// reader (archive/tar) rather than our index.
	imageAt := func(dir string) int64 {
		f, err := os.Open(filepath.Join(dir, first))
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		cr := &countingReader{r: f}
		tr := tar.NewReader(cr)
		for {
			h, err := tr.Next()
			if err != nil {
				t.Fatalf("%s: no image member: %v", first, err)
			}
			if strings.HasPrefix(h.Name, "images/") {
				return cr.n
			}
		}
	}
	for _, c := range []struct {
		name   string
		damage func(dir string)
		want   []string
	}{
		{"flipped-image-byte", func(dir string) {
			p := filepath.Join(dir, first)
			b := mustRead(t, p)
			b[imageAt(dir)+40] ^= 0xff
			os.WriteFile(p, b, 0o644)
		}, []string{"[pack]", first + ": images/", "SHA-256", "[sha256]"}},
		{"truncated-pack", func(dir string) {
			p := filepath.Join(dir, first)
			os.Truncate(p, imageAt(dir)+10)
		}, []string{"pack", first}},
		{"bytes-after-the-end", func(dir string) {
			f, _ := os.OpenFile(filepath.Join(dir, first), os.O_APPEND|os.O_WRONLY, 0)
			f.Write(make([]byte, 512))
			f.Close()
		}, []string{"pack", first, "follow the end of the archive"}},
		{"stray-pack", func(dir string) {
			os.WriteFile(filepath.Join(dir, "packs", "train-00099.tar"), []byte("x"), 0o644)
		}, []string{"pack", "packs/train-00099.tar", "not in dataset.json's layout"}},
		{"index-offset-moved", func(dir string) {
			p := filepath.Join(dir, "packs", "index.jsonl")
			b := mustRead(t, p)
			n := len(b)
			b = bytes.Replace(b, []byte(`"at":[1024,`), []byte(`"at":[1025,`), 1)
			if len(b) != n+0 || !bytes.Contains(b, []byte(`"at":[1025,`)) {
				t.Fatal("no sample starts at 1024 (after the pack's global header)")
			}
			os.WriteFile(p, b, 0o644)
		}, []string{"pack", "packs/index.jsonl"}},
		{"missing-pack", func(dir string) {
			os.Remove(filepath.Join(dir, first))
		}, []string{"missing", first}},
		{"fifo-pack", func(dir string) {
			p := filepath.Join(dir, first)
			os.Remove(p)
			if err := syscall.Mkfifo(p, 0o644); err != nil {
				t.Fatal(err)
			}
		}, []string{first, "named pipe"}},
		{"pack-links-out", func(dir string) {
			p := filepath.Join(dir, first)
			outside := filepath.Join(tmp, "outside-"+filepath.Base(dir)+".tar")
			os.Rename(p, outside)
			os.Symlink(outside, p)
		}, []string{first}},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(tmp, c.name)
			killCopyTree(t, ref, dir)
			c.damage(dir)
			out, stderr := wantCode(t, exitFailure, "verify", dir)
			all := out + stderr
			for _, w := range c.want {
				if !strings.Contains(all, w) {
					t.Errorf("verify output lacks %q:\n%s", w, all)
				}
			}
		})
	}
}

type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(b []byte) (int, error) {
	n, err := c.r.Read(b)
	c.n += int64(n)
	return n, err
}

// TestMergePackedShards: shards written in the packed layout merge into
// the packs a single packed run writes, byte for byte, or into its folder
// twin with --layout folder.
func TestMergePackedShards(t *testing.T) {
	tmp := t.TempDir()
	args := []string{"generate", "--count", "90", "--seed", "3", "--quiet", "--layout", "packed", "--pack-size", "64KiB"}
	single := filepath.Join(tmp, "single")
	wantCode(t, exitOK, append(args, "--out", single)...)
	folder := filepath.Join(tmp, "folder")
	wantCode(t, exitOK, "generate", "--count", "90", "--seed", "3", "--quiet", "--out", folder)
	var parts []string
	for i := 0; i < 3; i++ {
		p := filepath.Join(tmp, "part-"+string(rune('0'+i)))
		wantCode(t, exitOK, append(args, "--shard", string(rune('0'+i))+"/3", "--out", p)...)
		parts = append(parts, p)
	}
	merged := filepath.Join(tmp, "merged")
	wantCode(t, exitOK, append([]string{"merge", "--quiet", "--out", merged}, parts...)...)
	killSameTree(t, single, merged)
	asFolder := filepath.Join(tmp, "as-folder")
	wantCode(t, exitOK, append([]string{"merge", "--quiet", "--layout", "folder", "--out", asFolder}, parts...)...)
	killSameTree(t, folder, asFolder)
}

// TestAugmentPacked: augmenting a packed set writes packs (the input's
// layout and bound by default) equal to augmenting its folder twin and
// packing the result; stats reads both the same.
func TestAugmentPacked(t *testing.T) {
	tmp := t.TempDir()
	folder, packed := filepath.Join(tmp, "folder"), filepath.Join(tmp, "packed")
	wantCode(t, exitOK, "generate", "--count", "60", "--quiet", "--out", folder)
	wantCode(t, exitOK, "convert", "--in", folder, "--out", packed, "--layout", "packed", "--pack-size", "64KiB", "--quiet")
	plan := filepath.Join("..", "..", "testdata", "plans", "every-step.yaml")
	augF, augP, augFP := filepath.Join(tmp, "aug-folder"), filepath.Join(tmp, "aug-packed"), filepath.Join(tmp, "aug-folder-packed")
	wantCode(t, exitOK, "augment", "--in", folder, "--out", augF, "--plan", plan, "--copies", "2", "--quiet")
	wantCode(t, exitOK, "augment", "--in", packed, "--out", augP, "--plan", plan, "--copies", "2", "--quiet")
	wantCode(t, exitOK, "convert", "--in", augF, "--out", augFP, "--layout", "packed", "--pack-size", "64KiB", "--quiet")
	killSameTree(t, augFP, augP)
	wantCode(t, exitOK, "verify", augP)
	sf, _ := wantCode(t, exitOK, "stats", "--json", augF)
	sp, _ := wantCode(t, exitOK, "stats", "--json", augP)
	if sf != strings.ReplaceAll(sp, augP, augF) {
		t.Errorf("stats --json differs between the layouts:\nfolder: %s\npacked: %s", sf, sp)
	}
}
