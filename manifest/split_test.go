package manifest

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
)

// quotas rounds one stratum of n samples with ControlledRound.
func quotas(t *testing.T, sp Splits, n int) []int {
	t.Helper()
	table, err := ControlledRound([]int{n}, sp.Ratios)
	if err != nil {
		t.Fatal(err)
	}
	return table[0]
}

// Largest-remainder (Hamilton) apportionment, worked by hand: 10 samples at
// 0.8/0.1/0.1 → 8/1/1; 7 samples at 0.5/0.3/0.2 → exact 3.5/2.1/1.4, floors
// 3/2/1, one left goes to the largest remainder (0.5) → 4/2/1.
func TestQuotasLargestRemainder(t *testing.T) {
	cases := []struct {
		splits string
		n      int
		want   []int
	}{
		{"train=0.8,val=0.1,test=0.1", 10, []int{8, 1, 1}},
		{"a=0.5,b=0.3,c=0.2", 7, []int{4, 2, 1}},
		{"a=0.4,b=0.3,c=0.3", 10, []int{4, 3, 3}},
		{"a=1", 5, []int{5}},
		{"a=0.5,b=0.5", 0, []int{0, 0}},
	}
	for _, c := range cases {
		sp, err := ParseSplits(c.splits)
		if err != nil {
			t.Fatal(err)
		}
		got := quotas(t, sp, c.n)
		for i := range got {
			if got[i] != c.want[i] {
				t.Errorf("%s n=%d: got %v, want %v", c.splits, c.n, got, c.want)
				break
			}
		}
	}
}

func TestQuotasWithinOneOfShare(t *testing.T) {
	sp, _ := ParseSplits("train=0.7,val=0.2,test=0.1")
	for n := 0; n < 500; n++ {
		q := quotas(t, sp, n)
		sum := 0
		for i, v := range q {
			sum += v
			if math.Abs(float64(v)-float64(n)*sp.Ratios[i]) >= 1 {
				t.Fatalf("n=%d split %d: quota %d not within 1 of %.3f", n, i, v, float64(n)*sp.Ratios[i])
			}
		}
		if sum != n {
			t.Fatalf("n=%d: quotas add to %d", n, sum)
		}
	}
}

func TestParseSplitsRefusals(t *testing.T) {
	for _, s := range []string{"", "train", "train=x", "train=-1", "a=0,b=0", "a=0.5,a=0.5", "=0.5", "a b=1", "a=1,b=1,c=1"} {
		if _, err := ParseSplits(s); err == nil {
			t.Errorf("%q: accepted", s)
		}
	}
}

// Ratios must add up to 1, summed exactly as the decimals written; the
// error shows the sum. Accepted specs are kept as written and their ratios
// are the numbers written, never rescaled (no 0.12500000000000003).
func TestParseSplitsSumAndSpec(t *testing.T) {
	for s, sum := range map[string]string{
		"train=0.7,val=0.1":           "0.8",
		"train=0.8,val=0.3":           "1.1",
		"train=0.8,val=0.1,test=0.11": "1.01",
		"a=8,b=1,c=1":                 "10",
	} {
		_, err := ParseSplits(s)
		if err == nil || !strings.Contains(err.Error(), "add up to "+sum+", not 1") {
			t.Errorf("%s: error %v, want it to say the ratios add up to %s", s, err, sum)
		}
	}
	for spec, want := range map[string][]float64{
		"train=0.7,val=0.15,test=0.15":    {0.7, 0.15, 0.15}, // 0.7+0.15+0.15 is 0.9999999999999999 in float64
		"a=0.125,b=0.875":                 {0.125, 0.875},
		"train=0.8, val=0.1, test=0.10":   {0.8, 0.1, 0.1},
		"a=0.3333,b=0.3333,c=0.3334":      {0.3333, 0.3333, 0.3334},
		"x=1":                             {1},
		"train=0.6,val=0.2,test=0.2,no=0": {0.6, 0.2, 0.2, 0},
	} {
		sp, err := ParseSplits(spec)
		if err != nil {
			t.Errorf("%s: %v", spec, err)
			continue
		}
		if !slices.Equal(sp.Ratios, want) {
			t.Errorf("%s: ratios %v, want %v as written", spec, sp.Ratios, want)
		}
		if written := strings.ReplaceAll(spec, " ", ""); sp.String() != written {
			t.Errorf("%s: spec stored as %q, want %q", spec, sp.String(), written)
		}
	}
}

// One check for --stratify in every command: unknown classes and targets
// are named, with the known ones listed.
func TestCheckStratify(t *testing.T) {
	classes, targets := []string{"die", "pip"}, []string{"dice", "pip_total"}
	for _, ok := range []string{"", "classes", "class:die", "class:pip", "dice", "pip_total"} {
		if err := CheckStratify(ok, classes, targets); err != nil {
			t.Errorf("%q: %v", ok, err)
		}
	}
	for key, want := range map[string][]string{
		"class:nosuch": {`no class "nosuch"`, "die, pip"},
		"class:":       {`no class ""`, "die, pip"},
		"nosuch":       {`no target "nosuch"`, "dice, pip_total", "class:NAME", "die, pip"},
	} {
		err := CheckStratify(key, classes, targets)
		var se *StratifyError
		if !errors.As(err, &se) {
			t.Fatalf("%q: %v, want a *StratifyError", key, err)
		}
		for _, w := range want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%q: %q lacks %q", key, err, w)
			}
		}
	}
}

// The worked example of the largest remainder method with the Hare quota in
// Wikipedia's "Largest remainder method" article (values from memory): six
// parties with 47,000, 16,000, 15,800, 12,000, 6,100 and 3,100 votes share
// 10 seats; quotas 4.70, 1.60, 1.58, 1.20, 0.61, 0.31; floors give 7 seats,
// the remaining 3 go to the remainders 0.70, 0.61 and 0.60, so the seats are
// 5, 2, 1, 1, 1, 0.
func TestQuotasHareWorkedExample(t *testing.T) {
	votes := []float64{47000, 16000, 15800, 12000, 6100, 3100}
	sp := Splits{Names: []string{"a", "b", "c", "d", "e", "f"}}
	for _, v := range votes {
		sp.Ratios = append(sp.Ratios, v/100000)
	}
	want := []int{5, 2, 1, 1, 1, 0}
	// Controlled rounding of a one-row table is largest-remainder rounding.
	table, err := ControlledRound([]int{10}, sp.Ratios)
	if err != nil {
		t.Fatal(err)
	}
	for i := range want {
		if table[0][i] != want[i] {
			t.Fatalf("controlled rounding of one row %v, largest remainder %v", table[0], want)
		}
	}
}
