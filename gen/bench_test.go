package gen

import (
	"bytes"
	"context"
	"fmt"
	"image"
	"image/png"
	"testing"

	"github.com/trueset/trueset/internal/benchcpu"
	"github.com/trueset/trueset/manifest"
)

// Kernel benchmarks for the speed figures (README, Performance; bench/run.sh
// prints the end-to-end ones). Each fast path has its reference beside it.

func benchRecipe(b *testing.B) *Recipe {
	r, err := Preset(DefaultPreset)
	if err != nil {
		b.Fatal(err)
	}
	return r
}

// BenchmarkPlan: content and geometry of one sample, no pixels (attempts
// whose layout fails are redrawn, as Generate does).
func BenchmarkPlan(b *testing.B) {
	r := benchRecipe(b)
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		for attempt := 0; ; attempt++ {
			if _, err := r.Plan(1, i, attempt); err == nil {
				break
			} else if attempt == MaxAttempts {
				b.Fatal(err)
			}
		}
	}
}

// BenchmarkRender: plan, rasterize, composite and measure labels.
func BenchmarkRender(b *testing.B) {
	r := benchRecipe(b)
	rd := NewRenderer(r)
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		if _, err := rd.Generate(1, i); err != nil {
			b.Fatal(err)
		}
	}
}

// benchSamples renders 64 samples of a preset to encode over and over.
func benchSamples(b *testing.B, preset string) []*Sample {
	r, err := Preset(preset)
	if err != nil {
		b.Fatal(err)
	}
	rd := NewRenderer(r)
	out := make([]*Sample, 64)
	for i := range out {
		if out[i], err = rd.Generate(1, i); err != nil {
			b.Fatal(err)
		}
	}
	return out
}

// benchEncode encodes one kind of image of each sample in turn, with
// trueset's Encoder (fast path) or image/png at its defaults (the reference
// path, and figure 1's comparator), and reports bytes per file.
func benchEncode(b *testing.B, preset string, pick func(*Sample) image.Image, reference bool) {
	ss := benchSamples(b, preset)
	enc := manifest.NewEncoder()
	std := png.Encoder{BufferPool: &onePool{}}
	var buf bytes.Buffer
	total := 0
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		m := pick(ss[i%len(ss)])
		if reference {
			buf.Reset()
			if err := std.Encode(&buf, m); err != nil {
				b.Fatal(err)
			}
			total += buf.Len()
		} else {
			out, err := enc.Encode(m)
			if err != nil {
				b.Fatal(err)
			}
			total += len(out)
		}
	}
	b.ReportMetric(float64(total)/float64(b.N), "B/file")
}

// onePool keeps image/png's deflate state between calls, as trueset's
// reference path and figure 1's comparator do.
type onePool struct{ b *png.EncoderBuffer }

func (p *onePool) Get() *png.EncoderBuffer  { return p.b }
func (p *onePool) Put(b *png.EncoderBuffer) { p.b = b }

func pickImage(s *Sample) image.Image     { return s.Image }
func pickMask(s *Sample) image.Image      { return s.Mask }
func pickInstances(s *Sample) image.Image { return s.Instances }

// The default preset: 64×64 8-bit gray images, indexed masks, 16-bit
// instance maps.
func BenchmarkEncodeGray(b *testing.B)      { benchEncode(b, DefaultPreset, pickImage, false) }
func BenchmarkEncodeGrayStd(b *testing.B)   { benchEncode(b, DefaultPreset, pickImage, true) }
func BenchmarkEncodeMask(b *testing.B)      { benchEncode(b, DefaultPreset, pickMask, false) }
func BenchmarkEncodeMaskStd(b *testing.B)   { benchEncode(b, DefaultPreset, pickMask, true) }
func BenchmarkEncodeInst(b *testing.B)      { benchEncode(b, DefaultPreset, pickInstances, false) }
func BenchmarkEncodeInstStd(b *testing.B)   { benchEncode(b, DefaultPreset, pickInstances, true) }
func BenchmarkEncodeRGB(b *testing.B)       { benchEncode(b, "tabletop-dice", pickImage, false) }
func BenchmarkEncodeRGBStd(b *testing.B)    { benchEncode(b, "tabletop-dice", pickImage, true) }
func BenchmarkEncodeLabels(b *testing.B)    { benchEncode(b, "bin-labels", pickImage, false) }
func BenchmarkEncodeLabelsStd(b *testing.B) { benchEncode(b, "bin-labels", pickImage, true) }

// referenceFS is the real file system seen through the FS interface only, so
// that writes take writeAtomic's reference path (os.CreateTemp and Rename).
type referenceFS struct{ manifest.FS }

// benchWrite: PNG-encode and atomically write one rendered sample's three
// files under a new name each time (writing over the same names would
// measure the file system's handling of replaced files instead).
func benchWrite(b *testing.B, fsys manifest.FS) {
	r := benchRecipe(b)
	s, err := NewRenderer(r).Generate(1, 0)
	if err != nil {
		b.Fatal(err)
	}
	w, err := manifest.CreateWith(b.TempDir(), manifest.CreateOptions{FS: fsys})
	if err != nil {
		b.Fatal(err)
	}
	defer w.Abort()
	enc := manifest.NewEncoder()
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		rec := s.Record
		rec.Index, rec.ID = i, manifest.SampleID(i)
		if _, err := w.WriteFiles(&rec, enc, s.Image, s.Mask, s.Instances); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkWrite: the fast file path (open with O_EXCL, write, close, rename).
func BenchmarkWrite(b *testing.B) { benchWrite(b, nil) }

// BenchmarkWriteReference: the same through os.CreateTemp, Write, Close, Rename.
func BenchmarkWriteReference(b *testing.B) { benchWrite(b, referenceFS{manifest.OS}) }

// BenchmarkRun2Workers: the whole pipeline on the default preset at 2
// workers; samples/s = 1e9 / (ns/op).
func BenchmarkRun2Workers(b *testing.B) {
	r := benchRecipe(b)
	const n = 500
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Run(context.Background(), RunOptions{Recipe: r, Out: b.TempDir(), Count: n, Seed: 1, Workers: 2}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(n*b.N)/b.Elapsed().Seconds(), "samples/s")
}

// canvasRecipe returns the default preset (side 64) or its scaled twin in
// bench/recipes (side 512 or 1024).
func canvasRecipe(b *testing.B, side int) *Recipe {
	if side == 64 {
		return benchRecipe(b)
	}
	r, err := LoadRecipe(fmt.Sprintf("../bench/recipes/canvas-%d.yaml", side))
	if err != nil {
		b.Fatal(err)
	}
	return r
}

// BenchmarkGenerateCanvas: render one sample and PNG-encode its three
// images (no file I/O), at the default preset's 64² and its scaled twins at
// 512² and 1024² (bench/recipes).
func BenchmarkGenerateCanvas(b *testing.B) {
	for _, side := range []int{64, 512, 1024} {
		b.Run(fmt.Sprint(side), func(b *testing.B) {
			rd := NewRenderer(canvasRecipe(b, side))
			enc := manifest.NewEncoder()
			total := 0
			b.ReportAllocs()
			defer benchcpu.PerOp(b)()
			for i := 0; b.Loop(); i++ {
				s, err := rd.Generate(1, i%64)
				if err != nil {
					b.Fatal(err)
				}
				for _, m := range []image.Image{s.Image, s.Mask, s.Instances} {
					out, err := enc.Encode(m)
					if err != nil {
						b.Fatal(err)
					}
					total += len(out)
				}
			}
			b.ReportMetric(float64(total)/float64(b.N), "B/sample")
		})
	}
}
