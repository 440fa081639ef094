package manifest

import "math/rand/v2"

// SplitMix64 is the output function of Steele, Lea & Flood's SplitMix64
// generator ("Fast splittable pseudorandom number generators", OOPSLA 2014),
// as given by Vigna's public-domain reference splitmix64.c: it adds the golden
// gamma 0x9e3779b97f4a7c15 to x and mixes the result.
func SplitMix64(x uint64) uint64 {
	z := x + 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// Key folds a seed and any number of integers (sample index, stream, attempt,
// copy number) into one well-mixed 64-bit key with SplitMix64.
func Key(seed uint64, parts ...uint64) uint64 {
	k := SplitMix64(seed)
	for _, p := range parts {
		k = SplitMix64(k ^ p)
	}
	return k
}

// RNG returns a PCG generator (math/rand/v2) seeded from Key(seed, parts...)
// only: no global state and no clock, so the same inputs give the same stream
// on every machine.
func RNG(seed uint64, parts ...uint64) *rand.Rand {
	return rand.New(PCG(seed, parts...))
}

// PCG returns the generator RNG(seed, parts...) draws from, for loops that
// call it directly rather than through rand.Rand's interface (augment's
// noise steps): rand.New(PCG(…)) gives the same stream as RNG(…).
func PCG(seed uint64, parts ...uint64) *rand.PCG {
	k := Key(seed, parts...)
	return rand.NewPCG(k, SplitMix64(k))
}
