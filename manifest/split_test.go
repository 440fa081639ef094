package manifest

import (
	"math"
	"testing"
)

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
		{"a=1,b=1,c=1", 10, []int{4, 3, 3}},
		{"a=1", 5, []int{5}},
		{"a=0.5,b=0.5", 0, []int{0, 0}},
	}
	for _, c := range cases {
		sp, err := ParseSplits(c.splits)
		if err != nil {
			t.Fatal(err)
		}
		got := sp.Quotas(c.n)
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
		q := sp.Quotas(n)
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

func TestAllocateMatchesQuotas(t *testing.T) {
	sp, _ := ParseSplits(DefaultSplits)
	a := sp.Allocate(9, 1001)
	got := make([]int, 3)
	for _, s := range a {
		got[s]++
	}
	want := sp.Quotas(1001)
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("allocation %v, quotas %v", got, want)
		}
	}
	b := sp.Allocate(9, 1001)
	for i := range a {
		if a[i] != b[i] {
			t.Fatal("same seed, different allocation")
		}
	}
}

func TestParseSplitsRefusals(t *testing.T) {
	for _, s := range []string{"", "train", "train=x", "train=-1", "a=0,b=0", "a=0.5,a=0.5", "=0.5", "a b=1"} {
		if _, err := ParseSplits(s); err == nil {
			t.Errorf("%q: accepted", s)
		}
	}
}
