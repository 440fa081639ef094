package gen

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"runtime"
	"sync"
	"time"

	"github.com/trueset/trueset/manifest"
)

// RunOptions configures a generation run. The zero value of each optional
// field means its default.
type RunOptions struct {
	Recipe   *Recipe
	Out      string
	Count    int
	Seed     uint64
	Workers  int    // 0 = runtime.NumCPU()
	Splits   string // "" = manifest.DefaultSplits
	Force    bool
	Version  string
	Progress func(done, total int) // called from one goroutine, in order
}

// Summary reports a finished run.
type Summary struct {
	Samples int
	Elapsed time.Duration
	Bytes   int64
}

// MaxCount bounds --count.
const MaxCount = 100_000_000

// RecipeJSON returns the normalised recipe (defaults filled in) as compact
// JSON and its SHA-256.
func (r *Recipe) RecipeJSON() ([]byte, string, error) {
	b, err := json.Marshal(r)
	if err != nil {
		return nil, "", err
	}
	s := sha256.Sum256(b)
	return b, hex.EncodeToString(s[:]), nil
}

type result struct {
	rec   *manifest.Record
	bytes int64
	err   error
}

// Run generates a dataset: workers plan, render, encode and write samples
// concurrently; records enter manifest.jsonl strictly in index order; and
// dataset.json is written last. At most 4×workers samples are in flight, so
// memory does not grow with Count.
func Run(ctx context.Context, o RunOptions) (Summary, error) {
	start := time.Now()
	if o.Count < 1 || o.Count > MaxCount {
		return Summary{}, fmt.Errorf("count %d: want 1..%d", o.Count, MaxCount)
	}
	workers := o.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	if o.Splits == "" {
		o.Splits = manifest.DefaultSplits
	}
	splits, err := manifest.ParseSplits(o.Splits)
	if err != nil {
		return Summary{}, err
	}
	recipeJSON, recipeHash, err := o.Recipe.RecipeJSON()
	if err != nil {
		return Summary{}, err
	}
	alloc := splits.Allocate(o.Seed, o.Count)

	w, err := manifest.Create(o.Out, o.Force)
	if err != nil {
		return Summary{}, err
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()

	window := 4 * workers
	slots := make(chan struct{}, window)
	jobs := make(chan int)
	results := make(chan result, window)
	var wg sync.WaitGroup
	go func() {
		defer close(jobs)
		for i := 0; i < o.Count; i++ {
			select {
			case slots <- struct{}{}:
			case <-ctx.Done():
				return
			}
			select {
			case jobs <- i:
			case <-ctx.Done():
				return
			}
		}
	}()
	for k := 0; k < workers; k++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			rd := NewRenderer(o.Recipe)
			enc := manifest.NewEncoder()
			for i := range jobs {
				rec, n, err := rd.produce(o.Seed, i, enc, w)
				if err == nil {
					rec.Split = splits.Names[alloc[i]]
				}
				select {
				case results <- result{rec, n, err}:
				case <-ctx.Done():
					return
				}
			}
		}()
	}
	go func() { wg.Wait(); close(results) }()

	pending := map[int]*manifest.Record{}
	next := 0
	var total int64
	counts := map[string]int{}
	var firstErr error
	for res := range results {
		if res.err != nil {
			if firstErr == nil {
				firstErr = res.err
				cancel()
			}
			continue
		}
		if firstErr != nil {
			continue
		}
		total += res.bytes
		pending[res.rec.Index] = res.rec
		for {
			rec, ok := pending[next]
			if !ok {
				break
			}
			delete(pending, next)
			if err := w.Append(rec); err != nil {
				firstErr = err
				cancel()
				break
			}
			counts[rec.Split]++
			next++
			<-slots
			if o.Progress != nil {
				o.Progress(next, o.Count)
			}
		}
	}
	if firstErr == nil && ctx.Err() != nil {
		firstErr = ctx.Err()
	}
	if firstErr != nil {
		w.Abort()
		return Summary{Samples: next, Elapsed: time.Since(start), Bytes: total}, firstErr
	}
	ratios := map[string]float64{}
	for i, n := range splits.Names {
		ratios[n] = manifest.Round(splits.Ratios[i], 6)
		counts[n] += 0
	}
	var tnames []string
	for _, t := range o.Recipe.Targets {
		tnames = append(tnames, t.Name)
	}
	d := &manifest.Dataset{
		ToolVersion: o.Version, Recipe: recipeJSON, RecipeSHA256: recipeHash,
		Seed: o.Seed, Count: o.Count, Width: o.Recipe.Canvas.Width, Height: o.Recipe.Canvas.Height,
		Mode: o.Recipe.Canvas.Mode, Classes: o.Recipe.ClassTable(), Targets: tnames,
		Splits: manifest.SplitTable{Names: splits.Names, Ratios: ratios, Counts: counts},
	}
	n, err := w.Finish(d)
	total += n
	return Summary{Samples: next, Elapsed: time.Since(start), Bytes: total}, err
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
