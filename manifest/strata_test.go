package manifest

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"sort"
	"strings"
	"testing"
)

// randomStrataCase draws a random stratified problem: 1-30 strata whose sizes
// include empty and one-member strata, 1-5 splits whose ratios may be zero
// (at least one is not), and units listed in random order.
func randomStrataCase(rng *rand.Rand) (keys []string, sizes map[string]int, sp Splits) {
	S := 1 + rng.IntN(30)
	sizes = map[string]int{}
	for s := 0; s < S; s++ {
		var name string
		switch rng.IntN(3) {
		case 0:
			name = fmt.Sprintf("n=%d", s) // digit runs of several lengths
		case 1:
			name = fmt.Sprintf("k=%d+x", 100-s)
		default:
			name = strings.Repeat("c", 1+s%4) + fmt.Sprint(s)
		}
		var n int
		switch rng.IntN(4) {
		case 0:
			n = rng.IntN(2) // 0 or 1 member
		case 1:
			n = 2 + rng.IntN(4)
		default:
			n = rng.IntN(60)
		}
		sizes[name] = n
		for i := 0; i < n; i++ {
			keys = append(keys, name)
		}
	}
	rng.Shuffle(len(keys), func(i, j int) { keys[i], keys[j] = keys[j], keys[i] })
	K := 1 + rng.IntN(5)
	total := 0.0
	for j := 0; j < K; j++ {
		r := rng.Float64()
		if K > 1 && rng.IntN(5) == 0 {
			r = 0
		}
		sp.Names = append(sp.Names, fmt.Sprintf("s%d", j))
		sp.Ratios = append(sp.Ratios, r)
		total += r
	}
	if total == 0 {
		sp.Ratios[0], total = 1, 1
	}
	for j := range sp.Ratios {
		sp.Ratios[j] /= total
	}
	return keys, sizes, sp
}

// withinOne reports whether got is ⌊x⌋ or ⌈x⌉ (allowing float noise in x).
func withinOne(got int, x float64) bool {
	const eps = 1e-9
	return got == int(math.Floor(x+eps)) || got == int(math.Ceil(x-eps))
}

// Property test of AllocateStrata. The bounds are those of controlled
// rounding of a two-way table (Cox & Ernst, "Controlled rounding", INFOR
// 20(4), 1982): every cell is its share rounded down or up, every row keeps
// its total, every column total is its share rounded down or up.
func TestAllocateStrataProperty(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	differed, couldDiffer := 0, 0
	for trial := 0; trial < 400; trial++ {
		keys, sizes, sp := randomStrataCase(rng)
		seed := rng.Uint64()
		a, err := AllocateStrata(seed, keys, sp)
		if err != nil {
			t.Fatal(err)
		}
		ctx := fmt.Sprintf("trial %d (%d units, splits %v)", trial, len(keys), sp)
		K := len(sp.Names)

		// Every unit gets exactly one split, a valid index.
		if len(a.Split) != len(keys) {
			t.Fatalf("%s: %d split entries for %d units", ctx, len(a.Split), len(keys))
		}
		actual := map[string][]int{} // stratum → units per split
		totals := make([]int, K)
		for u, s := range a.Split {
			if int(s) >= K {
				t.Fatalf("%s: unit %d got split index %d of %d", ctx, u, s, K)
			}
			if actual[keys[u]] == nil {
				actual[keys[u]] = make([]int, K)
			}
			actual[keys[u]][s]++
			totals[s]++
		}

		// The table lists exactly the non-empty strata, in natural order.
		var present []string
		for k, n := range sizes {
			if n > 0 {
				present = append(present, k)
			}
		}
		if len(a.Table) != len(present) {
			t.Fatalf("%s: table has %d strata, %d are non-empty", ctx, len(a.Table), len(present))
		}
		for i := 1; i < len(a.Table); i++ {
			if !NaturalLess(a.Table[i-1].Key, a.Table[i].Key) {
				t.Fatalf("%s: table rows %q, %q out of natural order", ctx, a.Table[i-1].Key, a.Table[i].Key)
			}
		}
		nonzero := 0
		for _, r := range sp.Ratios {
			if r > 0 {
				nonzero++
			}
		}
		var wantThin, wantUncovered []string
		for _, st := range a.Table {
			n := sizes[st.Key]
			if st.Groups != n {
				t.Fatalf("%s: stratum %s has %d groups in the table, %d units", ctx, st.Key, st.Groups, n)
			}
			row := 0
			for j, name := range sp.Names {
				q := st.Splits[name]
				row += q
				if got := actual[st.Key][j]; got != q {
					t.Fatalf("%s: stratum %s split %s: table says %d, %d units were dealt there", ctx, st.Key, name, q, got)
				}
				if x := float64(n) * sp.Ratios[j]; !withinOne(q, x) {
					t.Fatalf("%s: stratum %s split %s: %d units, exact share %.4f", ctx, st.Key, name, q, x)
				}
				if sp.Ratios[j] > 0 && q == 0 {
					wantUncovered = append(wantUncovered, st.Key+" in "+name)
				}
			}
			if row != n {
				t.Fatalf("%s: stratum %s row adds to %d, want %d", ctx, st.Key, row, n)
			}
			if n < nonzero {
				wantThin = append(wantThin, st.Key)
			}
		}
		for j, name := range sp.Names {
			if a.Counts[j] != totals[j] {
				t.Fatalf("%s: Counts[%s] = %d, %d units were dealt there", ctx, name, a.Counts[j], totals[j])
			}
			if x := float64(len(keys)) * sp.Ratios[j]; !withinOne(totals[j], x) {
				t.Fatalf("%s: split %s total %d, exact share %.4f", ctx, name, totals[j], x)
			}
		}
		// Thin: exactly the strata with fewer members than splits of
		// nonzero ratio (pigeonhole: they cannot be in every such split).
		if !reflect.DeepEqual(a.Thin, wantThin) {
			t.Fatalf("%s: Thin = %v, want %v", ctx, a.Thin, wantThin)
		}
		if got := a.Uncovered(sp); !reflect.DeepEqual(got, wantUncovered) {
			t.Fatalf("%s: Uncovered = %v, want %v", ctx, got, wantUncovered)
		}

		// Same seed, same allocation.
		b, err := AllocateStrata(seed, keys, sp)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(a, b) {
			t.Fatalf("%s: two runs with seed %d differ", ctx, seed)
		}
		// Another seed keeps the table but (almost surely) picks other
		// members: only asserted when the table allows over 10^6 member
		// choices (Σ log multinomial), so a false alarm has odds < 10⁻⁶.
		c, err := AllocateStrata(seed+1, keys, sp)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(a.Table, c.Table) {
			t.Fatalf("%s: the table depends on the seed", ctx)
		}
		logChoices := 0.0
		for _, st := range a.Table {
			l, _ := math.Lgamma(float64(st.Groups + 1))
			logChoices += l
			for _, q := range st.Splits {
				lq, _ := math.Lgamma(float64(q + 1))
				logChoices -= lq
			}
		}
		if logChoices > math.Log(1e6) {
			couldDiffer++
			if !reflect.DeepEqual(a.Split, c.Split) {
				differed++
			} else {
				t.Errorf("%s: seeds %d and %d deal every unit alike", ctx, seed, seed+1)
			}
		}
	}
	if couldDiffer < 100 {
		t.Errorf("only %d of 400 trials had enough member choices to compare seeds", couldDiffer)
	}
}

// Degenerate inputs: no units at all, and one split that takes everything.
func TestAllocateStrataEdges(t *testing.T) {
	sp := Splits{Names: []string{"train", "val", "test"}, Ratios: []float64{0.8, 0.1, 0.1}}
	a, err := AllocateStrata(1, nil, sp)
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Split) != 0 || len(a.Table) != 0 || len(a.Thin) != 0 || len(a.Uncovered(sp)) != 0 {
		t.Errorf("empty input gave %+v", a)
	}
	one := Splits{Names: []string{"all"}, Ratios: []float64{1}}
	a, err = AllocateStrata(1, []string{"x", "y", "x"}, one)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(a.Split, []uint8{0, 0, 0}) || a.Thin != nil || a.Uncovered(one) != nil {
		t.Errorf("one split: %+v", a)
	}
}

// Natural sort order: runs of digits compare by value, so "n=2" < "n=10"
// (common practice for file and label listings; no standard defines it).
// Tie-breaks are this package's: equal values with more leading zeros sort
// later, a prefix sorts first, other bytes compare by byte value.
func TestNaturalLessLiteral(t *testing.T) {
	want := []string{
		"",
		"B", // 'B' (0x42) < 'a' (0x61)
		"a",
		"n=",
		"n=1",
		"n=1a",
		"n=2",
		"n=02", // same value as "n=2", more leading zeros: later
		"n=7",
		"n=07",
		"n=007",
		"n=8",
		"n=10",
		"n=99",
		"n=123456789012345678901234", // longer than any int64: compared by length, then digits
		"x2y9",
		"x2y10",
	}
	in := []string{"n=10", "n=2", "n=1", "a", "n=02", "x2y10", "n=007", "n=8", "", "n=99", "B", "n=1a",
		"n=123456789012345678901234", "n=", "x2y9", "n=07", "n=7"}
	got := append([]string(nil), in...)
	sort.Slice(got, func(i, j int) bool { return NaturalLess(got[i], got[j]) })
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("natural order:\n got %q\nwant %q", got, want)
	}
	// A strict order: every pair in one direction only, nothing before itself.
	for i := range want {
		if NaturalLess(want[i], want[i]) {
			t.Errorf("NaturalLess(%q, %q) = true", want[i], want[i])
		}
		for j := i + 1; j < len(want); j++ {
			if !NaturalLess(want[i], want[j]) || NaturalLess(want[j], want[i]) {
				t.Errorf("%q and %q are not strictly ordered", want[i], want[j])
			}
		}
	}
}

// Property test of AllocateStrata with Cover (--require-coverage): the units
// dealt match the table, every stratum with at least as many groups as splits
// of nonzero ratio has a group in every such split, the table is CoverRound's
// (whose rules TestCoverRoundProperty checks), CheckCoverage names exactly
// the thin strata, and the same seed gives the same allocation.
func TestAllocateStrataCoverProperty(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 12))
	refused := 0
	for trial := 0; trial < 400; trial++ {
		keys, _, sp := randomStrataCase(rng)
		sp.Cover = true
		seed := rng.Uint64()
		a, err := AllocateStrata(seed, keys, sp)
		if err != nil {
			t.Fatal(err)
		}
		ctx := fmt.Sprintf("trial %d (%d units, splits %v)", trial, len(keys), sp)
		nonzero := 0
		for _, r := range sp.Ratios {
			if r > 0 {
				nonzero++
			}
		}
		dealt := map[string][]int{}
		for u, s := range a.Split {
			if dealt[keys[u]] == nil {
				dealt[keys[u]] = make([]int, len(sp.Names))
			}
			dealt[keys[u]][s]++
		}
		sizes := make([]int, len(a.Table))
		var thin []string
		for i, st := range a.Table {
			sizes[i] = st.Groups
			for j, name := range sp.Names {
				if dealt[st.Key][j] != st.Splits[name] {
					t.Fatalf("%s: stratum %s in %s: table %d, dealt %d", ctx, st.Key, name, st.Splits[name], dealt[st.Key][j])
				}
				if st.Groups >= nonzero && sp.Ratios[j] > 0 && dealt[st.Key][j] == 0 {
					t.Fatalf("%s: stratum %s (%d groups, %d splits) has no group in %s", ctx, st.Key, st.Groups, nonzero, name)
				}
			}
			if st.Groups < nonzero {
				thin = append(thin, fmt.Sprintf("%s (%d %s)", st.Key, st.Groups, Plural(st.Groups, "group", "groups")))
			}
		}
		want, err := CoverRound(sizes, sp.Ratios)
		if err != nil {
			t.Fatal(err)
		}
		for i, st := range a.Table {
			for j, name := range sp.Names {
				if st.Splits[name] != want[i][j] {
					t.Fatalf("%s: stratum %s in %s: %d, CoverRound says %d", ctx, st.Key, name, st.Splits[name], want[i][j])
				}
			}
		}
		err = a.CheckCoverage(sp)
		var ce *CoverageError
		switch {
		case len(thin) == 0 && err != nil:
			t.Fatalf("%s: CheckCoverage = %v with no thin stratum", ctx, err)
		case len(thin) > 0 && (!errors.As(err, &ce) || !reflect.DeepEqual(ce.Strata, thin) || ce.Splits != nonzero):
			t.Fatalf("%s: CheckCoverage = %v, want the thin strata %v", ctx, err, thin)
		case len(thin) > 0:
			refused++
		}
		b, err := AllocateStrata(seed, keys, sp)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(a, b) {
			t.Fatalf("%s: two runs with seed %d differ", ctx, seed)
		}
	}
	if refused < 50 || refused > 350 {
		t.Errorf("%d of 400 cases had thin strata; the generator should give both kinds", refused)
	}
}

// The refusal names every stratum that cannot be covered, with its groups,
// and the number of splits it falls short of (pigeonhole: n groups cannot
// fill more than n splits).
func TestCheckCoverageMessage(t *testing.T) {
	sp := Splits{Names: []string{"train", "val", "test", "spare"}, Ratios: []float64{0.7, 0.1, 0.2, 0}, Cover: true}
	keys := []string{"n=1", "n=2", "n=2", "n=3", "n=3", "n=3"}
	for i := 0; i < 10; i++ {
		keys = append(keys, "n=10")
	}
	a, err := AllocateStrata(1, keys, sp)
	if err != nil {
		t.Fatal(err)
	}
	err = a.CheckCoverage(sp)
	want := "--require-coverage: 2 strata have fewer groups than the 3 splits, so some split must lack each: n=1 (1 group), n=2 (2 groups)"
	if err == nil || err.Error() != want {
		t.Fatalf("CheckCoverage = %v, want %q", err, want)
	}
	if got := a.Uncovered(sp); strings.Contains(strings.Join(got, ";"), "n=3 ") || strings.Contains(strings.Join(got, ";"), "spare") {
		t.Errorf("Uncovered = %v: n=3 has 3 groups for 3 splits and spare has ratio 0", got)
	}
	one := a.Table[0]
	a.Table = a.Table[:1]
	if err := a.CheckCoverage(sp); err == nil || !strings.Contains(err.Error(), "1 stratum has fewer groups than the 3 splits, so some split must lack it: "+one.Key) {
		t.Errorf("one thin stratum: %v", err)
	}
}
