package manifest

import "testing"

// The first outputs of Vigna's reference splitmix64.c seeded with x = 0
// (values from memory; they also appear in many ports' test suites).
func TestSplitMix64ReferenceOutputs(t *testing.T) {
	want := []uint64{0xe220a8397b1dcdaf, 0x6e789e6aa1b965f4, 0x06c45d188009454f}
	var state uint64
	for i, w := range want {
		if got := SplitMix64(state); got != w {
			t.Errorf("output %d: got %#x, want %#x", i, got, w)
		}
		state += 0x9e3779b97f4a7c15 // the reference advances its state by the golden gamma
	}
}

func TestRNGDependsOnEveryPart(t *testing.T) {
	a := RNG(1, 2, 3).Uint64()
	if a != RNG(1, 2, 3).Uint64() {
		t.Fatal("same key, different stream")
	}
	for _, other := range []uint64{RNG(2, 2, 3).Uint64(), RNG(1, 3, 3).Uint64(), RNG(1, 2, 4).Uint64(), RNG(1, 2).Uint64()} {
		if other == a {
			t.Fatalf("streams collide: %#x", a)
		}
	}
}
