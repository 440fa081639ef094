package augment

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// The standard library's rand.(*Rand).NormFloat64 is the reference of
// normal (normal.go): the same ziggurat (Marsaglia & Tsang 2000), whose
// tables normal.go builds with the paper's setup.

// TestNormalMatchesStdlib draws 2²¹ normals from each of 8 seeds both ways
// and compares every value bit for bit and the generators' states after.
// About 1 % of draws take the slow paths (tail and wedges), so each of them
// runs thousands of times; the test checks that some reached the tail.
func TestNormalMatchesStdlib(t *testing.T) {
	slow := 0
	for s := uint64(0); s < 8; s++ {
		ref := rand.New(rand.NewPCG(s, s*0x9e3779b97f4a7c15+1))
		p := rand.NewPCG(s, s*0x9e3779b97f4a7c15+1)
		for k := 0; k < 1<<21; k++ {
			want, got := ref.NormFloat64(), normal(p)
			if math.Float64bits(want) != math.Float64bits(got) {
				t.Fatalf("seed %d draw %d: normal %v, rand.NormFloat64 %v", s, k, got, want)
			}
			if math.Abs(got) > zigR {
				slow++
			}
		}
		if a, b := ref.Uint64(), p.Uint64(); a != b {
			t.Fatalf("seed %d: generators differ after the draws", s)
		}
	}
	if slow == 0 {
		t.Fatal("no draw beyond the base strip: the tail path was not compared")
	}
}

// scripted is a rand.Source that returns given values, then a PCG's.
type scripted struct {
	vals []uint64
	p    *rand.PCG
}

func (s *scripted) Uint64() uint64 {
	if len(s.vals) > 0 {
		v := s.vals[0]
		s.vals = s.vals[1:]
		return v
	}
	return s.p.Uint64()
}

// TestNormalTables probes every layer's table entries against the standard
// library's: for each layer i, first draws with j = ±1 (x = ±w[i] exactly
// when the fast case applies) and j at the fast case's bound k[i] and on
// both sides of it (a different k[i] changes the branch and so the value
// or the draws consumed), each followed by the same further draws.
func TestNormalTables(t *testing.T) {
	for i := uint64(0); i < 128; i++ {
		k := int64(zigK[i])
		for _, j := range []int64{1, -1, k - 1, -(k - 1), k, -k, k + 1, -(k + 1), math.MaxInt32, math.MinInt32} {
			if j > math.MaxInt32 || j < math.MinInt32 {
				continue
			}
			u := uint64(uint32(int32(j))) | i<<32 | 0xabcd<<39 // high bits are ignored by both
			ref := rand.New(&scripted{vals: []uint64{u}, p: rand.NewPCG(i, uint64(j))})
			p := rand.NewPCG(i, uint64(j))
			want, got := ref.NormFloat64(), normalSlow(p, u)
			if math.Float64bits(want) != math.Float64bits(got) {
				t.Fatalf("layer %d, j = %d: normal %v, rand.NormFloat64 %v", i, j, got, want)
			}
			if a, b := ref.Uint64(), p.Uint64(); a != b {
				t.Fatalf("layer %d, j = %d: a different number of draws taken", i, j)
			}
		}
	}
}

// TestNoiseFastMatchesReference holds gaussianNoise and speckle to
// GaussianNoise and Speckle given a *rand.Rand over the same generator
// (manifest.RNG and manifest.PCG of one seed), gray and RGB, bit for bit.
func TestNoiseFastMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 3))
	for _, c := range []int{1, 3} {
		src := fastTestImage(61, 47, c, rng, false)
		for seed := uint64(0); seed < 6; seed++ {
			for _, sigma := range []float64{0, -1, math.NaN(), 0.5, 4, 40} {
				a, b := src.Clone(), src.Clone()
				GaussianNoise(a, manifest.RNG(seed), sigma)
				gaussianNoise(b, manifest.PCG(seed), sigma)
				fastSameImage(t, "gaussian noise", b, a)
				a, b = src.Clone(), src.Clone()
				Speckle(a, manifest.RNG(seed), sigma/50)
				speckle(b, manifest.PCG(seed), sigma/50)
				fastSameImage(t, "speckle", b, a)
			}
		}
	}
}

// BenchmarkNoise times gaussianNoise against GaussianNoise on a 512×512
// RGB image.
//
//	go test -run '^$' -bench 'Noise$' ./augment/
func BenchmarkNoise(b *testing.B) {
	img := NewImage(512, 512, 3)
	b.Run("fast", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			gaussianNoise(img, manifest.PCG(uint64(i)), 4)
		}
	})
	b.Run("reference", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			GaussianNoise(img, manifest.RNG(uint64(i)), 4)
		}
	})
}
