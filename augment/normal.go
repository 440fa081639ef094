package augment

import (
	"math"
	"math/rand/v2"
)

// Normal draws for the noise steps without the interface call of
// rand.(*Rand).NormFloat64: normal(p) returns, for a *rand.PCG p, the very
// value rand.New(p).NormFloat64() returns and advances p the same way, so
// the noise steps give the same bytes as with a *rand.Rand (normal_test.go
// holds it to the standard library, draw by draw). Both are the ziggurat
// method of G. Marsaglia and W. W. Tsang, "The Ziggurat Method for
// Generating Random Variables", Journal of Statistical Software 5(8), 2000,
// with 128 layers: one 64-bit draw u gives j = int32(u) and the layer
// i = (u >> 32) & 127; x = j·w[i] is returned when |j| < k[i] (over 99 % of
// draws), otherwise the base strip's tail or the wedge is sampled with
// further draws.

// zigR is the right end of the base strip, and zigV the area of each layer
// (Marsaglia & Tsang 2000, 128 layers).
const (
	zigR = 3.442619855899
	zigV = 9.91256303526217e-3
)

// zigK, zigW and zigF are the ziggurat's tables, built by the setup of
// Marsaglia & Tsang 2000 (their r4_nor_setup, with 2³¹ as the scale of j):
// zigK[i] the scaled ratio of layer i−1's right end to layer i's, zigW[i]
// layer i's right end over 2³¹, zigF[i] the density exp(−x²/2) there.
var (
	zigK [128]uint32
	zigW [128]float32
	zigF [128]float32
)

func init() {
	const m1 = 1 << 31
	dn := zigR
	tn := dn
	q := zigV / math.Exp(-.5*dn*dn)
	zigK[0] = uint32((dn / q) * m1)
	zigK[1] = 0
	zigW[0] = float32(q / m1)
	zigW[127] = float32(dn / m1)
	zigF[0] = 1
	zigF[127] = float32(math.Exp(-.5 * dn * dn))
	for i := 126; i >= 1; i-- {
		dn = math.Sqrt(-2 * math.Log(zigV/dn+math.Exp(-.5*dn*dn)))
		zigK[i+1] = uint32((dn / tn) * m1)
		tn = dn
		zigF[i] = float32(math.Exp(-.5 * dn * dn))
		zigW[i] = float32(dn / m1)
	}
}

// normal returns one standard normal variate from p (see the top of this
// file); the fast case here, the rest in normalSlow.
func normal(p *rand.PCG) float64 {
	u := p.Uint64()
	j := int32(u)
	i := u >> 32 & 0x7F
	if zigAbs(j) < zigK[i] {
		return float64(j) * float64(zigW[i])
	}
	return normalSlow(p, u)
}

func zigAbs(j int32) uint32 {
	if j < 0 {
		return uint32(-j)
	}
	return uint32(j)
}

// unitFloat is rand.(*Rand).Float64 on p: 53 random bits over 2⁵³.
func unitFloat(p *rand.PCG) float64 {
	return float64(p.Uint64()<<11>>11) / (1 << 53)
}

// normalSlow finishes a draw whose first 64 bits u fell outside the fast
// case: the tail beyond zigR for the base strip (Marsaglia's method of
// exponentials), the wedge test otherwise, and a fresh draw on rejection.
func normalSlow(p *rand.PCG, u uint64) float64 {
	for {
		j := int32(u)
		i := u >> 32 & 0x7F
		x := float64(j) * float64(zigW[i])
		if zigAbs(j) < zigK[i] {
			return x
		}
		if i == 0 {
			for {
				x = -math.Log(unitFloat(p)) * (1.0 / zigR)
				y := -math.Log(unitFloat(p))
				if y+y >= x*x {
					break
				}
			}
			if j > 0 {
				return zigR + x
			}
			return -zigR - x
		}
		if zigF[i]+float32(unitFloat(p))*(zigF[i-1]-zigF[i]) < float32(math.Exp(-.5*x*x)) {
			return x
		}
		u = p.Uint64()
	}
}

// gaussianNoise is GaussianNoise drawing from p with normal: the same
// values, bit for bit, as GaussianNoise(m, rand.New(p), sigma).
func gaussianNoise(m *Image, p *rand.PCG, sigma float64) {
	if !(sigma > 0) {
		return
	}
	pix := m.Pix
	for i, v := range pix {
		// normal(p), written out: the call does not inline.
		u := p.Uint64()
		j := int32(u)
		l := u >> 32 & 0x7F
		var n float64
		if zigAbs(j) < zigK[l] {
			n = float64(j) * float64(zigW[l])
		} else {
			n = normalSlow(p, u)
		}
		pix[i] = float32(float64(v) + float64(sigma*n))
	}
}

// speckle is Speckle drawing from p with normal: the same values, bit for
// bit, as Speckle(m, rand.New(p), sigma).
func speckle(m *Image, p *rand.PCG, sigma float64) {
	if !(sigma > 0) {
		return
	}
	pix := m.Pix
	for i, v := range pix {
		// normal(p), written out: the call does not inline.
		u := p.Uint64()
		j := int32(u)
		l := u >> 32 & 0x7F
		var n float64
		if zigAbs(j) < zigK[l] {
			n = float64(j) * float64(zigW[l])
		} else {
			n = normalSlow(p, u)
		}
		pix[i] = float32(float64(v) * (1 + sigma*n))
	}
}
