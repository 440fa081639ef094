package inspect

import (
	"math"
	"testing"
)

// Shannon entropy of known distributions (C. E. Shannon, "A Mathematical
// Theory of Communication", 1948): k equally frequent classes give ln k;
// frequencies (1/2, 1/4, 1/4) give 1.5 bits = 1.5·ln 2 nats; one class, 0.
func TestEntropyKnownValues(t *testing.T) {
	for _, c := range []struct {
		counts []int64
		want   float64
	}{
		{[]int64{5, 5}, math.Log(2)},
		{[]int64{3, 3, 3, 3}, math.Log(4)},
		{[]int64{2, 1, 1}, 1.5 * math.Log(2)},
		{[]int64{7}, 0},
		{[]int64{0, 9, 0}, 0},
		{nil, 0},
	} {
		if got := Entropy(c.counts); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("Entropy(%v) = %v, want %v", c.counts, got, c.want)
		}
	}
}

// The loss of the best constant: the variance for squared error (the
// mean's MSE; Bishop 2006 §1.5.5, from memory), the entropy of the class
// frequencies for cross-entropy (§1.6). Checked on the hand-worked dataset
// of TestStatsHandWorkedDataset's kind: a numeric target's row is Std²,
// the mask's row the entropy of the class pixel counts, weights 1/loss.
func TestLossScalesFromStats(t *testing.T) {
	st := &Stats{
		Pixels:  PixelStats{Split: "train"},
		Targets: []TargetStats{{Name: "n", Numeric: true, Count: 4, Std: 2}, {Name: "none", Count: 0}},
		Classes: []ClassStats{{ID: 0, Pixels: 50}, {ID: 1, Pixels: 25}, {ID: 2, Pixels: 25}, {ID: 3, Pixels: 0}},
	}
	got, err := lossScales(t.TempDir(), st)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 {
		t.Fatalf("rows %+v, want n and mask", got)
	}
	if g := got[0]; g.Task != "n" || g.Loss != "squared error" || g.ConstantLoss != 4 || g.Weight != 0.25 {
		t.Errorf("numeric row %+v, want variance 4 and weight 0.25", g)
	}
	h := 1.5 * math.Log(2) // frequencies 1/2, 1/4, 1/4
	if g := got[1]; g.Task != "mask" || g.Loss != "cross-entropy" || math.Abs(g.ConstantLoss-h) > 1e-12 || math.Abs(g.Weight-1/h) > 1e-12 || g.Classes != 3 {
		t.Errorf("mask row %+v, want entropy %v over 3 classes", g, h)
	}
	// A constant target has nothing to learn: weight 0, not infinity.
	st.Targets = []TargetStats{{Name: "c", Numeric: true, Count: 3, Std: 0}}
	got, _ = lossScales(t.TempDir(), st)
	if got[0].Weight != 0 {
		t.Errorf("constant target weight %v, want 0", got[0].Weight)
	}
}
