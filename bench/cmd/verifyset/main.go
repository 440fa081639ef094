// Command verifyset writes a synthetic trueset dataset of N records for
// measuring `trueset verify`'s memory against the number of records. It
// renders one real 16×16 sample with gen.Run, then writes N records that
// all point at that sample's three files (ids 000000…, each its own group,
// splits dealt by manifest.AllocateStrata exactly as generate deals them),
// and a dataset.json whose counts, strata table and manifest checksum
// agree. So `trueset verify DIR` finds no problem and does its full work per
// record (decode the line, open, hash, header-check and decode the three
// PNGs, compare the labels, the group and split checks); only the files are
// shared, which keeps the folder small. Usage:
//
//	verifyset -n 1000000 -out DIR
package main

import (
	"bufio"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"flag"
	"fmt"
	"os"
	"path/filepath"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

const recipe = `name: verify-bench
canvas: {width: 16, height: 16, mode: gray}
classes:
  - name: disc
    color: [200, 60, 60]
layers:
  - objects:
      - class: disc
        shape: circle
        count: 1
        size: [6, 8]
targets:
  - name: discs
    kind: count
`

func main() {
	n := flag.Int("n", 10000, "records to write")
	out := flag.String("out", "", "the dataset folder to write (must not exist)")
	flag.Parse()
	if *out == "" || *n < 1 {
		fmt.Fprintln(os.Stderr, "usage: verifyset -n N -out DIR")
		os.Exit(2)
	}
	if err := write(*n, *out); err != nil {
		fmt.Fprintln(os.Stderr, "verifyset:", err)
		os.Exit(1)
	}
}

func write(n int, out string) error {
	r, err := gen.ParseRecipe("verify-bench.yaml", []byte(recipe))
	if err != nil {
		return err
	}
	src := out + ".src"
	defer os.RemoveAll(src)
	if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: src, Count: 1, Seed: 1, Workers: 1, Version: "bench"}); err != nil {
		return err
	}
	d, err := manifest.ReadDataset(src)
	if err != nil {
		return err
	}
	var rec *manifest.Record
	if err := manifest.ReadManifest(src, func(x *manifest.Record) error { rec = x; return nil }); err != nil {
		return err
	}
	if err := os.Mkdir(out, 0o755); err != nil {
		return err
	}
	for _, p := range []string{rec.Image, rec.Mask, rec.Instances} {
		b, err := os.ReadFile(filepath.Join(src, p))
		if err != nil {
			return err
		}
		if err := os.MkdirAll(filepath.Join(out, filepath.Dir(p)), 0o755); err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(out, p), b, 0o644); err != nil {
			return err
		}
	}
	sp, err := manifest.ParseSplits(d.Splits.Spec)
	if err != nil {
		return err
	}
	keys := make([]string, n)
	for i := range keys {
		keys[i] = rec.Stratum
	}
	a, err := manifest.AllocateStrata(d.Seed, keys, sp)
	if err != nil {
		return err
	}
	f, err := os.Create(filepath.Join(out, manifest.ManifestFile))
	if err != nil {
		return err
	}
	h := sha256.New()
	w := bufio.NewWriterSize(f, 1<<20)
	counts := map[string]int{}
	for i := 0; i < n; i++ {
		x := *rec
		x.ID, x.Index, x.Group = manifest.SampleID(i), i, manifest.SampleID(i)
		x.Split = sp.Names[a.Split[i]]
		counts[x.Split]++
		b, err := manifest.MarshalRecord(&x)
		if err != nil {
			return err
		}
		b = append(b, '\n')
		w.Write(b)
		h.Write(b)
	}
	if err := w.Flush(); err != nil {
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	d.Count = n
	d.Splits.Counts = counts
	d.Splits.Strata = a.Table
	d.Splits.Thin = a.Thin
	d.ManifestSHA256 = hex.EncodeToString(h.Sum(nil))
	b, err := manifest.MarshalDataset(d)
	if err != nil {
		return err
	}
	return os.WriteFile(filepath.Join(out, manifest.DatasetFile), b, 0o644)
}
