// Command inmemory is the no-I/O reference of bench/run.sh's packed-output
// figure: it does what `trueset generate` does for a preset or recipe except
// touch the file system. It allocates the split (gen.Allocate, as generate
// does), then on --workers goroutines renders each sample (gen.Renderer),
// encodes its image, semantic mask and instance mask with trueset's PNG
// encoder (manifest.Encoder), takes each file's SHA-256 and marshals its
// manifest record, and discards the bytes. Its whole-process wall time is
// the figure (bench/cmd/peakrss times it); it prints one line,
// samples=… bytes=… record_bytes=…, so a run can be checked against the
// files a real run writes.
package main

import (
	"flag"
	"fmt"
	"image"
	"os"
	"sync"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

func main() {
	count := flag.Int("count", 20000, "samples")
	workers := flag.Int("workers", 2, "rendering and encoding goroutines")
	preset := flag.String("preset", gen.DefaultPreset, "built-in preset")
	recipe := flag.String("recipe", "", "recipe YAML file (instead of --preset)")
	seed := flag.Uint64("seed", 1, "seed (trueset generate's default is 1)")
	flag.Parse()
	if *count < 1 || *workers < 1 {
		fmt.Fprintln(os.Stderr, "inmemory: --count and --workers must be at least 1")
		os.Exit(2)
	}
	if err := run(*count, *workers, *preset, *recipe, *seed); err != nil {
		fmt.Fprintln(os.Stderr, "inmemory:", err)
		os.Exit(1)
	}
}

func run(count, workers int, preset, recipe string, seed uint64) error {
	var r *gen.Recipe
	var err error
	if recipe != "" {
		r, err = gen.LoadRecipe(recipe)
	} else {
		r, err = gen.Preset(preset)
	}
	if err != nil {
		return err
	}
	spec, key := r.SplitDefaults("", "")
	splits, err := manifest.ParseSplits(spec)
	if err != nil {
		return err
	}
	_, _, alloc, err := gen.Allocate(r, seed, count, workers, splits, key)
	if err != nil {
		return err
	}
	errs := make([]error, workers)
	files := make([]int64, workers)
	records := make([]int64, workers)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			rd := gen.NewRenderer(r)
			rd.ReuseSamples() // as gen.Run's workers do
			enc := manifest.NewEncoder()
			for i := w; i < count; i += workers {
				s, err := rd.Generate(seed, i)
				if err != nil {
					errs[w] = err
					return
				}
				rec := s.Record
				rec.Image = manifest.ImagesDir + "/" + rec.ID + ".png"
				rec.Mask = manifest.MasksDir + "/" + rec.ID + ".png"
				rec.Instances = manifest.InstancesDir + "/" + rec.ID + ".png"
				rec.SHA256 = map[string]string{}
				for _, f := range []struct {
					key string
					m   image.Image
				}{{"image", s.Image}, {"mask", s.Mask}, {"instances", s.Instances}} {
					b, err := enc.Encode(f.m)
					if err != nil {
						errs[w] = err
						return
					}
					rec.SHA256[f.key] = manifest.SHA256Hex(b)
					files[w] += int64(len(b))
				}
				rec.Split = splits.Names[alloc.Split[i]]
				if rec.Stratum, err = manifest.StratumOf(&rec, key); err != nil {
					errs[w] = err
					return
				}
				if rec.HeldOut != "" {
					rec.Stratum = manifest.HeldOutPrefix + rec.HeldOut
				}
				b, err := manifest.MarshalRecord(&rec)
				if err != nil {
					errs[w] = err
					return
				}
				records[w] += int64(len(b)) + 1
			}
		}(w)
	}
	wg.Wait()
	var nb, nr int64
	for w := range errs {
		if errs[w] != nil {
			return errs[w]
		}
		nb += files[w]
		nr += records[w]
	}
	fmt.Printf("samples=%d bytes=%d record_bytes=%d\n", count, nb, nr)
	return nil
}
