//go:build linux

// Command encodefloor is figure 1's comparator (bench/run.sh): it renders a
// preset's samples into memory with gen's renderer (not timed), then times
// only encoding each image, semantic mask and instance mask with image/png at
// its default settings and writing them in trueset's layout (images/,
// masks/, instances/, and a manifest.jsonl of the same size as the one
// trueset writes) with plain os.WriteFile, on --workers goroutines. It prints
// one line: seconds=… cpu_seconds=… files=… bytes=… manifest_bytes=… (cpu:
// user + system time of the timed part, from getrusage).
package main

import (
	"bytes"
	"flag"
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/internal/benchcpu"
	"github.com/trueset/trueset/manifest"
)

// pool is a one-buffer png.EncoderBuffer pool per worker: image/png's own
// way of not reallocating its deflate state, so the comparator is not
// slowed by garbage it need not make.
type pool struct{ b *png.EncoderBuffer }

func (p *pool) Get() *png.EncoderBuffer  { return p.b }
func (p *pool) Put(b *png.EncoderBuffer) { p.b = b }

func main() {
	count := flag.Int("count", 20000, "samples")
	workers := flag.Int("workers", 2, "encoding and writing goroutines")
	preset := flag.String("preset", gen.DefaultPreset, "built-in preset")
	seed := flag.Uint64("seed", 1, "seed (trueset generate's default is 1)")
	out := flag.String("out", "", "output folder (must not exist)")
	flag.Parse()
	if *out == "" {
		fmt.Fprintln(os.Stderr, "encodefloor: --out is required")
		os.Exit(2)
	}
	if err := run(*count, *workers, *preset, *seed, *out); err != nil {
		fmt.Fprintln(os.Stderr, "encodefloor:", err)
		os.Exit(1)
	}
}

func run(count, workers int, preset string, seed uint64, out string) error {
	r, err := gen.Preset(preset)
	if err != nil {
		return err
	}
	if _, err := os.Stat(out); err == nil {
		return fmt.Errorf("%s exists", out)
	}

	// Not timed: render every sample, and the manifest with the same split,
	// strata and record layout trueset writes (checksums are placeholders of
	// the same length).
	spec, key := r.SplitDefaults("", "")
	splits, err := manifest.ParseSplits(spec)
	if err != nil {
		return err
	}
	ids, names, alloc, err := gen.Allocate(r, seed, count, workers, splits, key)
	if err != nil {
		return err
	}
	samples := make([]*gen.Sample, count)
	errs := make([]error, workers)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			rd := gen.NewRenderer(r)
			for i := w; i < count; i += workers {
				s, err := rd.Generate(seed, i)
				if err != nil {
					errs[w] = err
					return
				}
				samples[i] = s
			}
		}(w)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	var mf bytes.Buffer
	ph := strings.Repeat("0", 64)
	for i, s := range samples {
		rec := s.Record
		rec.Split, rec.Stratum = splits.Names[alloc.Split[i]], names[ids[i]]
		rec.Image = manifest.ImagesDir + "/" + rec.ID + ".png"
		rec.Mask = manifest.MasksDir + "/" + rec.ID + ".png"
		rec.Instances = manifest.InstancesDir + "/" + rec.ID + ".png"
		rec.SHA256 = map[string]string{"image": ph, "mask": ph, "instances": ph}
		b, err := manifest.MarshalRecord(&rec)
		if err != nil {
			return err
		}
		mf.Write(b)
		mf.WriteByte('\n')
	}

	// Timed: encode with image/png's defaults and write.
	cpu0 := benchcpu.Process()
	start := time.Now()
	for _, sub := range []string{manifest.ImagesDir, manifest.MasksDir, manifest.InstancesDir} {
		if err := os.MkdirAll(filepath.Join(out, sub), 0o755); err != nil {
			return err
		}
	}
	sizes := make([]int64, workers)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			enc := png.Encoder{BufferPool: &pool{}}
			var buf bytes.Buffer
			for i := w; i < count; i += workers {
				s := samples[i]
				for _, f := range []struct {
					dir string
					m   image.Image
				}{{manifest.ImagesDir, s.Image}, {manifest.MasksDir, s.Mask}, {manifest.InstancesDir, s.Instances}} {
					buf.Reset()
					if err := enc.Encode(&buf, f.m); err != nil {
						errs[w] = err
						return
					}
					if err := os.WriteFile(filepath.Join(out, f.dir, s.Record.ID+".png"), buf.Bytes(), 0o644); err != nil {
						errs[w] = err
						return
					}
					sizes[w] += int64(buf.Len())
				}
			}
		}(w)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	if err := os.WriteFile(filepath.Join(out, manifest.ManifestFile), mf.Bytes(), 0o644); err != nil {
		return err
	}
	elapsed := time.Since(start)
	cpu := benchcpu.Process() - cpu0
	var total int64
	for _, n := range sizes {
		total += n
	}
	fmt.Printf("seconds=%.3f cpu_seconds=%.3f files=%d bytes=%d manifest_bytes=%d\n", elapsed.Seconds(), cpu.Seconds(), 3*count, total, mf.Len())
	return nil
}
