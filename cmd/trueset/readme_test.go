package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

const walkthroughRecipe = "../../testdata/recipes/walkthrough.yaml"

// TestWalkthroughRecipe keeps the README's recipe walkthrough honest: the
// file parses, renders 20 samples, and the README quotes it verbatim.
func TestWalkthroughRecipe(t *testing.T) {
	r, err := gen.LoadRecipe(walkthroughRecipe)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "trays")
	sum, err := gen.Run(context.Background(), gen.RunOptions{
		Recipe: r, Out: dir, Count: 20, Seed: 1, Workers: 2, Version: version,
	})
	if err != nil {
		t.Fatal(err)
	}
	if sum.Samples != 20 {
		t.Fatalf("generated %d samples, want 20", sum.Samples)
	}
	n := 0
	err = manifest.ReadManifest(dir, func(rec *manifest.Record) error {
		n++
		for _, name := range []string{"plugs", "seedlings", "most_per_plug", "mean_seedling_area"} {
			if _, ok := rec.Targets[name]; !ok {
				t.Errorf("record %s lacks target %q", rec.ID, name)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if n != 20 {
		t.Errorf("manifest.jsonl has %d records, want 20", n)
	}

	src, err := os.ReadFile(walkthroughRecipe)
	if err != nil {
		t.Fatal(err)
	}
	readme, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(readme), string(src)) {
		t.Errorf("README.md does not quote %s verbatim; update one to match the other", walkthroughRecipe)
	}
}
