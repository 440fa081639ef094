package gen

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"flag"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

var updateGolden = flag.Bool("update", false, "rewrite testdata/golden")

// tree lists every file under dir with its SHA-256 (FIPS 180-4, via
// crypto/sha256), sorted by path, one "sha  path" line each.
func tree(t *testing.T, dir string) string {
	t.Helper()
	var lines []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		s := sha256.Sum256(b)
		lines = append(lines, hex.EncodeToString(s[:])+"  "+filepath.ToSlash(rel))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	sort.Strings(lines)
	return strings.Join(lines, "\n") + "\n"
}

func runPreset(t *testing.T, name string, count, workers int, seed uint64) string {
	t.Helper()
	r, err := Preset(name)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if _, err := Run(context.Background(), RunOptions{Recipe: r, Out: dir, Count: count, Seed: seed, Workers: workers, Version: "test"}); err != nil {
		t.Fatal(err)
	}
	return dir
}

// Same recipe and seed ⇒ the same bytes, whatever the worker count.
func TestWorkersDoNotChangeBytes(t *testing.T) {
	for _, name := range PresetNames() {
		one := tree(t, runPreset(t, name, 60, 1, 5))
		two := tree(t, runPreset(t, name, 60, 2, 5))
		many := tree(t, runPreset(t, name, 60, 7, 5))
		if one != two || one != many {
			t.Errorf("%s: --workers 1, 2 and 7 differ", name)
		}
		if other := tree(t, runPreset(t, name, 60, 2, 6)); other == one {
			t.Errorf("%s: seeds 5 and 6 gave the same files", name)
		}
	}
}

// The golden file pins the SHA-256 of every file of a small run per preset.
// It changes only when the output format or the renderer changes on purpose:
// rerun with `go test ./gen -run Golden -update` and say why in the commit.
func TestGoldenChecksums(t *testing.T) {
	var b strings.Builder
	for _, name := range PresetNames() {
		fmt.Fprintf(&b, "# %s, 12 samples, seed 42\n", name)
		b.WriteString(tree(t, runPreset(t, name, 12, 2, 42)))
	}
	got := b.String()
	path := filepath.Join("..", "testdata", "golden", "presets-seed42.sha256")
	if *updateGolden {
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (create it with -update)", err)
	}
	if got != string(want) {
		gl, wl := strings.Split(got, "\n"), strings.Split(string(want), "\n")
		for i := 0; i < len(gl) && i < len(wl); i++ {
			if gl[i] != wl[i] {
				t.Fatalf("golden checksums differ at line %d:\n got  %s\n want %s", i+1, gl[i], wl[i])
			}
		}
		t.Fatalf("golden checksums differ in length: %d vs %d lines", len(gl), len(wl))
	}
}
