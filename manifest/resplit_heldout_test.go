package manifest_test

import (
	"context"
	"path/filepath"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// Re-splitting a set with held-out combinations keeps them out of train (as
// generate dealt them), and the result verifies.
func TestResplitKeepsHeldOut(t *testing.T) {
	r, err := gen.LoadRecipe(filepath.Join("..", "examples", "instruments", "unseen-paint.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "ho")
	if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: dir, Count: 300, Seed: 1, Workers: 2, Version: "test"}); err != nil {
		t.Fatal(err)
	}
	sp, err := manifest.ParseSplits("train=0.6,val=0.2,test=0.2")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := manifest.Resplit(dir, manifest.ResplitOptions{Seed: 1, Splits: sp}); err != nil {
		t.Fatal(err)
	}
	held, inTrain := 0, 0
	err = manifest.ReadManifest(dir, func(rec *manifest.Record) error {
		if rec.HeldOut != "" {
			held++
			if rec.Split == "train" {
				inTrain++
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if held == 0 || inTrain != 0 {
		t.Errorf("%d held-out samples, %d of them in train; want some, none in train", held, inTrain)
	}
	if _, err := manifest.Verify(dir, func(p manifest.Problem) { t.Errorf("verify after re-split: %+v", p) }); err != nil {
		t.Fatal(err)
	}
}
