package manifest_test

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// twoShards renders the default preset's 12 samples as 2 shards under root.
func twoShards(t *testing.T, root string) []string {
	t.Helper()
	r, err := gen.Preset(gen.DefaultPreset)
	if err != nil {
		t.Fatal(err)
	}
	var dirs []string
	for i := 0; i < 2; i++ {
		d := filepath.Join(root, "shard"+string(rune('0'+i)))
		if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: d, Count: 12, Seed: 3, Workers: 1, Shard: i, Shards: 2, Version: "test"}); err != nil {
			t.Fatal(err)
		}
		dirs = append(dirs, d)
	}
	return dirs
}

// firstImage is the image path of the first record of a shard.
func firstImage(t *testing.T, dir string) string {
	t.Helper()
	var rel string
	err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		if rel == "" {
			rel = r.Image
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return filepath.Join(dir, rel)
}

// Issue 11: merge reads nothing through a symbolic link out of a shard,
// copies nothing whose SHA-256 differs from its record, and never writes
// into a folder that is, holds or lies inside a shard.
func TestMergeRefusesHostileShards(t *testing.T) {
	root := t.TempDir()
	dirs := twoShards(t, root)

	t.Run("symbolic link out of the shard", func(t *testing.T) {
		secret := filepath.Join(root, "secret.png")
		if err := os.WriteFile(secret, []byte("not yours"), 0o644); err != nil {
			t.Fatal(err)
		}
		work := filepath.Join(t.TempDir(), "s1")
		copyTree(t, dirs[1], work)
		img := firstImage(t, work)
		os.Remove(img)
		if err := os.Symlink(secret, img); err != nil {
			t.Fatal(err)
		}
		out := filepath.Join(t.TempDir(), "merged")
		_, err := manifest.Merge([]string{dirs[0], work}, out, manifest.MergeOptions{})
		if err == nil || !strings.Contains(err.Error(), "outside the dataset folder") {
			t.Fatalf("got %v, want a refusal of the link", err)
		}
		if _, err := os.Stat(filepath.Join(out, manifest.DatasetFile)); err == nil {
			t.Error("a refused merge wrote dataset.json")
		}
	})

	t.Run("file whose SHA-256 differs from its record", func(t *testing.T) {
		work := filepath.Join(t.TempDir(), "s1")
		copyTree(t, dirs[1], work)
		img := firstImage(t, work)
		b, _ := os.ReadFile(img)
		b[len(b)-20] ^= 0xff
		if err := os.WriteFile(img, b, 0o644); err != nil {
			t.Fatal(err)
		}
		out := filepath.Join(t.TempDir(), "merged")
		_, err := manifest.Merge([]string{dirs[0], work}, out, manifest.MergeOptions{})
		if err == nil || !strings.Contains(err.Error(), "SHA-256") || !strings.Contains(err.Error(), img) {
			t.Fatalf("got %v, want a checksum refusal naming %s", err, img)
		}
	})

	before := snapshot(t, dirs[0])
	for name, out := range map[string]string{
		"output is an input":           dirs[0],
		"output inside an input":       filepath.Join(dirs[0], "images", "merged"),
		"output contains an input":     root,
		"output is an input by a link": link(t, dirs[0]),
	} {
		t.Run(name, func(t *testing.T) {
			_, err := manifest.Merge(dirs, out, manifest.MergeOptions{Force: true})
			if err == nil || !strings.Contains(err.Error(), "output folder") {
				t.Fatalf("got %v, want a refusal", err)
			}
			if after := snapshot(t, dirs[0]); after != before {
				t.Fatal("the shard changed")
			}
		})
	}

	out := filepath.Join(t.TempDir(), "merged")
	if _, err := manifest.Merge(dirs, out, manifest.MergeOptions{}); err != nil {
		t.Fatalf("clean merge: %v", err)
	}
}

func link(t *testing.T, target string) string {
	p := filepath.Join(t.TempDir(), "alias")
	if err := os.Symlink(target, p); err != nil {
		t.Fatal(err)
	}
	return p
}

// snapshot lists every file under dir with its size and content.
func snapshot(t *testing.T, dir string) string {
	t.Helper()
	var b strings.Builder
	filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err != nil {
			t.Fatal(err)
		}
		if !info.IsDir() {
			c, _ := os.ReadFile(p)
			b.WriteString(p + "\x00" + string(c) + "\x00")
		}
		return nil
	})
	return b.String()
}

// copyTree copies the shard at src to dst with the standard library.
func copyTree(t *testing.T, src, dst string) {
	t.Helper()
	if err := os.CopyFS(dst, os.DirFS(src)); err != nil {
		t.Fatal(err)
	}
}
