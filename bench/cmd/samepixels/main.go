// Command samepixels decodes, with the standard library's image/png, every
// --step-th sample's image, mask and instance map in two dataset folders
// (trueset's and the comparator's, bench/run.sh) and fails unless each pair
// decodes to the same image type, size, pixels and palette. It prints the
// number of files compared.
package main

import (
	"bytes"
	"flag"
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"reflect"

	"github.com/trueset/trueset/manifest"
)

func main() {
	step := flag.Int("step", 97, "compare every step-th sample")
	count := flag.Int("count", 20000, "samples in each folder")
	flag.Parse()
	if flag.NArg() != 2 {
		fmt.Fprintln(os.Stderr, "usage: samepixels [--step N] [--count N] DIR_A DIR_B")
		os.Exit(2)
	}
	n := 0
	for i := 0; i < *count; i += *step {
		for _, sub := range []string{manifest.ImagesDir, manifest.MasksDir, manifest.InstancesDir} {
			rel := filepath.Join(sub, manifest.SampleID(i)+".png")
			a, err := decode(filepath.Join(flag.Arg(0), rel))
			if err != nil {
				fail(err)
			}
			b, err := decode(filepath.Join(flag.Arg(1), rel))
			if err != nil {
				fail(err)
			}
			if !reflect.DeepEqual(a, b) {
				fail(fmt.Errorf("%s: %T %v and %T %v decode to different pixels", rel, a, a.Bounds(), b, b.Bounds()))
			}
			n++
		}
	}
	fmt.Printf("files=%d\n", n)
}

func decode(p string) (image.Image, error) {
	b, err := os.ReadFile(p)
	if err != nil {
		return nil, err
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", p, err)
	}
	return m, nil
}

func fail(err error) {
	fmt.Fprintln(os.Stderr, "samepixels:", err)
	os.Exit(1)
}
