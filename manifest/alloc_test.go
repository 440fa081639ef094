package manifest

import (
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
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

// Worked example, checkable by eye. Ratios 0.8/0.1/0.1, strata of 3, 6 and
// 12 groups; exact shares
//
//	 3: 2.4  0.3  0.3
//	 6: 4.8  0.6  0.6
//	12: 9.6  1.2  1.2     split shares 16.8  2.1  2.1
//
// Controlled rounding (Cox & Ernst, "Controlled rounding", INFOR 20(4),
// 1982, from memory) keeps every cell at ⌊x⌋ or ⌈x⌉: stratum 3 then gives
// train 2 or 3, leaving at most 1 for val and test together — one of them
// is 0. Coverage first: the 0.3 cells become 1, which needs 2 groups where
// the row's rounding leaves only 3 − 2 = 1, so the missing one comes from
// train (the only cell above 1): 1/1/1. Stratum 6: the 0.6 cells become 1,
// train keeps ⌊4.8⌋ = 4 (6 = 4 + 1 + 1, no shortage). Stratum 12 starts at
// 9/1/1 with one group left over; train is below ⌊16.8⌋ = 16 (1 + 4 + 9 =
// 14) and val and test are at ⌈2.1⌉ = 3 already, so it goes to train:
// 10/1/1. Totals 15/3/3: val and test within ±1 of 2.1; train 15 is one
// short of ⌊16.8⌋, the least possible, since strata 3 and 6 are fixed and
// stratum 12 can give train at most ⌈9.6⌉ = 10.
func TestCoverRoundWorkedExample(t *testing.T) {
	sizes := []int{3, 6, 12}
	ratios := []float64{0.8, 0.1, 0.1}
	plain, err := ControlledRound(sizes, ratios)
	if err != nil {
		t.Fatal(err)
	}
	if plain[0][1] != 0 && plain[0][2] != 0 {
		t.Fatalf("controlled rounding gave stratum 3 the row %v; its bounds leave a 0 in val or test", plain[0])
	}
	got, err := CoverRound(sizes, ratios)
	if err != nil {
		t.Fatal(err)
	}
	want := [][]int{{1, 1, 1}, {4, 1, 1}, {10, 1, 1}}
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("coverage first: got %v, want %v", got, want)
	}
}

// coverCase is one table for the coverage-first checks: sizes, ratios and the
// per-cell facts the rules are stated in.
type coverCase struct {
	sizes   []int
	ratios  []float64
	nonzero int
}

func (c coverCase) share(i, j int) float64 { return float64(c.sizes[i]) * c.ratios[j] }
func (c coverCase) covered(i int) bool     { return c.sizes[i] > 0 && c.sizes[i] >= c.nonzero }

// raised reports a cell that rule 3 sets to exactly 1: a covered stratum, a
// split of nonzero ratio, a share below 1.
func (c coverCase) raised(i, j int) bool {
	return c.covered(i) && c.ratios[j] > 0 && int(math.Floor(c.share(i, j)+1e-9)) == 0
}

// short reports a covered stratum whose raised cells need more groups than
// its rounding leaves over: Σ⌊x⌋ + raised cells > size.
func (c coverCase) short(i int) bool {
	sum := 0
	for j := range c.ratios {
		if c.raised(i, j) {
			sum++
		} else {
			sum += int(math.Floor(c.share(i, j) + 1e-9))
		}
	}
	return sum > c.sizes[i]
}

// checkCoverRules checks rules 1–3 of CoverRound's doc comment on got, and
// returns the split totals.
func checkCoverRules(t *testing.T, c coverCase, got [][]int) []int {
	t.Helper()
	ctx := fmt.Sprintf("sizes %v ratios %v: got %v", c.sizes, c.ratios, got)
	cols := make([]int, len(c.ratios))
	for i, n := range c.sizes {
		row := 0
		for j, r := range c.ratios {
			y, x := got[i][j], c.share(i, j)
			row += y
			cols[j] += y
			switch {
			case r == 0 && y != 0:
				t.Fatalf("%s: stratum %d gets %d in split %d of ratio 0", ctx, i, y, j)
			case c.covered(i) && r > 0 && y < 1: // rule 2
				t.Fatalf("%s: covered stratum %d (%d groups) has %d in split %d", ctx, i, n, y, j)
			case c.raised(i, j) && y != 1:
				t.Fatalf("%s: cell (%d,%d) of share %.3f is %d, want 1", ctx, i, j, x, y)
			case !c.short(i) && !withinOne(y, x):
				t.Fatalf("%s: cell (%d,%d) = %d, share %.4f, and stratum %d needs no shortage", ctx, i, j, y, x, i)
			case c.short(i) && r > 0 && !c.raised(i, j) && (y > int(math.Floor(x+1e-9)) || y < 1):
				t.Fatalf("%s: short stratum %d: cell (%d,%d) = %d, want 1..⌊%.4f⌋", ctx, i, i, j, y, x)
			}
		}
		if row != n {
			t.Fatalf("%s: stratum %d adds to %d, want %d", ctx, i, row, n)
		}
		if !c.short(i) {
			continue
		}
		// Each missing group came from the cell furthest above its share
		// (exchange check): for a cell b that gave up groups, no cell a that
		// could still give one (a > 1) is further above its share than b was
		// before b's last group went, b + 1 − x_b.
		for b := range c.ratios {
			xb := c.share(i, b)
			if c.raised(i, b) || c.ratios[b] == 0 || got[i][b] >= int(math.Floor(xb+1e-9)) {
				continue
			}
			for a := range c.ratios {
				if a == b || c.raised(i, a) || c.ratios[a] == 0 || got[i][a] <= 1 {
					continue
				}
				if float64(got[i][a])-c.share(i, a) > float64(got[i][b]+1)-xb+1e-9 {
					t.Fatalf("%s: stratum %d: split %d gave a group at %d (share %.4f) while split %d at %d (share %.4f) was further above its share",
						ctx, i, b, got[i][b]+1, xb, a, got[i][a], c.share(i, a))
				}
			}
		}
	}
	return cols
}

// splitMisses returns the groups by which split totals fall short of ⌊C⌋
// and exceed ⌈C⌉, added over the splits (C = the split's exact share).
func splitMisses(c coverCase, cols []int) (short, over int) {
	for j := range c.ratios {
		C := 0.0
		for i := range c.sizes {
			C += c.share(i, j)
		}
		short += max(0, int(math.Floor(C+1e-9))-cols[j])
		over += max(0, cols[j]-int(math.Ceil(C-1e-9)))
	}
	return short, over
}

func randomCoverCase(rng *rand.Rand, maxS, maxK, maxSize int) coverCase {
	c := coverCase{}
	S, K := 1+rng.IntN(maxS), 1+rng.IntN(maxK)
	for i := 0; i < S; i++ {
		c.sizes = append(c.sizes, rng.IntN(maxSize+1))
	}
	sum := 0.0
	for j := 0; j < K; j++ {
		r := rng.Float64() + 0.005
		switch rng.IntN(6) {
		case 0:
			if K > 1 {
				r = 0
			}
		case 1:
			r = 0.02 * rng.Float64() // a split whose shares are mostly below 1
		}
		c.ratios = append(c.ratios, r)
		sum += r
	}
	if sum == 0 {
		c.ratios[0], sum = 1, 1
	}
	for j := range c.ratios {
		c.ratios[j] /= sum
		if c.ratios[j] > 0 {
			c.nonzero++
		}
	}
	return c
}

// Property over many random tables (thin strata, splits of ratio 0 and
// splits of tiny ratio included): rules 1–3 hold; where no covered stratum
// has a share below 1 the table is ControlledRound's; and rule 4 — split
// totals miss ⌊C⌋ and ⌈C⌉ by no more than they must — holds in the weak form
// "every split total within ±1 of its share unless some cell was raised".
func TestCoverRoundProperty(t *testing.T) {
	rng := rand.New(rand.NewPCG(12, 4))
	raisedTables := 0
	for trial := 0; trial < 3000; trial++ {
		c := randomCoverCase(rng, 40, 6, 40)
		got, err := CoverRound(c.sizes, c.ratios)
		if err != nil {
			t.Fatal(err)
		}
		cols := checkCoverRules(t, c, got)
		anyRaised := false
		for i := range c.sizes {
			for j := range c.ratios {
				anyRaised = anyRaised || c.raised(i, j)
			}
		}
		if anyRaised {
			raisedTables++
			continue
		}
		plain, err := ControlledRound(c.sizes, c.ratios)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got, plain) {
			t.Fatalf("sizes %v ratios %v: nothing to raise, yet coverage first gave %v, controlled rounding %v", c.sizes, c.ratios, got, plain)
		}
		if s, o := splitMisses(c, cols); s != 0 || o != 0 {
			t.Fatalf("sizes %v ratios %v: nothing raised, split totals %v miss by %d/%d", c.sizes, c.ratios, cols, s, o)
		}
	}
	if raisedTables < 1000 {
		t.Errorf("only %d of 3000 tables needed a cell raised; the generator no longer tests coverage", raisedTables)
	}
}

// Rule 4 exactly, against brute force on small tables: over every table
// meeting rules 1–3 (every row a stratum may take: cells at ⌊x⌋ or ⌈x⌉,
// raised cells at 1, adding up to the stratum; a short stratum's row as
// rule 3 fixes it, checked separately by checkCoverRules), the least total
// shortfall below ⌊C⌋ and the least total excess above ⌈C⌉ are what
// CoverRound's table has — both at once.
func TestCoverRoundSplitTotalsLeast(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 9))
	missed := 0
	for trial := 0; trial < 1500; trial++ {
		c := randomCoverCase(rng, 4, 4, 9)
		got, err := CoverRound(c.sizes, c.ratios)
		if err != nil {
			t.Fatal(err)
		}
		cols := checkCoverRules(t, c, got)
		gotShort, gotOver := splitMisses(c, cols)
		if gotShort+gotOver > 0 {
			missed++
		}
		// Every row each stratum may take.
		rows := make([][][]int, len(c.sizes))
		for i, n := range c.sizes {
			if c.short(i) {
				rows[i] = [][]int{got[i]}
				continue
			}
			var rec func(j, left int, cur []int)
			rec = func(j, left int, cur []int) {
				if j == len(c.ratios) {
					if left == 0 {
						rows[i] = append(rows[i], append([]int(nil), cur...))
					}
					return
				}
				x := c.share(i, j)
				lo, hi := int(math.Floor(x+1e-9)), int(math.Ceil(x-1e-9))
				if c.raised(i, j) {
					lo, hi = 1, 1
				}
				for v := lo; v <= hi && v <= left; v++ {
					rec(j+1, left-v, append(cur, v))
				}
			}
			rec(0, n, nil)
			if len(rows[i]) == 0 {
				t.Fatalf("sizes %v ratios %v: stratum %d has no row meeting rules 1–3", c.sizes, c.ratios, i)
			}
		}
		bestShort, bestOver := math.MaxInt, math.MaxInt
		colsNow := make([]int, len(c.ratios))
		var walk func(i int)
		walk = func(i int) {
			if i == len(rows) {
				s, o := splitMisses(c, colsNow)
				bestShort, bestOver = min(bestShort, s), min(bestOver, o)
				return
			}
			for _, r := range rows[i] {
				for j, v := range r {
					colsNow[j] += v
				}
				walk(i + 1)
				for j, v := range r {
					colsNow[j] -= v
				}
			}
		}
		walk(0)
		if gotShort != bestShort || gotOver != bestOver {
			t.Fatalf("sizes %v ratios %v: table %v, split totals %v miss by %d short/%d over; the least possible is %d/%d",
				c.sizes, c.ratios, got, cols, gotShort, gotOver, bestShort, bestOver)
		}
	}
	if missed < 100 {
		t.Errorf("only %d of 1500 small tables had split totals off by more than ±1; the brute force barely tests rule 4", missed)
	}
}
