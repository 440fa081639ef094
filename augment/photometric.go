package augment

import (
	"bytes"
	"fmt"
	"image/jpeg"
	"math"
	"math/rand/v2"
)

// Photometric and noise steps. They change the pixels of an Image only; masks,
// instance maps and boxes are never touched, because these steps move no pixel.
//
// Random steps draw only from the *rand.Rand they are given, visiting channel
// values (or pixels, for SaltPepper) in storage order — row-major, channels
// interleaved — so the same generator state gives the same output.
//
// Values are allowed to leave 0..255 between steps (Image.ToImage rounds and
// clamps once at the end). A step clamps only where its definition needs
// values inside 0..255; its doc comment says so.

// GaussianNoise adds independent N(0, sigma²) noise to every channel value,
// sigma in intensity units (0..255 scale). One rng.NormFloat64 is drawn per
// channel value, in storage order. Results are not clamped, so the added noise
// keeps its variance even near 0 and 255. sigma ≤ 0 (or NaN) leaves the image
// unchanged and draws nothing.
func GaussianNoise(m *Image, rng *rand.Rand, sigma float64) {
	if !(sigma > 0) {
		return
	}
	// The conversion rounds the product before the sum, so no build fuses
	// them into an FMA (see Mat.Apply).
	pix := m.Pix
	for i, v := range pix {
		pix[i] = float32(float64(v) + float64(sigma*rng.NormFloat64()))
	}
}

// SaltPepper sets each pixel, independently with probability fraction, to 0
// ("pepper") or 255 ("salt"), equally likely; all channels of the pixel change
// together. One rng.Float64 u is drawn per pixel in row-major order: u <
// fraction/2 gives pepper, fraction/2 ≤ u < fraction gives salt. fraction ≤ 0
// (or NaN) leaves the image unchanged and draws nothing; fraction ≥ 1 hits
// every pixel.
func SaltPepper(m *Image, rng *rand.Rand, fraction float64) {
	if !(fraction > 0) {
		return
	}
	half := fraction / 2
	n := m.W * m.H
	for p := 0; p < n; p++ {
		u := rng.Float64()
		if u >= fraction {
			continue
		}
		var v float32 = 255
		if u < half {
			v = 0
		}
		px := m.Pix[p*m.C : (p+1)*m.C]
		for c := range px {
			px[c] = v
		}
	}
}

// ShotNoise applies Poisson (photon shot) noise: photons is the expected photon
// count of a channel value at full scale 255. A value v becomes 255·k/photons
// with k ~ Poisson(λ), λ = v/255·photons, drawn independently per channel value
// in storage order, so the output mean is v and its variance (255/photons)²·λ =
// 255·v/photons. Negative values count as 0 (λ = 0 gives k = 0), which is the
// only clamping; values above 255 are kept. photons ≤ 0, ±Inf or NaN leaves the
// image unchanged and draws nothing. See poissonDraw for the sampler.
func ShotNoise(m *Image, rng *rand.Rand, photons float64) {
	if !(photons > 0) || math.IsInf(photons, 1) {
		return
	}
	scale := 255 / photons
	for i, v := range m.Pix {
		lambda := float64(v) / 255 * photons
		if !(lambda > 0) {
			m.Pix[i] = 0
			continue
		}
		m.Pix[i] = float32(scale * poissonDraw(rng, lambda))
	}
}

// poissonKnuthLimit is the mean below which poissonDraw uses Knuth's
// multiplication method; at and above it, PTRS.
const poissonKnuthLimit = 30

// poissonDraw returns one Poisson(mean) variate (an integer, as float64).
// mean ≤ 0 or NaN gives 0.
//
// For mean < 30 it uses Knuth's multiplication method (D. E. Knuth, The Art
// of Computer Programming, Vol. 2, Seminumerical Algorithms, §3.4.1): multiply
// uniforms until the product falls to e^(−mean) or below; the number of
// factors minus one is Poisson. It costs about mean+1 uniforms, and e^(−30) is
// far from float64 underflow.
//
// For mean ≥ 30 it uses PTRS, the transformed rejection method with squeeze of
// W. Hörmann, "The transformed rejection method for generating Poisson random
// variables", Insurance: Mathematics and Economics 12 (1993) 39–45, valid for
// mean ≥ 10. Its constants (b, a, v_r, α) are those published in the paper;
// two uniforms per try, with an acceptance rate above 0.9.
func poissonDraw(rng *rand.Rand, mean float64) float64 {
	if !(mean > 0) {
		return 0
	}
	if mean < poissonKnuthLimit {
		limit := math.Exp(-mean)
		k := 0.0
		p := rng.Float64()
		for p > limit {
			k++
			p *= rng.Float64()
		}
		return k
	}
	smu := math.Sqrt(mean)
	b := 0.931 + 2.53*smu
	a := -0.059 + 0.02483*b
	vr := 0.9277 - 3.6224/(b-2)
	alpha := 1.1239 + 1.1328/(b-3.4)
	logMean := math.Log(mean)
	for {
		u := rng.Float64() - 0.5
		v := rng.Float64()
		us := 0.5 - math.Abs(u)
		k := math.Floor((2*a/us+b)*u + mean + 0.43)
		if us >= 0.07 && v <= vr {
			return k
		}
		if k < 0 || (us < 0.013 && v > us) {
			continue
		}
		lg, _ := math.Lgamma(k + 1)
		if math.Log(v*alpha/(a/(us*us)+b)) <= -mean+k*logMean-lg {
			return k
		}
	}
}

// Speckle applies multiplicative noise: every channel value v becomes
// v·(1 + n), n ~ N(0, sigma²), one rng.NormFloat64 per channel value in storage
// order. Not clamped. sigma ≤ 0 (or NaN) leaves the image unchanged and draws
// nothing.
func Speckle(m *Image, rng *rand.Rand, sigma float64) {
	if !(sigma > 0) {
		return
	}
	for i, v := range m.Pix {
		m.Pix[i] = float32(float64(v) * (1 + sigma*rng.NormFloat64()))
	}
}

// gaussKernel returns the 2r+1 weights exp(−i²/(2σ²)), i = −r..r, r = ⌈3σ⌉,
// normalized to sum 1.
func gaussKernel(sigma float64) []float64 {
	r := int(math.Ceil(3 * sigma))
	w := make([]float64, 2*r+1)
	sum := 0.0
	for i := -r; i <= r; i++ {
		w[i+r] = math.Exp(-float64(i*i) / (2 * sigma * sigma))
		sum += w[i+r]
	}
	for i := range w {
		w[i] /= sum
	}
	return w
}

// GaussianBlur convolves with a separable Gaussian of standard deviation sigma
// pixels: a horizontal then a vertical pass with the weights exp(−i²/(2σ²)),
// i = −r..r, r = ⌈3σ⌉, normalized to sum 1. Samples beyond the edge repeat
// the edge pixel (replicate). Sums are taken in float64. Not clamped (a
// convex combination of values stays within their range anyway). sigma ≤ 0,
// NaN or +Inf leaves the image unchanged.
//
// Each sum runs over i = −r..r in order, as gaussianBlurRef
// (photometric_fast_test.go) computes it, so the values are the same bit for
// bit; the taps of pixels at least r from the edge are read without clamping
// their index, and both passes run along rows, tap by tap, so that the sums
// of neighbouring values proceed side by side.
func GaussianBlur(m *Image, sigma float64) {
	if !(sigma > 0) || math.IsInf(sigma, 1) || m.W == 0 || m.H == 0 {
		return
	}
	w := gaussKernel(sigma)
	r := (len(w) - 1) / 2
	W, H, C := m.W, m.H, m.C
	tmp := make([]float64, len(m.Pix))
	// Horizontal pass: m.Pix → tmp. Pixels within r of the left or right
	// edge clamp their taps; the others, values k of the row from r·C on,
	// take tap i from k + (i−r)·C: tap by tap over the whole run, each
	// value's sum still in the order i = −r..r.
	n := W * C
	for y := 0; y < H; y++ {
		src := m.Pix[y*n : (y+1)*n]
		dst := tmp[y*n : (y+1)*n]
		for x := 0; x < W; x++ {
			if x == r && x+r < W {
				x = W - r - 1 // the run
				continue
			}
			for c := 0; c < C; c++ {
				s := 0.0
				for i := -r; i <= r; i++ {
					xx := min(max(x+i, 0), W-1)
					s += w[i+r] * float64(src[xx*C+c])
				}
				dst[x*C+c] = s
			}
		}
		if lo, hi := r*C, (W-r)*C; lo < hi {
			acc := dst[lo:hi]
			clear(acc)
			for i, wi := range w {
				tap := src[i*C : i*C+len(acc)]
				for k, v := range tap {
					acc[k] += wi * float64(v)
				}
			}
		}
	}
	// Vertical pass: tmp → m.Pix, a row at a time; sum[k] accumulates the
	// taps of value k of the row in the order i = −r..r.
	sum := make([]float64, n)
	for y := 0; y < H; y++ {
		clear(sum)
		for i := -r; i <= r; i++ {
			yy := min(max(y+i, 0), H-1)
			wi := w[i+r]
			row := tmp[yy*n : (yy+1)*n]
			for k, v := range row {
				sum[k] += wi * v
			}
		}
		out := m.Pix[y*n : (y+1)*n]
		for k, s := range sum {
			out[k] = float32(s)
		}
	}
}

// Brightness adds delta to every channel value. Not clamped.
func Brightness(m *Image, delta float64) {
	for i, v := range m.Pix {
		m.Pix[i] = float32(float64(v) + delta)
	}
}

// Contrast scales every channel value about mid-gray: (v − 127.5)·factor +
// 127.5. Not clamped.
func Contrast(m *Image, factor float64) {
	for i, v := range m.Pix {
		m.Pix[i] = float32((float64(v)-127.5)*factor + 127.5)
	}
}

// Gamma maps every channel value v to 255·(clamp(v, 0, 255)/255)^gamma. The
// clamp is part of the definition: a power of a negative base is undefined and
// the curve is meant for the 0..255 range, so 0 stays 0 and 255 stays 255.
// gamma ≤ 0 (or NaN) leaves the image unchanged.
func Gamma(m *Image, gamma float64) {
	if !(gamma > 0) {
		return
	}
	for i, v := range m.Pix {
		m.Pix[i] = float32(255 * math.Pow(clamp255(float64(v))/255, gamma))
	}
}

// clamp255 clamps to 0..255 (NaN gives 0).
func clamp255(v float64) float64 {
	if !(v > 0) {
		return 0
	}
	if v > 255 {
		return 255
	}
	return v
}

// rgbToHSV converts r, g, b in 0..255 to hue h in degrees [0, 360),
// saturation s in 0..1 and value v in 0..255 with the hexcone model of A. R.
// Smith, "Color gamut transform pairs", Computer Graphics 12(3) (SIGGRAPH '78)
// 12–19: v = max, s = (max − min)/max, and h from the position between the
// primaries on the hexagon. Grays (max = min) get h = 0, s = 0.
func rgbToHSV(r, g, b float64) (h, s, v float64) {
	mx := max(r, g, b)
	mn := min(r, g, b)
	v = mx
	d := mx - mn
	if mx <= 0 || d <= 0 {
		return 0, 0, v
	}
	s = d / mx
	switch mx {
	case r:
		h = (g - b) / d // −1..1: between magenta and yellow
		if h < 0 {
			h += 6
		}
	case g:
		h = 2 + (b-r)/d
	default:
		h = 4 + (r-g)/d
	}
	h *= 60
	if h >= 360 {
		h -= 360
	}
	return h, s, v
}

// hsvToRGB is the inverse of rgbToHSV (Smith 1978): sector i = ⌊h/60⌋,
// fraction f, and the three levels p = v(1−s), q = v(1−s·f), t = v(1−s(1−f)).
func hsvToRGB(h, s, v float64) (r, g, b float64) {
	if s <= 0 {
		return v, v, v
	}
	h = math.Mod(h, 360)
	if h < 0 {
		h += 360
	}
	h6 := h / 60
	i := math.Floor(h6)
	f := h6 - i
	p := v * (1 - s)
	q := v * (1 - s*f)
	t := v * (1 - s*(1-f))
	switch int(i) % 6 {
	case 0:
		return v, t, p
	case 1:
		return q, v, p
	case 2:
		return p, v, t
	case 3:
		return p, q, v
	case 4:
		return t, p, v
	default:
		return v, p, q
	}
}

// hsvMap converts every pixel to HSV, applies f and converts back. Channel
// values are clamped to 0..255 first: the hexcone is defined on the RGB cube.
func hsvMap(m *Image, step string, f func(h, s float64) (float64, float64)) error {
	if m.C != 3 {
		return fmt.Errorf("%s: needs an RGB image (3 channels), got %d channel(s)", step, m.C)
	}
	for i := 0; i+2 < len(m.Pix); i += 3 {
		h, s, v := rgbToHSV(clamp255(float64(m.Pix[i])), clamp255(float64(m.Pix[i+1])), clamp255(float64(m.Pix[i+2])))
		h, s = f(h, s)
		r, g, b := hsvToRGB(h, s, v)
		m.Pix[i], m.Pix[i+1], m.Pix[i+2] = float32(r), float32(g), float32(b)
	}
	return nil
}

// HueShift rotates the hue of every pixel by degrees (any real; taken modulo
// 360) in the HSV hexcone of Smith (1978), keeping saturation and value.
// Channel values are clamped to 0..255 first, because the hexcone is defined
// on the RGB cube. Grays are unchanged. It returns an error for an image that
// is not RGB.
func HueShift(m *Image, degrees float64) error {
	return hsvMap(m, "hue shift", func(h, s float64) (float64, float64) {
		return h + degrees, s
	})
}

// Saturation multiplies the HSV saturation (Smith 1978) of every pixel by
// factor and clamps it to 0..1, keeping hue and value: factor 0 gives the gray
// r = g = b = max(r, g, b). Channel values are clamped to 0..255 first, because
// the hexcone is defined on the RGB cube. It returns an error for an image
// that is not RGB.
func Saturation(m *Image, factor float64) error {
	return hsvMap(m, "saturation", func(h, s float64) (float64, float64) {
		s *= factor
		if !(s > 0) {
			s = 0
		} else if s > 1 {
			s = 1
		}
		return h, s
	})
}

// JPEGRoundTrip simulates JPEG compression artefacts: the image is rounded to
// 8 bits (the clamp to 0..255 of Image.ToImage), encoded with the standard
// library's image/jpeg at quality 1..100, decoded, and the decoded values are
// written back. A gray image (C = 1) is encoded as a one-component gray JPEG
// and stays gray. Quality outside 1..100 or a channel count other than 1 or 3
// is an error; an empty image is left as is.
func JPEGRoundTrip(m *Image, quality int) error {
	if quality < 1 || quality > 100 {
		return fmt.Errorf("jpeg round trip: quality %d outside 1..100", quality)
	}
	if m.C != 1 && m.C != 3 {
		return fmt.Errorf("jpeg round trip: needs 1 or 3 channels, got %d", m.C)
	}
	if m.W == 0 || m.H == 0 {
		return nil
	}
	var buf bytes.Buffer
	if err := jpeg.Encode(&buf, m.ToImage(), &jpeg.Options{Quality: quality}); err != nil {
		return fmt.Errorf("jpeg round trip: encode: %w", err)
	}
	dec, err := jpeg.Decode(&buf)
	if err != nil {
		return fmt.Errorf("jpeg round trip: decode: %w", err)
	}
	back := FromImage(dec)
	if back.W != m.W || back.H != m.H || back.C != m.C {
		return fmt.Errorf("jpeg round trip: decoded %dx%d with %d channel(s), want %dx%d with %d",
			back.W, back.H, back.C, m.W, m.H, m.C)
	}
	copy(m.Pix, back.Pix)
	return nil
}
