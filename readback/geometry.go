package readback

import (
	"fmt"
	"math"
	"sort"
)

// Transform is a relation between a source image (W0×H0) and what the
// loader holds (W×H): first one of the eight dihedral maps (D), then
// either an offset window — loader(x, y) = D(x+OX, y+OY), which is a crop
// when the loader is smaller and a shift when it is the same size — or a
// resize of the whole of D to W×H with an interpolation kind.
type Transform struct {
	D      int    `json:"dihedral"`         // 0..7, see DihedralNames
	Resize bool   `json:"resize"`           // a resize of D rather than an offset window
	OX     int    `json:"offset_x"`         // offset window: loader x = D x − OX
	OY     int    `json:"offset_y"`         // offset window: loader y = D y − OY
	Interp string `json:"interp,omitempty"` // resize: nearest, nearest-center, bilinear
	W      int    `json:"width"`            // loader size
	H      int    `json:"height"`
	W0     int    `json:"source_width"` // source size
	H0     int    `json:"source_height"`
}

// DihedralNames names the eight flips, quarter turns and transposes of a
// picture in the order Transform.D numbers them. Turns are as seen on
// screen (y down): np.rot90(a, 1) on an H×W array turns counter-clockwise.
var DihedralNames = [8]string{
	"as the source", "mirrored left-right", "mirrored top-bottom", "turned 180°",
	"transposed", "turned 90° clockwise", "turned 90° counter-clockwise", "anti-transposed",
}

// dihedral maps pixel (x, y) of D (the source after map d) to the source
// pixel it comes from. Reference: the eight symmetries of the square (the
// dihedral group of order 8), each checked in geometry_test.go against
// github.com/disintegration/imaging's FlipH, FlipV, Rotate90/180/270,
// Transpose and Transverse.
func dihedral(d, w0, h0, x, y int) (int, int) {
	switch d {
	case 0:
		return x, y
	case 1:
		return w0 - 1 - x, y
	case 2:
		return x, h0 - 1 - y
	case 3:
		return w0 - 1 - x, h0 - 1 - y
	case 4:
		return y, x
	case 5: // turned 90° clockwise: D's top-right is the source's top-left
		return y, h0 - 1 - x
	case 6: // turned 90° counter-clockwise
		return w0 - 1 - y, x
	default: // anti-transpose
		return w0 - 1 - y, h0 - 1 - x
	}
}

// dSize is the size of D: the source's, or swapped for maps 4..7.
func dSize(d, w0, h0 int) (int, int) {
	if d >= 4 {
		return h0, w0
	}
	return w0, h0
}

// Same reports whether two transforms map the same way.
func (t Transform) Same(u Transform) bool {
	return t.D == u.D && t.Resize == u.Resize && t.OX == u.OX && t.OY == u.OY && t.Interp == u.Interp
}

// Identity reports whether t is no change at all.
func (t Transform) Identity() bool {
	return t.D == 0 && !t.Resize && t.OX == 0 && t.OY == 0 && t.W == t.W0 && t.H == t.H0
}

// Describe says what t does, in words.
func (t Transform) Describe() string {
	d := DihedralNames[t.D]
	w1, h1 := dSize(t.D, t.W0, t.H0)
	var more string
	switch {
	case t.Resize:
		more = fmt.Sprintf("resized from %dx%d to %dx%d (×%s, %s)", w1, h1, t.W, t.H, trimFloat(float64(t.W)/float64(w1)), t.Interp)
	case t.W == w1 && t.H == h1 && (t.OX != 0 || t.OY != 0):
		more = "shifted " + shiftWords(-t.OX, -t.OY)
	case t.W != w1 || t.H != h1:
		more = fmt.Sprintf("cropped to %dx%d at (%d, %d)", t.W, t.H, t.OX, t.OY)
	}
	switch {
	case more == "":
		return d
	case t.D == 0:
		return more
	}
	return d + ", " + more
}

// Summary says what t does without the offsets of a crop, so the
// relations of a randomly cropped batch group together.
func (t Transform) Summary() string {
	u := t
	w1, h1 := dSize(t.D, t.W0, t.H0)
	if !t.Resize && (t.W != w1 || t.H != h1) {
		if t.D == 0 {
			return fmt.Sprintf("cropped to %dx%d", t.W, t.H)
		}
		return DihedralNames[t.D] + fmt.Sprintf(", cropped to %dx%d", t.W, t.H)
	}
	return u.Describe()
}

// shiftWords says "1 px right", "2 px left and 1 px down".
func shiftWords(dx, dy int) string {
	var parts []string
	switch {
	case dx > 0:
		parts = append(parts, fmt.Sprintf("%d px right", dx))
	case dx < 0:
		parts = append(parts, fmt.Sprintf("%d px left", -dx))
	}
	switch {
	case dy > 0:
		parts = append(parts, fmt.Sprintf("%d px down", dy))
	case dy < 0:
		parts = append(parts, fmt.Sprintf("%d px up", -dy))
	}
	if len(parts) == 0 {
		return "0 px"
	}
	if len(parts) == 2 {
		return parts[0] + " and " + parts[1]
	}
	return parts[0]
}

func trimFloat(f float64) string {
	s := fmt.Sprintf("%.4f", f)
	for len(s) > 1 && s[len(s)-1] == '0' {
		s = s[:len(s)-1]
	}
	if s[len(s)-1] == '.' {
		s = s[:len(s)-1]
	}
	return s
}

// apply resamples one source plane (w0×h0) under t into a loader-sized
// plane; pixels the source does not cover are NaN. Nearest is the legacy
// floor(x · w1/w) sampling (PyTorch's "nearest"); nearest-center samples at
// pixel centers, floor((x + 0.5) · w1/w) (PyTorch's "nearest-exact", PIL's
// NEAREST); bilinear samples at (x + 0.5) · w1/w − 0.5 clamped to the edge,
// without antialiasing (PyTorch's bilinear with align_corners=False).
func (t Transform) apply(src []float32, out []float32) {
	w1, h1 := dSize(t.D, t.W0, t.H0)
	nan := float32(math.NaN())
	at := func(x, y int) float32 {
		sx, sy := dihedral(t.D, t.W0, t.H0, x, y)
		return src[sy*t.W0+sx]
	}
	if !t.Resize && t.D == 0 && t.OX == 0 && t.OY == 0 && t.W == t.W0 && t.H == t.H0 {
		copy(out, src[:t.W*t.H])
		return
	}
	if !t.Resize {
		for y := 0; y < t.H; y++ {
			dy := y + t.OY
			for x := 0; x < t.W; x++ {
				dx := x + t.OX
				if dx < 0 || dy < 0 || dx >= w1 || dy >= h1 {
					out[y*t.W+x] = nan
					continue
				}
				out[y*t.W+x] = at(dx, dy)
			}
		}
		return
	}
	sxF, syF := float64(w1)/float64(t.W), float64(h1)/float64(t.H)
	for y := 0; y < t.H; y++ {
		for x := 0; x < t.W; x++ {
			var v float32
			switch t.Interp {
			case "nearest":
				v = at(min(int(float64(x)*sxF), w1-1), min(int(float64(y)*syF), h1-1))
			case "nearest-center":
				v = at(min(int((float64(x)+0.5)*sxF), w1-1), min(int((float64(y)+0.5)*syF), h1-1))
			default:
				fx := max((float64(x)+0.5)*sxF-0.5, 0)
				fy := max((float64(y)+0.5)*syF-0.5, 0)
				x0, y0 := min(int(fx), w1-1), min(int(fy), h1-1)
				x1, y1 := min(x0+1, w1-1), min(y0+1, h1-1)
				ax, ay := fx-float64(x0), fy-float64(y0)
				v = float32((1-ay)*((1-ax)*float64(at(x0, y0))+ax*float64(at(x1, y0))) +
					ay*((1-ax)*float64(at(x0, y1))+ax*float64(at(x1, y1))))
			}
			out[y*t.W+x] = v
		}
	}
}

// MaxShift is the largest shift (in pixels, each axis) searched between a
// same-size loader image and its source.
const MaxShift = 3

// candidates lists the relations tried for a source w0×h0 and a loader
// w×h, the plainest first (so ties go to the identity).
func candidates(w0, h0, w, h int) []Transform {
	var out []Transform
	add := func(t Transform) { t.W, t.H, t.W0, t.H0 = w, h, w0, h0; out = append(out, t) }
	for d := 0; d < 8; d++ {
		w1, h1 := dSize(d, w0, h0)
		if w == w1 && h == h1 {
			add(Transform{D: d})
		}
	}
	for d := 0; d < 8; d++ {
		w1, h1 := dSize(d, w0, h0)
		switch {
		case w == w1 && h == h1:
			for oy := -MaxShift; oy <= MaxShift; oy++ {
				for ox := -MaxShift; ox <= MaxShift; ox++ {
					if ox != 0 || oy != 0 {
						add(Transform{D: d, OX: ox, OY: oy})
					}
				}
			}
		case w <= w1 && h <= h1:
			for oy := 0; oy <= h1-h; oy++ {
				for ox := 0; ox <= w1-w; ox++ {
					add(Transform{D: d, OX: ox, OY: oy})
				}
			}
		}
		if w != w1 || h != h1 {
			for _, k := range []string{"nearest", "nearest-center", "bilinear"} {
				add(Transform{D: d, Resize: true, Interp: k})
			}
		}
	}
	return out
}

// probes picks up to n loader pixels on a regular grid.
func probes(w, h, n int) []int {
	step := max(1, int(math.Sqrt(float64(w*h)/float64(n))))
	var out []int
	for y := step / 2; y < h; y += step {
		for x := step / 2; x < w; x += step {
			out = append(out, y*w+x)
		}
	}
	return out
}

// corrStat accumulates the sums a Pearson correlation and a least-squares
// line need.
type corrStat struct{ n, sx, sy, sxx, syy, sxy float64 }

func (c *corrStat) add(x, y float64) {
	c.n++
	c.sx += x
	c.sy += y
	c.sxx += x * x
	c.syy += y * y
	c.sxy += x * y
}

func (c *corrStat) merge(o corrStat) {
	c.n += o.n
	c.sx += o.sx
	c.sy += o.sy
	c.sxx += o.sxx
	c.syy += o.syy
	c.sxy += o.sxy
}

// corr is the Pearson correlation of x and y (0 when either is constant).
func (c corrStat) corr() float64 {
	if c.n < 2 {
		return 0
	}
	vx := c.sxx - c.sx*c.sx/c.n
	vy := c.syy - c.sy*c.sy/c.n
	if vx <= 1e-9*c.n || vy <= 1e-12*c.n {
		return 0
	}
	return (c.sxy - c.sx*c.sy/c.n) / math.Sqrt(vx*vy)
}

// line is the least-squares fit y = a·x + b and its R² (Pearson r²).
func (c corrStat) line() (a, b, r2 float64) {
	if c.n < 2 {
		return 0, 0, 0
	}
	vx := c.sxx - c.sx*c.sx/c.n
	if vx <= 0 {
		return 0, c.sy / c.n, 0
	}
	a = (c.sxy - c.sx*c.sy/c.n) / vx
	b = (c.sy - a*c.sx) / c.n
	r := c.corr()
	return a, b, r * r
}

// imageScore is how well the loader image L (channels of w·h) is an affine
// function of the source under t: for each loader channel the best
// correlation with any source channel; the score is the worst of those. On
// probes only when pr is non-nil.
func imageScore(t Transform, s *source, L [][]float32, pr []int, buf []float32) float64 {
	worst := 1.0
	planes := make([][]float32, len(s.ch))
	for k, p := range s.ch {
		planes[k] = buf[k*t.W*t.H : (k+1)*t.W*t.H]
		if pr == nil {
			t.apply(p, planes[k])
		} else {
			t.applyAt(p, planes[k], pr)
		}
	}
	n := t.W * t.H
	for c := range L {
		// In full, every 7th pixel ranks the source channels first; the
		// best (and any within 0.01 of it) is then correlated over all.
		ks := make([]int, 0, len(planes))
		if pr == nil && len(planes) > 1 {
			rank := make([]float64, len(planes))
			top := -2.0
			for k := range planes {
				rank[k] = corrOver(planes[k], L[c], nil, 7)
				top = max(top, rank[k])
			}
			for k := range planes {
				if rank[k] >= top-0.01 {
					ks = append(ks, k)
				}
			}
		} else {
			for k := range planes {
				ks = append(ks, k)
			}
		}
		best := -1.0
		for _, k := range ks {
			var st corrStat
			if pr == nil {
				// Every 2nd pixel: thousands of pixels settle a correlation
				// against the 0.98 a relation needs.
				st = corrStatOver(planes[k], L[c], nil, 2)
			} else {
				st = corrStatOver(planes[k], L[c], pr, 1)
			}
			if st.n < 0.5*float64(countOf(pr, n)) {
				return 0 // too little overlap to say
			}
			best = max(best, st.corr())
		}
		worst = min(worst, best)
	}
	return worst
}

// corrStatOver accumulates (x, y) pairs over the probes pr, or over every
// step-th pixel, skipping pixels x does not cover (NaN).
func corrStatOver(x, y []float32, pr []int, step int) corrStat {
	var st corrStat
	if pr != nil {
		for _, i := range pr {
			if v := x[i]; v == v {
				st.add(float64(v), float64(y[i]))
			}
		}
		return st
	}
	for i := 0; i < len(x); i += step {
		if v := x[i]; v == v {
			st.add(float64(v), float64(y[i]))
		}
	}
	return st
}

func corrOver(x, y []float32, pr []int, step int) float64 {
	st := corrStatOver(x, y, pr, step)
	return st.corr()
}

// applyAt is apply at the probe pixels only (others left as they are).
func (t Transform) applyAt(src []float32, out []float32, pr []int) {
	if t.Resize {
		t.apply(src, out)
		return
	}
	w1, h1 := dSize(t.D, t.W0, t.H0)
	nan := float32(math.NaN())
	for _, i := range pr {
		x, y := i%t.W+t.OX, i/t.W+t.OY
		if x < 0 || y < 0 || x >= w1 || y >= h1 {
			out[i] = nan
			continue
		}
		sx, sy := dihedral(t.D, t.W0, t.H0, x, y)
		out[i] = src[sy*t.W0+sx]
	}
}

func each(pr []int, n int, fn func(i int)) {
	if pr == nil {
		for i := 0; i < n; i++ {
			fn(i)
		}
		return
	}
	for _, i := range pr {
		fn(i)
	}
}

func countOf(pr []int, n int) int {
	if pr == nil {
		return n
	}
	return len(pr)
}

// maskScore is the share of loader mask pixels (where the source is not
// ignore) equal to the source's id under t plus the most common offset k;
// it returns k too (ids shifted against the class table show as k ≠ 0).
func maskScore(t Transform, s *source, M []float32, pr []int, buf []float32) (float64, int) {
	src := make([]float32, len(s.mask))
	for i, v := range s.mask {
		src[i] = float32(v)
	}
	return maskScoreF(t, src, M, pr, buf)
}

func maskScoreF(t Transform, src []float32, M []float32, pr []int, buf []float32) (float64, int) {
	plane := buf[:t.W*t.H]
	if pr == nil {
		t.apply(src, plane)
	} else {
		t.applyAt(src, plane, pr)
	}
	var hist [17]int
	n := 0
	each(pr, t.W*t.H, func(i int) {
		v := plane[i]
		if v != v || v == 255 {
			return
		}
		n++
		d := math.Round(float64(M[i] - v))
		if d >= -8 && d <= 8 && math.Abs(float64(M[i]-v)-d) < 0.01 {
			hist[int(d)+8]++
		}
	})
	if n == 0 || float64(n) < 0.5*float64(countOf(pr, t.W*t.H)) {
		return 0, 0
	}
	bk, bn := 0, -1
	for k := 0; k <= 16; k++ {
		// prefer k = 0 on ties, then small offsets
		if hist[k] > bn || (hist[k] == bn && abs(k-8) < abs(bk-8)) {
			bk, bn = k, hist[k]
		}
	}
	return float64(bn) / float64(n), bk - 8
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// scored is a candidate with its score.
type scored struct {
	t     Transform
	score float64
	k     int
}

// search finds the relation that best explains the loader plane(s) from
// the source: probes first over every candidate, then the best few scored
// in full. score(t, probes) must return a value in [0, 1].
func search(cands []Transform, score func(t Transform, pr []int) (float64, int), pr []int, good float64) scored {
	if len(cands) == 0 {
		return scored{}
	}
	// The plainest relation, scored in full, settles most batches at once.
	if s, k := score(cands[0], nil); s >= good {
		return scored{cands[0], s, k}
	}
	list := make([]scored, len(cands))
	for i, t := range cands {
		s, k := score(t, pr)
		list[i] = scored{t, s, k}
	}
	order := make([]int, len(list))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return list[order[a]].score > list[order[b]].score })
	best := scored{score: -2}
	for _, i := range order[:min(6, len(order))] {
		s, k := score(list[i].t, nil)
		if s > best.score+1e-9 || (math.Abs(s-best.score) <= 1e-9 && i < indexOf(cands, best.t)) {
			best = scored{list[i].t, s, k}
		}
	}
	return best
}

func indexOf(c []Transform, t Transform) int {
	for i, u := range c {
		if u.Same(t) {
			return i
		}
	}
	return len(c)
}

// probeCache scores offset-window relations of one sample on the probe
// pixels quickly: each dihedral map of each source channel is materialized
// once, and a candidate is then plain index arithmetic.
type probeCache struct {
	s   *source
	y   []float64 // the first loader channel at the probes
	prs []int
	d   [8][][]float32
}

func newProbeCache(s *source, L0 []float32, pr []int) *probeCache {
	pc := &probeCache{s: s}
	return pc.init(L0, pr)
}

func (pc *probeCache) init(L0 []float32, pr []int) *probeCache {
	pc.y = make([]float64, len(pr))
	for i, p := range pr {
		pc.y[i] = float64(L0[p])
	}
	pc.prs = pr
	return pc
}

func (pc *probeCache) planes(d int) [][]float32 {
	if pc.d[d] == nil {
		s := pc.s
		w1, h1 := dSize(d, s.w, s.h)
		out := make([][]float32, len(s.ch))
		for k, p := range s.ch {
			q := make([]float32, w1*h1)
			for y := 0; y < h1; y++ {
				for x := 0; x < w1; x++ {
					sx, sy := dihedral(d, s.w, s.h, x, y)
					q[y*w1+x] = p[sy*s.w+sx]
				}
			}
			out[k] = q
		}
		pc.d[d] = out
	}
	return pc.d[d]
}

// score is imageScore on the probes for an offset window, first loader
// channel only.
func (pc *probeCache) score(t Transform) float64 {
	w1, h1 := dSize(t.D, t.W0, t.H0)
	planes := pc.planes(t.D)
	best := -1.0
	for _, q := range planes {
		var st corrStat
		for i, p := range pc.prs {
			x, y := p%t.W+t.OX, p/t.W+t.OY
			if x < 0 || y < 0 || x >= w1 || y >= h1 {
				continue
			}
			st.add(float64(q[y*w1+x]), pc.y[i])
		}
		if st.n < 0.5*float64(len(pc.prs)) {
			return 0
		}
		best = max(best, st.corr())
	}
	return best
}
