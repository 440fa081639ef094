//go:build linux

// Command writefloor is the write-only floor of bench/run.sh: the time to
// merely write a finished dataset's files, already encoded. It reads every
// file of --from (a trueset folder: images/, masks/, instances/ and
// manifest.jsonl) into memory (not timed), then times creating the same
// three folders in --out and writing the same bytes under the same names
// with plain os.WriteFile (no temporary names, renames or checksums), sample
// i on goroutine i mod --workers, and manifest.jsonl last. It prints one
// line: seconds=… cpu_seconds=… files=… bytes=… (cpu: user + system time of
// the timed part, from getrusage).
package main

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sync"
	"time"

	"github.com/trueset/trueset/internal/benchcpu"
	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/manifest"
)

func main() {
	from := flag.String("from", "", "a finished trueset folder whose files to write again")
	workers := flag.Int("workers", 2, "writing goroutines")
	out := flag.String("out", "", "output folder (must not exist)")
	flag.Parse()
	if *from == "" || *out == "" || *workers < 1 {
		fmt.Fprintln(os.Stderr, "usage: writefloor --from DIR --out NEWDIR [--workers N]")
		os.Exit(2)
	}
	if err := run(*from, *out, *workers); err != nil {
		fmt.Fprintln(os.Stderr, "writefloor:", err)
		os.Exit(1)
	}
}

// file is one file to write: its path relative to the folder and its bytes.
type file struct {
	rel string
	b   []byte
}

var dirs = []string{manifest.ImagesDir, manifest.MasksDir, manifest.InstancesDir}

func run(from, out string, workers int) error {
	if _, err := os.Stat(out); err == nil {
		return fmt.Errorf("%s exists", out)
	}
	// Not timed: every sample's files, in name order (= index order).
	var names []string
	ents, err := os.ReadDir(filepath.Join(from, manifest.ImagesDir))
	if err != nil {
		return err
	}
	for _, e := range ents {
		names = append(names, e.Name())
	}
	slices.Sort(names)
	samples := make([][]file, len(names))
	for i, n := range names {
		for _, d := range dirs {
			rel := filepath.Join(d, n)
			b, err := safefile.Read(filepath.Join(from, rel), "sample file", manifest.MaxSampleFileBytes)
			if err != nil {
				return err
			}
			samples[i] = append(samples[i], file{rel, b})
		}
	}
	mf, err := safefile.Read(filepath.Join(from, manifest.ManifestFile), "manifest", 1<<34)
	if err != nil {
		return err
	}

	cpu0 := benchcpu.Process()
	start := time.Now()
	for _, d := range dirs {
		if err := os.MkdirAll(filepath.Join(out, d), 0o755); err != nil {
			return err
		}
	}
	errs := make([]error, workers)
	sizes := make([]int64, workers)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := w; i < len(samples); i += workers {
				for _, f := range samples[i] {
					if err := os.WriteFile(filepath.Join(out, f.rel), f.b, 0o644); err != nil {
						errs[w] = err
						return
					}
					sizes[w] += int64(len(f.b))
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
	if err := os.WriteFile(filepath.Join(out, manifest.ManifestFile), mf, 0o644); err != nil {
		return err
	}
	elapsed := time.Since(start)
	cpu := benchcpu.Process() - cpu0
	total := int64(len(mf))
	for _, n := range sizes {
		total += n
	}
	fmt.Printf("seconds=%.3f cpu_seconds=%.3f files=%d bytes=%d\n", elapsed.Seconds(), cpu.Seconds(), 3*len(samples)+1, total)
	return nil
}
