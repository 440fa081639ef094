package gen

import (
	"context"
	"testing"

	"github.com/trueset/trueset/manifest"
)

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

// BenchmarkRender: plan, rasterise, composite and measure labels.
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

// BenchmarkWrite: PNG-encode and atomically write one rendered sample's three files.
func BenchmarkWrite(b *testing.B) {
	r := benchRecipe(b)
	s, err := NewRenderer(r).Generate(1, 0)
	if err != nil {
		b.Fatal(err)
	}
	w, err := manifest.Create(b.TempDir(), false)
	if err != nil {
		b.Fatal(err)
	}
	defer w.Abort()
	enc := manifest.NewEncoder()
	b.ReportAllocs()
	for b.Loop() {
		rec := s.Record
		if _, err := w.WriteFiles(&rec, enc, s.Image, s.Mask, s.Instances); err != nil {
			b.Fatal(err)
		}
	}
}

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
