package manifest

import (
	"math"
	"math/rand/v2"
	"testing"
)

func checkRounded(t *testing.T, sizes []int, ratios []float64, got [][]int) {
	t.Helper()
	cols := make([]float64, len(ratios))
	colGot := make([]int, len(ratios))
	for i, n := range sizes {
		row := 0
		for j, r := range ratios {
			x := float64(n) * r
			cols[j] += x
			colGot[j] += got[i][j]
			row += got[i][j]
			if math.Abs(float64(got[i][j])-x) >= 1 {
				t.Fatalf("sizes %v ratios %v: cell (%d,%d) = %d, share %.4f", sizes, ratios, i, j, got[i][j], x)
			}
		}
		if row != n {
			t.Fatalf("sizes %v: row %d adds to %d, want %d", sizes, i, row, n)
		}
	}
	for j := range ratios {
		if math.Abs(float64(colGot[j])-cols[j]) >= 1+1e-9 {
			t.Fatalf("sizes %v ratios %v: split %d total %d, share %.4f", sizes, ratios, j, colGot[j], cols[j])
		}
	}
}

// Property: over random tables and ratios every cell and every split total is
// within ±1 of its exact share, and every stratum keeps its size.
func TestControlledRoundProperty(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 3000; trial++ {
		S := 1 + rng.IntN(40)
		K := 1 + rng.IntN(6)
		sizes := make([]int, S)
		for i := range sizes {
			sizes[i] = rng.IntN(30)
		}
		ratios := make([]float64, K)
		sum := 0.0
		for j := range ratios {
			ratios[j] = rng.Float64() + 0.01
			sum += ratios[j]
		}
		for j := range ratios {
			ratios[j] /= sum
		}
		got, err := ControlledRound(sizes, ratios)
		if err != nil {
			t.Fatal(err)
		}
		checkRounded(t, sizes, ratios, got)
	}
}

// Many strata of one sample each: naive per-stratum rounding would send
// every sample to train; controlled rounding keeps the split totals.
func TestControlledRoundSingletons(t *testing.T) {
	sizes := make([]int, 100)
	for i := range sizes {
		sizes[i] = 1
	}
	ratios := []float64{0.8, 0.1, 0.1}
	got, err := ControlledRound(sizes, ratios)
	if err != nil {
		t.Fatal(err)
	}
	checkRounded(t, sizes, ratios, got)
}
