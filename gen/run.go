package gen

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"runtime"
	"strings"
	"sync"
	"time"

	"github.com/trueset/trueset/manifest"
)

// RunOptions configures a generation run. The zero value of each optional
// field means its default.
type RunOptions struct {
	Recipe          *Recipe
	Out             string
	Count           int
	Seed            uint64
	Workers         int    // 0 = runtime.NumCPU()
	Splits          string // "" = the recipe's split.ratios, else manifest.DefaultSplits
	Stratify        string // "" = the recipe's split.stratify (which may be "")
	RequireCoverage bool   // also set by the recipe's split.require_coverage
	Shard, Shards   int    // render only shard Shard of Shards (Shards 0 = the whole set)
	Force           bool
	Resume          bool        // continue an interrupted run of the same recipe, seed and options in Out
	Layout          string      // manifest.LayoutFolder ("" too) or manifest.LayoutPacked
	PackBytes       int64       // the packed layout's bound on a pack (0 = manifest.DefaultPackBytes)
	FS              manifest.FS // nil = the real file system
	Version         string
	Progress        func(done, total int) // called from one goroutine, in order
}

// Summary reports a finished run.
type Summary struct {
	Samples int
	Resumed int // samples found complete and kept when resuming
	Elapsed time.Duration
	Bytes   int64
	Splits  manifest.SplitTable
}

// SplitDefaults fills in the ratios and the stratification key a run
// uses when not given: the recipe's split.ratios (else
// manifest.DefaultSplits) and its split.stratify.
func (r *Recipe) SplitDefaults(ratios, stratify string) (string, string) {
	if ratios == "" && r.Split != nil {
		ratios = r.Split.Ratios
	}
	if ratios == "" {
		ratios = manifest.DefaultSplits
	}
	if stratify == "" && r.Split != nil {
		stratify = r.Split.Stratify
	}
	return ratios, stratify
}

// MaxCount bounds --count.
const MaxCount = 100_000_000

// RecipeJSON returns the normalized recipe (defaults filled in) as compact
// JSON and its SHA-256.
func (r *Recipe) RecipeJSON() ([]byte, string, error) {
	b, err := json.Marshal(r)
	if err != nil {
		return nil, "", err
	}
	s := sha256.Sum256(b)
	return b, hex.EncodeToString(s[:]), nil
}

// CoverageError is a --require-coverage failure.
type CoverageError struct{ Cells []string }

func (e *CoverageError) Error() string {
	return fmt.Sprintf("--require-coverage: %d strata × split cells are empty: %s", len(e.Cells), strings.Join(e.Cells, "; "))
}

// Allocate computes the stratum of every sample from its plan and deals the
// samples (each its own group) to splits. It is the same on every shard. It
// returns each sample's stratum as an index into names, 4 bytes a sample.
func Allocate(r *Recipe, seed uint64, count, workers int, splits manifest.Splits, key string) (ids []int32, names []string, a *manifest.Allocation, err error) {
	if err := r.CheckStratify(key); err != nil {
		return nil, nil, nil, err
	}
	ids = make([]int32, count)
	index := map[string]int32{}
	var mu sync.Mutex
	errs := make([]error, workers)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := w; i < count; i += workers {
				k, err := r.Stratum(seed, i, key)
				if err != nil {
					errs[w] = err
					return
				}
				mu.Lock()
				id, ok := index[k]
				if !ok {
					id = int32(len(names))
					index[k] = id
					names = append(names, k)
				}
				mu.Unlock()
				ids[i] = id
			}
		}(w)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, nil, nil, err
		}
	}
	a, err = r.allocate(seed, ids, names, splits)
	return ids, names, a, err
}

// ShardRange returns the contiguous index range [lo, hi) of shard i of n:
// lo = ⌊i·count/n⌋, hi = ⌊(i+1)·count/n⌋.
func ShardRange(i, n, count int) (lo, hi int) {
	return int(int64(i) * int64(count) / int64(n)), int(int64(i+1) * int64(count) / int64(n))
}

// Run generates a dataset: strata are computed from plans and the split is
// allocated first; then workers plan, render, encode and write samples
// concurrently; records enter manifest.jsonl strictly in index order; and
// dataset.json (shard.json for a shard) is written last. At most 4×workers
// samples are in flight, so memory does not grow with Count beyond the
// per-sample split table.
func Run(ctx context.Context, o RunOptions) (Summary, error) {
	start := time.Now()
	r := o.Recipe
	if o.Count < 1 || o.Count > MaxCount {
		return Summary{}, fmt.Errorf("count %d: want 1..%d", o.Count, MaxCount)
	}
	workers := o.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	o.Splits, o.Stratify = r.SplitDefaults(o.Splits, o.Stratify)
	if r.Split != nil && r.Split.RequireCoverage {
		o.RequireCoverage = true
	}
	splits, err := manifest.ParseSplits(o.Splits)
	if err != nil {
		return Summary{}, err
	}
	splits.Cover = o.RequireCoverage // coverage first (manifest.CoverRound)
	if err := r.checkInstrumentSplits(splits); err != nil {
		return Summary{}, err
	}
	lo, hi := 0, o.Count
	if o.Shards > 0 {
		if o.Shard < 0 || o.Shard >= o.Shards || o.Shards > o.Count {
			return Summary{}, fmt.Errorf("shard %d/%d: want 0 ≤ shard < shards ≤ count (%d)", o.Shard, o.Shards, o.Count)
		}
		lo, hi = ShardRange(o.Shard, o.Shards, o.Count)
	}
	first := lo
	recipeJSON, recipeHash, err := r.RecipeJSON()
	if err != nil {
		return Summary{}, err
	}
	_, _, alloc, err := Allocate(r, o.Seed, o.Count, workers, splits, o.Stratify)
	if err != nil {
		return Summary{}, err
	}
	var tnames []string
	var defs []manifest.TargetDef
	for _, t := range r.Targets {
		tnames = append(tnames, t.Name)
		defs = append(defs, t.def())
	}
	table := manifest.SplitTable{Names: splits.Names, Spec: splits.String(), Ratios: map[string]float64{}, Counts: map[string]int{},
		Stratify: o.Stratify, Strata: alloc.Table, Thin: alloc.Thin, RequireCoverage: o.RequireCoverage}
	for i, n := range splits.Names {
		table.Ratios[n] = manifest.Round(splits.Ratios[i], 6)
		table.Counts[n] = alloc.Counts[i]
	}
	if o.RequireCoverage {
		if cells := alloc.Uncovered(splits); len(cells) > 0 {
			return Summary{Splits: table}, &CoverageError{cells} // the table shows the caller which strata are thin
		}
	}
	d := &manifest.Dataset{
		ToolVersion: o.Version, Recipe: recipeJSON, RecipeSHA256: recipeHash,
		Seed: o.Seed, Count: o.Count, Width: r.Canvas.Width, Height: r.Canvas.Height,
		Mode: r.Canvas.Mode, Classes: r.ClassTable(), Targets: tnames, TargetDefs: defs, Splits: table,
	}

	layout, packBytes := manifest.RunLayout(o.Layout, o.PackBytes)
	marker, _ := json.Marshal(struct {
		Run         string `json:"run"`
		ToolVersion string `json:"tool_version"`
		Recipe      string `json:"recipe_sha256"`
		Seed        uint64 `json:"seed"`
		Count       int    `json:"count"`
		Splits      string `json:"splits"`
		Stratify    string `json:"stratify"`
		Shard       int    `json:"shard"`
		Shards      int    `json:"shards"`
		Cover       bool   `json:"require_coverage,omitempty"` // another allocation: not the same run
		Layout      string `json:"layout,omitempty"`
		PackBytes   int64  `json:"pack_bytes,omitempty"`
	}{"generate", o.Version, recipeHash, o.Seed, o.Count, table.Spec, o.Stratify, o.Shard, o.Shards, o.RequireCoverage, layout, packBytes})
	// A layout no sample can meet fails here, before the folder is touched,
	// rather than after the run has started (and invited a --resume).
	if _, err := NewRenderer(r).Generate(o.Seed, first); err != nil {
		return Summary{Splits: table}, r.layoutRecipeError(err)
	}
	co := manifest.CreateOptions{Force: o.Force, FS: o.FS, Marker: marker, Layout: layout, PackBytes: packBytes}
	var w *manifest.Writer
	resumed := 0
	if o.Resume {
		w, resumed, err = manifest.Resume(o.Out, co, nil)
	} else {
		w, err = manifest.CreateWith(o.Out, co)
	}
	if err != nil {
		return Summary{}, err
	}
	lo += resumed
	newProduce := func() manifest.Produce {
		rd := NewRenderer(r)
		rd.ReuseSamples() // produce encodes each sample before the next
		rd.splitOf = func(i int) string { return splits.Names[alloc.Split[i]] }
		enc := manifest.NewEncoder()
		return func(i int) ([]*manifest.Record, int64, error) {
			rec, n, err := rd.produce(o.Seed, i, enc, w)
			if err != nil {
				return nil, n, err
			}
			rec.Split = splits.Names[alloc.Split[i]]
			// The stratum is read off the rendered record rather than kept for
			// every sample, so only one byte per sample (its split) stays in
			// memory. Every planned object is in the masks, so the record's
			// counts and content targets are the plan's: the same key.
			if rec.Stratum, err = manifest.StratumOf(rec, o.Stratify); err != nil {
				return nil, n, err
			}
			if rec.HeldOut != "" {
				rec.Stratum = manifest.HeldOutPrefix + rec.HeldOut
			}
			return []*manifest.Record{rec}, n, nil
		}
	}
	progress := o.Progress
	if progress != nil && resumed > 0 {
		progress = func(done, total int) { o.Progress(done+resumed, total+resumed) }
	}
	done, total, firstErr := manifest.RunOrdered(ctx, lo, hi, workers, newProduce, w, progress)
	done += resumed
	sum := Summary{Samples: done, Resumed: resumed, Elapsed: time.Since(start), Bytes: total, Splits: table}
	if firstErr != nil {
		w.Abort()
		return sum, r.layoutRecipeError(firstErr)
	}
	var n int64
	if o.Shards > 0 {
		n, err = w.FinishShard(&manifest.Shard{Shard: o.Shard, Shards: o.Shards, First: first, End: hi, Dataset: *d})
	} else {
		n, err = w.Finish(d)
	}
	sum.Bytes += n
	sum.Elapsed = time.Since(start)
	return sum, err
}

// produce generates, encodes and writes sample i.
func (rd *Renderer) produce(seed uint64, i int, enc *manifest.Encoder, w *manifest.Writer) (*manifest.Record, int64, error) {
	s, err := rd.Generate(seed, i)
	if err != nil {
		return nil, 0, err
	}
	rec := s.Record
	n, err := w.WriteFiles(&rec, enc, s.Image, s.Mask, s.Instances)
	return &rec, n, err
}

// layoutRecipeError turns a sample whose layout cannot be met into a
// RecipeError naming the recipe file and the layout field: the recipe must
// change (which makes a new run), so resuming would fail the same way.
func (r *Recipe) layoutRecipeError(err error) error {
	var le *LayoutError
	if !errors.As(err, &le) {
		return err
	}
	file := r.file
	if file == "" {
		file = "preset " + r.Name
	}
	return &RecipeError{File: file, Path: le.Path(),
		Msg: fmt.Sprintf("sample %d cannot be laid out: %s (gave up after %d attempts); loosen the layout: fewer or smaller objects, a larger region, more overlap or lower least_pixels/least_shown", le.Index, le.Constraint, MaxAttempts)}
}
