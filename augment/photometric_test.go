package augment

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// Statistical checks below use fixed seeds, so each is deterministic; the
// bounds are the ones a fresh seed would pass with probability ≥ 99.9 %.

// zTwoSided001 is the standard normal quantile for a two-sided 0.1 % test,
// z(0.9995) = 3.2905 (NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.6.7.1
// table of the normal distribution; value from memory, rounded to 3.29).
const zTwoSided001 = 3.29

// zOneSided001 is z(0.999) = 3.0902 for a one-sided 0.1 % test (same table,
// from memory).
const zOneSided001 = 3.09

// pmWelford is Welford's online mean and variance: B. P. Welford, "Note on a
// method for calculating corrected sums of squares and products",
// Technometrics 4(3) (1962) 419–420.
type pmWelford struct {
	n        int
	mean, m2 float64
}

func (w *pmWelford) add(x float64) {
	w.n++
	d := x - w.mean
	w.mean += d / float64(w.n)
	w.m2 += d * (x - w.mean)
}

// variance is the sample variance s² with n − 1 in the denominator.
func (w *pmWelford) variance() float64 { return w.m2 / float64(w.n-1) }

func pmStatsOf(pix []float32) pmWelford {
	var w pmWelford
	for _, v := range pix {
		w.add(float64(v))
	}
	return w
}

// pmChi2Quantile approximates the chi-square quantile with k degrees of
// freedom at the standard normal quantile z by Wilson–Hilferty (E. B. Wilson
// and M. M. Hilferty, "The distribution of chi-square", PNAS 17 (1931)
// 684–688): χ² ≈ k·(1 − 2/(9k) + z·√(2/(9k)))³; very accurate for k in the
// thousands and good to well under 1 % for k ≥ 10.
func pmChi2Quantile(k, z float64) float64 {
	c := 2 / (9 * k)
	t := 1 - c + z*math.Sqrt(c)
	return k * t * t * t
}

// pmCheckMean is the normal-theory test of a sample mean against a known
// process mean with known σ: |x̄ − μ| ≤ z·σ/√n (NIST/SEMATECH e-Handbook of
// Statistical Methods, 7.2.2, "Are the data consistent with the assumed
// process mean?").
func pmCheckMean(t *testing.T, what string, got, mu, sigma float64, n int) {
	t.Helper()
	bound := zTwoSided001 * sigma / math.Sqrt(float64(n))
	t.Logf("%s: mean %.5f, bound %.5f ± %.5f", what, got, mu, bound)
	if math.Abs(got-mu) > bound {
		t.Errorf("%s: mean %.6f, want %.6f ± %.6f (NIST 7.2.2, z = 3.29)", what, got, mu, bound)
	}
}

// pmCheckVariance is the chi-square test of a sample variance of n normal
// values against a nominal σ²: σ²·χ²(α/2; n−1)/(n−1) ≤ s² ≤ σ²·χ²(1−α/2;
// n−1)/(n−1), α = 0.001 (NIST/SEMATECH e-Handbook, 7.2.3, "Are the data
// consistent with a nominal standard deviation?"), quantiles by Wilson–Hilferty.
func pmCheckVariance(t *testing.T, what string, s2, sigma2 float64, n int) {
	t.Helper()
	k := float64(n - 1)
	lo := sigma2 * pmChi2Quantile(k, -zTwoSided001) / k
	hi := sigma2 * pmChi2Quantile(k, zTwoSided001) / k
	t.Logf("%s: variance %.5f, bound [%.5f, %.5f]", what, s2, lo, hi)
	if s2 < lo || s2 > hi {
		t.Errorf("%s: variance %.6f, want in [%.6f, %.6f] (NIST 7.2.3 chi-square, Wilson–Hilferty)", what, s2, lo, hi)
	}
}

// pmCheckPoissonVariance checks a sample variance of n Poisson-like values
// (variance σ², excess kurtosis κ) with the large-sample normal bound
// s² ∈ σ² ± z·σ²·√(2/(n−1) + κ/n): Var(s²) = σ⁴(2/(n−1) + κ/n) for any
// distribution with finite fourth moment (standard result, e.g. H. Cramér,
// Mathematical Methods of Statistics, 1946, §27.4; from memory). The chi-square
// interval of NIST 7.2.3 assumes normal data, which Poisson counts are not.
// For Poisson(λ), κ = 1/λ (NIST e-Handbook 1.3.6.6.19 lists the moments; from
// memory).
func pmCheckPoissonVariance(t *testing.T, what string, s2, sigma2, kurt float64, n int) {
	t.Helper()
	sd := sigma2 * math.Sqrt(2/float64(n-1)+kurt/float64(n))
	t.Logf("%s: variance %.5f, bound %.5f ± %.5f", what, s2, sigma2, zTwoSided001*sd)
	if math.Abs(s2-sigma2) > zTwoSided001*sd {
		t.Errorf("%s: variance %.6f, want %.6f ± %.6f", what, s2, sigma2, zTwoSided001*sd)
	}
}

func pmConst(w, h, c int, v ...float32) *Image {
	m := NewImage(w, h, c)
	for i := range m.Pix {
		m.Pix[i] = v[i%c]
	}
	return m
}

func pmRNG(a, b uint64) *rand.Rand { return rand.New(rand.NewPCG(a, b)) }

func TestGaussianNoiseMeanAndVariance(t *testing.T) {
	for _, sigma := range []float64{2, 10} {
		m := pmConst(256, 256, 1, 128) // 65,536 values, mid-gray so nothing is near 0 or 255
		GaussianNoise(m, pmRNG(7, uint64(sigma)), sigma)
		st := pmStatsOf(m.Pix)
		if st.n != 65536 {
			t.Fatalf("n = %d", st.n)
		}
		what := "GaussianNoise sigma=" + pmFmt(sigma)
		pmCheckMean(t, what, st.mean, 128, sigma, st.n)
		pmCheckVariance(t, what, st.variance(), sigma*sigma, st.n)
	}
}

func TestGaussianNoiseNotClamped(t *testing.T) {
	// On a black image about half the values must go negative, and the
	// variance must stay σ² (a clamp would cut it to about 0.34 σ²).
	m := NewImage(128, 128, 1)
	GaussianNoise(m, pmRNG(3, 4), 10)
	neg := 0
	for _, v := range m.Pix {
		if v < 0 {
			neg++
		}
	}
	n := len(m.Pix)
	// Binomial(n, 1/2) count, normal approximation (NIST e-Handbook 1.3.6.6.18).
	if d := math.Abs(float64(neg) - float64(n)/2); d > zTwoSided001*math.Sqrt(float64(n)/4) {
		t.Errorf("negative values %d of %d, want about half", neg, n)
	}
	st := pmStatsOf(m.Pix)
	pmCheckVariance(t, "GaussianNoise on black", st.variance(), 100, st.n)
}

func TestGaussianNoiseDrawOrder(t *testing.T) {
	// One NormFloat64 per channel value, in storage order (the documented stream layout).
	m := pmConst(3, 2, 3, 10, 20, 30)
	GaussianNoise(m, pmRNG(11, 12), 5)
	ref := pmRNG(11, 12)
	for i, v := range m.Pix {
		want := float32(float64([]float32{10, 20, 30}[i%3]) + 5*ref.NormFloat64())
		if v != want {
			t.Fatalf("Pix[%d] = %v, want %v", i, v, want)
		}
	}
	before := m.Clone()
	GaussianNoise(m, pmRNG(1, 1), 0)
	GaussianNoise(m, pmRNG(1, 1), -3)
	if !pmEqual(m, before) {
		t.Error("sigma <= 0 changed the image")
	}
}

func TestSaltPepperCounts(t *testing.T) {
	const p = 0.05
	m := pmConst(256, 256, 1, 128)
	SaltPepper(m, pmRNG(21, 22), p)
	n := float64(len(m.Pix))
	changed, salt, pepper, other := 0, 0, 0, 0
	for _, v := range m.Pix {
		switch v {
		case 128:
		case 255:
			changed++
			salt++
		case 0:
			changed++
			pepper++
		default:
			other++
		}
	}
	if other != 0 {
		t.Fatalf("%d values neither unchanged, 0 nor 255", other)
	}
	// Changed count ~ Binomial(n, p); normal approximation to the binomial,
	// mean n·p and variance n·p·(1−p) (NIST e-Handbook 1.3.6.6.18).
	bound := zTwoSided001 * math.Sqrt(n*p*(1-p))
	t.Logf("changed %d, bound %.1f ± %.1f", changed, n*p, bound)
	if math.Abs(float64(changed)-n*p) > bound {
		t.Errorf("changed %d, want %.1f ± %.1f", changed, n*p, bound)
	}
	// Given N changed, salt ~ Binomial(N, 1/2) (same source).
	N := float64(changed)
	bound = zTwoSided001 * math.Sqrt(N/4)
	t.Logf("salt %d, pepper %d, bound %.1f ± %.1f", salt, pepper, N/2, bound)
	if math.Abs(float64(salt)-N/2) > bound {
		t.Errorf("salt %d pepper %d, want %.1f ± %.1f each", salt, pepper, N/2, bound)
	}
}

func TestSaltPepperWholePixels(t *testing.T) {
	// RGB: a hit pixel has all three channels 0 or all three 255.
	const p = 0.3
	m := pmConst(64, 64, 3, 10, 128, 200)
	SaltPepper(m, pmRNG(5, 6), p)
	hits := 0
	for i := 0; i < 64*64; i++ {
		px := m.Pix[3*i : 3*i+3]
		switch {
		case px[0] == 10 && px[1] == 128 && px[2] == 200:
		case px[0] == 0 && px[1] == 0 && px[2] == 0, px[0] == 255 && px[1] == 255 && px[2] == 255:
			hits++
		default:
			t.Fatalf("pixel %d = %v, want unchanged, black or white", i, px)
		}
	}
	n := float64(64 * 64)
	if bound := zTwoSided001 * math.Sqrt(n*p*(1-p)); math.Abs(float64(hits)-n*p) > bound {
		t.Errorf("hits %d, want %.1f ± %.1f (NIST 1.3.6.6.18)", hits, n*p, bound)
	}

	// fraction 0 changes nothing; fraction 1 hits every pixel.
	m = pmConst(8, 8, 3, 10, 128, 200)
	SaltPepper(m, pmRNG(1, 2), 0)
	if !pmEqual(m, pmConst(8, 8, 3, 10, 128, 200)) {
		t.Error("fraction 0 changed the image")
	}
	SaltPepper(m, pmRNG(1, 2), 1)
	for _, v := range m.Pix {
		if v != 0 && v != 255 {
			t.Fatalf("fraction 1 left value %v", v)
		}
	}
}

// pmPoissonPMF is e^(−λ) λ^k / k!, in logs.
func pmPoissonPMF(k int, lambda float64) float64 {
	lg, _ := math.Lgamma(float64(k) + 1)
	return math.Exp(-lambda + float64(k)*math.Log(lambda) - lg)
}

func TestPoissonDrawMoments(t *testing.T) {
	// Both paths: Knuth below 30, PTRS from 30 on.
	const n = 100000
	for _, lambda := range []float64{0.5, 4, 10, 29.9, 30, 100, 1000, 1e5} {
		rng := pmRNG(31, uint64(lambda*10))
		var w pmWelford
		for i := 0; i < n; i++ {
			k := poissonDraw(rng, lambda)
			if k < 0 || k != math.Floor(k) {
				t.Fatalf("λ=%v: draw %v is not a count", lambda, k)
			}
			w.add(k)
		}
		what := "Poisson λ=" + pmFmt(lambda)
		// Poisson mean λ and variance λ (NIST e-Handbook 1.3.6.6.19, from memory);
		// the mean of n draws is within λ ± z·√(λ/n) (NIST 7.2.2).
		pmCheckMean(t, what, w.mean, lambda, math.Sqrt(lambda), n)
		pmCheckPoissonVariance(t, what, w.variance(), lambda, 1/lambda, n)
	}
	if poissonDraw(pmRNG(1, 1), 0) != 0 || poissonDraw(pmRNG(1, 1), -2) != 0 || poissonDraw(pmRNG(1, 1), math.NaN()) != 0 {
		t.Error("mean <= 0 or NaN must give 0")
	}
}

func TestPoissonDrawGoodnessOfFit(t *testing.T) {
	// Chi-square goodness-of-fit of the histogram of draws against the Poisson
	// pmf (NIST/SEMATECH e-Handbook 1.3.5.15): bins pooled so that every
	// expected count is ≥ 5 (the rule given there), df = bins − 1 (no
	// parameter estimated), reject above χ²(0.999; df) by Wilson–Hilferty.
	// Moments alone would not catch a wrong PTRS constant that keeps them.
	const n = 100000
	for _, lambda := range []float64{3, 29.9, 30, 45, 200} {
		rng := pmRNG(41, uint64(lambda*10))
		counts := map[int]int{}
		for i := 0; i < n; i++ {
			counts[int(poissonDraw(rng, lambda))]++
		}
		var exp, obs []float64
		e, o := 0.0, 0.0
		cum := 0.0
		for k := 0; ; k++ {
			p := pmPoissonPMF(k, lambda)
			cum += p
			e += n * p
			o += float64(counts[k])
			delete(counts, k)
			if e >= 5 && n*(1-cum) >= 5 {
				exp, obs = append(exp, e), append(obs, o)
				e, o = 0, 0
			}
			if n*(1-cum) < 5 && k > int(lambda) {
				break
			}
		}
		// The rest of the upper tail joins the last bin.
		e += n * (1 - cum)
		for _, c := range counts {
			o += float64(c)
		}
		exp[len(exp)-1] += e
		obs[len(obs)-1] += o
		chi2 := 0.0
		for i := range exp {
			d := obs[i] - exp[i]
			chi2 += d * d / exp[i]
		}
		df := float64(len(exp) - 1)
		crit := pmChi2Quantile(df, zOneSided001)
		t.Logf("Poisson λ=%v: chi-square %.2f, df %v, critical %.2f", lambda, chi2, df, crit)
		if chi2 > crit {
			t.Errorf("Poisson λ=%v: chi-square %.2f > %.2f (df %v)", lambda, chi2, crit, df)
		}
	}
}

func TestShotNoise(t *testing.T) {
	cases := []struct {
		v, photons float64
		path       string
	}{
		{51, 50, "Knuth"},   // λ = 51/255·50 = 10
		{204, 1000, "PTRS"}, // λ = 204/255·1000 = 800
	}
	for _, c := range cases {
		m := pmConst(256, 256, 1, float32(c.v))
		ShotNoise(m, pmRNG(51, uint64(c.photons)), c.photons)
		lambda := c.v / 255 * c.photons
		scale := 255 / c.photons
		// Each output is 255·k/P, k ~ Poisson(λ): mean 255·λ/P = v, variance
		// (255/P)²·λ (scaling of the Poisson moments, NIST 1.3.6.6.19).
		for _, x := range m.Pix[:100] {
			if k := float64(x) / scale; math.Abs(k-math.Round(k)) > 1e-3 {
				t.Fatalf("%s: output %v is not a multiple of 255/P", c.path, x)
			}
		}
		st := pmStatsOf(m.Pix)
		what := "ShotNoise " + c.path
		pmCheckMean(t, what, st.mean, scale*lambda, scale*math.Sqrt(lambda), st.n)
		pmCheckPoissonVariance(t, what, st.variance(), scale*scale*lambda, 1/lambda, st.n)
	}

	// Negative values count as 0 and 0 stays 0; photons <= 0 is a no-op.
	m := &Image{W: 3, H: 1, C: 1, Pix: []float32{-5, 0, -0.001}}
	ShotNoise(m, pmRNG(1, 2), 100)
	for i, v := range m.Pix {
		if v != 0 {
			t.Errorf("Pix[%d] = %v, want 0", i, v)
		}
	}
	m = &Image{W: 2, H: 1, C: 1, Pix: []float32{10, 300}}
	ShotNoise(m, pmRNG(1, 2), 0)
	if m.Pix[0] != 10 || m.Pix[1] != 300 {
		t.Errorf("photons 0 changed the image: %v", m.Pix)
	}
}

func TestSpeckle(t *testing.T) {
	for _, c := range []struct{ v, sigma float64 }{{100, 0.1}, {50, 0.3}} {
		m := pmConst(256, 256, 1, float32(c.v))
		Speckle(m, pmRNG(61, uint64(c.v)), c.sigma)
		st := pmStatsOf(m.Pix)
		// v·(1 + N(0, σ²)) is N(v, (vσ)²): NIST 7.2.2 and 7.2.3 apply exactly.
		what := "Speckle v=" + pmFmt(c.v)
		pmCheckMean(t, what, st.mean, c.v, c.v*c.sigma, st.n)
		pmCheckVariance(t, what, st.variance(), c.v*c.v*c.sigma*c.sigma, st.n)
	}
	// Multiplicative: black stays black.
	m := NewImage(4, 4, 3)
	Speckle(m, pmRNG(1, 2), 0.5)
	for _, v := range m.Pix {
		if v != 0 {
			t.Fatalf("speckle moved black to %v", v)
		}
	}
}

func TestRandomStepsDeterministic(t *testing.T) {
	src := NewImage(32, 24, 3)
	r := pmRNG(99, 100)
	for i := range src.Pix {
		src.Pix[i] = float32(r.IntN(256))
	}
	steps := map[string]func(*Image, *rand.Rand){
		"GaussianNoise": func(m *Image, g *rand.Rand) { GaussianNoise(m, g, 8) },
		"SaltPepper":    func(m *Image, g *rand.Rand) { SaltPepper(m, g, 0.2) },
		"ShotNoise":     func(m *Image, g *rand.Rand) { ShotNoise(m, g, 20) },   // λ ≤ 20: Knuth
		"ShotNoiseBig":  func(m *Image, g *rand.Rand) { ShotNoise(m, g, 5000) }, // mostly PTRS
		"Speckle":       func(m *Image, g *rand.Rand) { Speckle(m, g, 0.2) },
	}
	for name, step := range steps {
		a, b, c := src.Clone(), src.Clone(), src.Clone()
		ga, gb := pmRNG(1, 2), pmRNG(1, 2)
		step(a, ga)
		step(b, gb)
		step(c, pmRNG(1, 3))
		if !pmEqual(a, b) {
			t.Errorf("%s: same seed gave different output", name)
		}
		if ga.Uint64() != gb.Uint64() {
			t.Errorf("%s: same seed left the generators in different states", name)
		}
		if pmEqual(a, c) {
			t.Errorf("%s: different seeds gave identical output", name)
		}
	}
}

func TestGaussianBlurImpulse(t *testing.T) {
	const sigma, size, c0, v = 1.5, 21, 10, 1000.0
	m := NewImage(size, size, 1)
	m.Pix[c0*size+c0] = v
	GaussianBlur(m, sigma)
	at := func(x, y int) float64 { return float64(m.Pix[y*size+x]) }

	// Mass is conserved when the kernel (radius ⌈3·1.5⌉ = 5) stays inside.
	sum := 0.0
	for _, x := range m.Pix {
		sum += float64(x)
	}
	if math.Abs(sum-v) > 1e-3 {
		t.Errorf("sum %.6f, want %v", sum, v)
	}
	// Symmetric under x and y mirrors about the center and under transposition.
	for dy := -6; dy <= 6; dy++ {
		for dx := -6; dx <= 6; dx++ {
			a := at(c0+dx, c0+dy)
			for _, b := range []float64{at(c0-dx, c0+dy), at(c0+dx, c0-dy), at(c0+dy, c0+dx)} {
				if math.Abs(a-b) > 1e-4 {
					t.Fatalf("asymmetric at (%d, %d): %v vs %v", dx, dy, a, b)
				}
			}
		}
	}
	// Radius ⌈3σ⌉ = 5: the 5th neighbour is reached, the 6th is not.
	if at(c0+5, c0) <= 0 || at(c0+6, c0) != 0 || at(c0, c0-6) != 0 {
		t.Errorf("radius: at +5 %v, +6 %v, want > 0 and 0", at(c0+5, c0), at(c0+6, c0))
	}
	// Shape: neighbour ratios are those of the Gaussian exp(−d²/(2σ²))
	// (definition of the Gaussian function), and the center is v·w₀² with
	// w₀ = 1/Σ_{i=−5..5} exp(−i²/(2σ²)).
	for d := 1; d <= 5; d++ {
		want := math.Exp(-float64(d*d) / (2 * sigma * sigma))
		if got := at(c0+d, c0) / at(c0, c0); math.Abs(got-want) > 1e-5 {
			t.Errorf("ratio at %d: %.7f, want %.7f", d, got, want)
		}
	}
	norm := 0.0
	for i := -5; i <= 5; i++ {
		norm += math.Exp(-float64(i*i) / (2 * sigma * sigma))
	}
	if want := v / (norm * norm); math.Abs(at(c0, c0)-want) > 1e-3 {
		t.Errorf("center %.6f, want %.6f", at(c0, c0), want)
	}
}

func TestGaussianBlurEdgesAndConstants(t *testing.T) {
	// Replicated edge, hand-derived: a 10×1 row with 100 at x = 0, σ = 1
	// (radius 3). out(x) = Σ_i w_i·in(clamp(x+i)); only taps landing on
	// index ≤ 0 see the 100, so out(0) = 100·(w0+w1+w2+w3), out(1) =
	// 100·(w1+w2+w3), out(2) = 100·(w2+w3), out(3) = 100·w3, out(4) = 0.
	// The vertical pass on one row is the identity (all taps clamp to y = 0).
	row := NewImage(10, 1, 1)
	row.Pix[0] = 100
	GaussianBlur(row, 1)
	var w [4]float64
	norm := 0.0
	for i := -3; i <= 3; i++ {
		norm += math.Exp(-float64(i*i) / 2)
	}
	for i := range w {
		w[i] = math.Exp(-float64(i*i)/2) / norm
	}
	want := []float64{100 * (w[0] + w[1] + w[2] + w[3]), 100 * (w[1] + w[2] + w[3]), 100 * (w[2] + w[3]), 100 * w[3], 0}
	for x, wv := range want {
		if math.Abs(float64(row.Pix[x])-wv) > 1e-4 {
			t.Errorf("edge out(%d) = %.6f, want %.6f", x, row.Pix[x], wv)
		}
	}

	// A constant image stays constant, even with a radius (6) larger than half
	// the image, where nearly every tap is clamped.
	m := pmConst(9, 7, 3, 30, 60, 90)
	GaussianBlur(m, 2)
	for i, v := range m.Pix {
		if want := []float32{30, 60, 90}[i%3]; math.Abs(float64(v-want)) > 1e-4 {
			t.Fatalf("constant image changed: Pix[%d] = %v, want %v", i, v, want)
		}
	}

	// sigma 0 (and below) is the identity.
	src := NewImage(5, 4, 3)
	for i := range src.Pix {
		src.Pix[i] = float32(i * 7 % 256)
	}
	for _, s := range []float64{0, -1} {
		m := src.Clone()
		GaussianBlur(m, s)
		if !pmEqual(m, src) {
			t.Errorf("sigma %v changed the image", s)
		}
	}
}

// pmLiteral is a 6×1 gray row of hand-checkable values, including two outside 0..255.
func pmLiteral() *Image {
	return &Image{W: 6, H: 1, C: 1, Pix: []float32{-10, 0, 63.75, 127.5, 255, 300}}
}

func pmExpect(t *testing.T, what string, m *Image, want []float64) {
	t.Helper()
	for i, w := range want {
		if math.Abs(float64(m.Pix[i])-w) > 1e-4 {
			t.Errorf("%s: Pix[%d] = %v, want %v", what, i, m.Pix[i], w)
		}
	}
}

func TestBrightnessContrastGamma(t *testing.T) {
	// All outputs hand-computed from the definitions in the doc comments.
	m := pmLiteral()
	Brightness(m, 10)
	pmExpect(t, "Brightness +10", m, []float64{0, 10, 73.75, 137.5, 265, 310}) // not clamped
	m = pmLiteral()
	Brightness(m, -20)
	pmExpect(t, "Brightness -20", m, []float64{-30, -20, 43.75, 107.5, 235, 280})

	m = pmLiteral()
	Contrast(m, 2) // 2v − 127.5
	pmExpect(t, "Contrast 2", m, []float64{-147.5, -127.5, 0, 127.5, 382.5, 472.5})
	m = pmLiteral()
	Contrast(m, 0.5) // v/2 + 63.75
	pmExpect(t, "Contrast 0.5", m, []float64{58.75, 63.75, 95.625, 127.5, 191.25, 213.75})
	m = pmLiteral()
	Contrast(m, 0)
	pmExpect(t, "Contrast 0", m, []float64{127.5, 127.5, 127.5, 127.5, 127.5, 127.5})

	// Gamma clamps first: −10 → 0, 300 → 255.
	m = pmLiteral()
	Gamma(m, 2) // 255·(v/255)²: 63.75 → 255/16, 127.5 → 255/4
	pmExpect(t, "Gamma 2", m, []float64{0, 0, 15.9375, 63.75, 255, 255})
	m = pmLiteral()
	Gamma(m, 0.5) // √(255·v): 63.75 → 127.5, 127.5 → 255/√2
	pmExpect(t, "Gamma 0.5", m, []float64{0, 0, 127.5, 255 / math.Sqrt2, 255, 255})
	m = pmLiteral()
	Gamma(m, 1)
	pmExpect(t, "Gamma 1", m, []float64{0, 0, 63.75, 127.5, 255, 255})
	m = pmLiteral()
	Gamma(m, 0)
	pmExpect(t, "Gamma 0 (no-op)", m, []float64{-10, 0, 63.75, 127.5, 255, 300})
}

func TestHSVKnownValues(t *testing.T) {
	// Hand-computed with Smith's (1978) hexcone: (200, 100, 50): max 200 (red),
	// min 50, d = 150, H = 60·(100−50)/150 = 20°, S = 150/200 = 0.75, V = 200.
	h, s, v := rgbToHSV(200, 100, 50)
	if math.Abs(h-20) > 1e-9 || math.Abs(s-0.75) > 1e-12 || v != 200 {
		t.Errorf("HSV(200,100,50) = (%v, %v, %v), want (20, 0.75, 200)", h, s, v)
	}
	// Primaries and secondaries at 0, 60, …, 300 degrees (the hexcone).
	for _, c := range []struct{ r, g, b, h float64 }{
		{255, 0, 0, 0}, {255, 255, 0, 60}, {0, 255, 0, 120}, {0, 255, 255, 180}, {0, 0, 255, 240}, {255, 0, 255, 300},
	} {
		if h, s, v := rgbToHSV(c.r, c.g, c.b); math.Abs(h-c.h) > 1e-9 || s != 1 || v != 255 {
			t.Errorf("HSV(%v,%v,%v) = (%v, %v, %v), want (%v, 1, 255)", c.r, c.g, c.b, h, s, v, c.h)
		}
	}
}

func pmRGB(r, g, b float32) *Image { return &Image{W: 1, H: 1, C: 3, Pix: []float32{r, g, b}} }

func TestHueShift(t *testing.T) {
	for _, c := range []struct {
		deg  float64
		want []float64
	}{
		{120, []float64{0, 255, 0}},  // red → green
		{240, []float64{0, 0, 255}},  // red → blue
		{-120, []float64{0, 0, 255}}, // same as 240
		{480, []float64{0, 255, 0}},  // same as 120
		{360, []float64{255, 0, 0}},
	} {
		m := pmRGB(255, 0, 0)
		if err := HueShift(m, c.deg); err != nil {
			t.Fatal(err)
		}
		pmExpect(t, "red hue+"+pmFmt(c.deg), m, c.want)
	}
	// (200, 100, 50) at 20° + 60° = 80°: sector 1, f = 1/3, q = 200·(1 − 0.75/3)
	// = 150, p = 50 → (150, 200, 50) (hand-computed, Smith 1978).
	m := pmRGB(200, 100, 50)
	if err := HueShift(m, 60); err != nil {
		t.Fatal(err)
	}
	pmExpect(t, "hue+60", m, []float64{150, 200, 50})
	// Grays have no hue and stay as they are.
	m = pmRGB(90, 90, 90)
	_ = HueShift(m, 77)
	pmExpect(t, "gray hue", m, []float64{90, 90, 90})
	// Three shifts of 120° come back.
	m = pmRGB(12, 200, 77)
	for i := 0; i < 3; i++ {
		_ = HueShift(m, 120)
	}
	for i, w := range []float64{12, 200, 77} {
		if math.Abs(float64(m.Pix[i])-w) > 1e-3 {
			t.Errorf("3×120°: Pix[%d] = %v, want %v", i, m.Pix[i], w)
		}
	}

	err := HueShift(pmConst(2, 2, 1, 100), 30)
	if err == nil || !strings.Contains(err.Error(), "hue shift") {
		t.Errorf("gray image: err = %v, want an error naming the hue shift", err)
	}
}

func TestSaturation(t *testing.T) {
	// Factor 0 gives gray r = g = b = max (HSV value), on random colors.
	r := pmRNG(71, 72)
	m := NewImage(16, 16, 3)
	for i := range m.Pix {
		m.Pix[i] = float32(r.Float64() * 255)
	}
	src := m.Clone()
	if err := Saturation(m, 0); err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 16*16; i++ {
		mx := max(src.Pix[3*i], src.Pix[3*i+1], src.Pix[3*i+2])
		for c := 0; c < 3; c++ {
			if m.Pix[3*i+c] != mx {
				t.Fatalf("pixel %d: %v, want all %v", i, m.Pix[3*i:3*i+3], mx)
			}
		}
	}
	// Hand-computed: (200, 100, 50) is H 20°, S 0.75, V 200.
	// ×0.5: S = 0.375, p = 125, t = 200·(1 − 0.375·2/3) = 150 → (200, 150, 125).
	m = pmRGB(200, 100, 50)
	_ = Saturation(m, 0.5)
	pmExpect(t, "saturation ×0.5", m, []float64{200, 150, 125})
	// ×2: S clamps to 1, p = 0, t = 200/3 → (200, 66.667, 0).
	m = pmRGB(200, 100, 50)
	_ = Saturation(m, 2)
	pmExpect(t, "saturation ×2", m, []float64{200, 200.0 / 3, 0})
	// ×1 is the identity up to rounding.
	m = src.Clone()
	_ = Saturation(m, 1)
	for i := range m.Pix {
		if math.Abs(float64(m.Pix[i]-src.Pix[i])) > 1e-3 {
			t.Fatalf("saturation ×1 changed Pix[%d]: %v → %v", i, src.Pix[i], m.Pix[i])
		}
	}

	err := Saturation(pmConst(2, 2, 1, 100), 0.5)
	if err == nil || !strings.Contains(err.Error(), "saturation") {
		t.Errorf("gray image: err = %v, want an error naming the saturation step", err)
	}
}

func TestHSVRoundTrip(t *testing.T) {
	r := pmRNG(81, 82)
	for i := 0; i < 20000; i++ {
		c := [3]float64{r.Float64() * 255, r.Float64() * 255, r.Float64() * 255}
		if i%5 == 0 { // include exact ties and extremes
			c[r.IntN(3)] = c[r.IntN(3)]
			c[r.IntN(3)] = float64(r.IntN(2) * 255)
		}
		h, s, v := rgbToHSV(c[0], c[1], c[2])
		if h < 0 || h >= 360 || s < 0 || s > 1 || v < 0 || v > 255 {
			t.Fatalf("HSV%v = (%v, %v, %v) out of range", c, h, s, v)
		}
		r2, g2, b2 := hsvToRGB(h, s, v)
		if math.Abs(r2-c[0]) > 1e-3 || math.Abs(g2-c[1]) > 1e-3 || math.Abs(b2-c[2]) > 1e-3 {
			t.Fatalf("round trip %v → (%v, %v, %v)", c, r2, g2, b2)
		}
	}
}

func pmMAE(a, b *Image) float64 {
	s := 0.0
	for i := range a.Pix {
		s += math.Abs(float64(a.Pix[i] - b.Pix[i]))
	}
	return s / float64(len(a.Pix))
}

func TestJPEGRoundTrip(t *testing.T) {
	// Smooth gradients at quality 100: small error. Thresholds are common
	// practice for q100 (gray well under one level; RGB a little more because
	// image/jpeg subsamples chroma 4:2:0).
	gray := NewImage(64, 64, 1)
	rgb := NewImage(64, 64, 3)
	for y := 0; y < 64; y++ {
		for x := 0; x < 64; x++ {
			gray.Pix[y*64+x] = float32(2*x + 2*y)
			o := (y*64 + x) * 3
			rgb.Pix[o], rgb.Pix[o+1], rgb.Pix[o+2] = float32(4*x), float32(4*y), 128
		}
	}
	for _, c := range []struct {
		name string
		src  *Image
		max  float64
	}{{"gray", gray, 1}, {"rgb", rgb, 2}} {
		m := c.src.Clone()
		if err := JPEGRoundTrip(m, 100); err != nil {
			t.Fatal(err)
		}
		if m.C != c.src.C || m.W != 64 || m.H != 64 {
			t.Fatalf("%s: shape %dx%dx%d", c.name, m.W, m.H, m.C)
		}
		e := pmMAE(m, c.src)
		t.Logf("%s q100 gradient: MAE %.4f (limit %v)", c.name, e, c.max)
		if e > c.max {
			t.Errorf("%s q100 gradient: MAE %.3f > %v", c.name, e, c.max)
		}
	}

	// Lower quality, larger error, on uniform noise (common practice: the
	// quantisation tables scale with quality).
	r := pmRNG(91, 92)
	for _, C := range []int{1, 3} {
		noisy := NewImage(64, 64, C)
		for i := range noisy.Pix {
			noisy.Pix[i] = float32(r.IntN(256))
		}
		prev := -1.0
		for _, q := range []int{90, 50, 10} {
			m := noisy.Clone()
			if err := JPEGRoundTrip(m, q); err != nil {
				t.Fatal(err)
			}
			if m.C != C {
				t.Fatalf("C changed from %d to %d", C, m.C)
			}
			e := pmMAE(m, noisy)
			t.Logf("C=%d noise q%d: MAE %.3f", C, q, e)
			if e <= prev {
				t.Errorf("C=%d: MAE at q%d = %.3f, not above the higher quality's %.3f", C, q, e, prev)
			}
			prev = e
		}
	}

	// Out-of-range values are rounded and clamped before encoding.
	m := &Image{W: 8, H: 8, C: 1, Pix: make([]float32, 64)}
	for i := range m.Pix {
		m.Pix[i] = 400
	}
	if err := JPEGRoundTrip(m, 95); err != nil {
		t.Fatal(err)
	}
	for _, v := range m.Pix {
		if math.Abs(float64(v)-255) > 1 {
			t.Fatalf("400 came back as %v, want about 255", v)
		}
	}

	for _, q := range []int{0, 101} {
		if err := JPEGRoundTrip(gray.Clone(), q); err == nil {
			t.Errorf("quality %d accepted", q)
		}
	}
}

func pmEqual(a, b *Image) bool {
	if a.W != b.W || a.H != b.H || a.C != b.C || len(a.Pix) != len(b.Pix) {
		return false
	}
	for i := range a.Pix {
		if math.Float32bits(a.Pix[i]) != math.Float32bits(b.Pix[i]) {
			return false
		}
	}
	return true
}

func pmFmt(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
