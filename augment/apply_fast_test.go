package augment

import (
	"image"
	"image/color"
	"math/rand/v2"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// frameFatesRef is the reference of frameFates: every pixel center mapped
// by Mat.Apply on its own, pixels counted in maps by id.
func frameFatesRef(objs []manifest.Object, src *image.Gray16, stats map[int]*manifest.InstanceStats, m Mat, w, h int) map[int]int {
	inside, total := map[int]int{}, map[int]int{}
	b := src.Bounds()
	fw, fh := float64(w), float64(h)
	for y := b.Min.Y; y < b.Max.Y; y++ {
		row := src.Pix[(y-b.Min.Y)*src.Stride:]
		for x := b.Min.X; x < b.Max.X; x++ {
			i := 2 * (x - b.Min.X)
			id := int(row[i])<<8 | int(row[i+1])
			if id == 0 {
				continue
			}
			total[id]++
			X, Y := m.Apply(float64(x)+0.5, float64(y)+0.5)
			if X >= 0 && X < fw && Y >= 0 && Y < fh {
				inside[id]++
			}
		}
	}
	out := make(map[int]int, len(objs))
	for _, o := range objs {
		if o.Area == 0 {
			continue
		}
		shows := stats[o.Instance] != nil
		switch n := inside[o.Instance]; {
		case n == total[o.Instance] && shows:
			out[o.Instance] = fateWhole
		case n == total[o.Instance]:
			out[o.Instance] = fateLost
		case n == 0 && !shows:
			out[o.Instance] = fateOut
		default:
			out[o.Instance] = fateCut
		}
	}
	return out
}

// TestFrameFatesMatchesReference holds frameFates to frameFatesRef over the
// maps of the warp tests (quarter turns, general turns, scales, shears, maps
// that leave the source), on instance masks of random discs whose ids
// include some no object has, objects without pixels, and a mask whose
// bounds do not start at the origin.
func TestFrameFatesMatchesReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	fates := map[int]int{}
	for _, sz := range [][2]int{{1, 1}, {7, 5}, {48, 33}, {64, 64}} {
		w, h := sz[0], sz[1]
		maps, _ := fastTestMaps(w, h, rng)
		for _, origin := range []image.Point{{}, {3, -2}} {
			inst := image.NewGray16(image.Rectangle{Min: origin, Max: origin.Add(image.Pt(w, h))})
			var objs []manifest.Object
			for id := 1; id <= 9; id++ {
				cx, cy, r := rng.Float64()*float64(w), rng.Float64()*float64(h), 1+rng.Float64()*float64(w)/4
				for y := 0; y < h; y++ {
					for x := 0; x < w; x++ {
						dx, dy := float64(x)+0.5-cx, float64(y)+0.5-cy
						if dx*dx+dy*dy <= r*r {
							inst.SetGray16(origin.X+x, origin.Y+y, color.Gray16{Y: uint16(id)})
						}
					}
				}
				if id != 4 { // id 4 has pixels and no object
					objs = append(objs, manifest.Object{Instance: id, Area: 1})
				}
			}
			objs = append(objs, manifest.Object{Instance: 12, Area: 1}, manifest.Object{Instance: 13}, manifest.Object{Instance: 70000, Area: 1})
			for mi, m := range maps {
				for _, o := range [][2]int{{w, h}, {h + 3, w}} {
					warped := WarpInstances(inst, m, o[0], o[1])
					stats := manifest.MeasureInstances(warped)
					got := frameFates(objs, inst, stats, m, o[0], o[1])
					want := frameFatesRef(objs, inst, stats, m, o[0], o[1])
					if len(got) != len(want) {
						t.Fatalf("%d×%d map %d %v: %d fates, reference %d", w, h, mi, m, len(got), len(want))
					}
					for id, f := range want {
						if got[id] != f {
							t.Errorf("%d×%d at %v, map %d %v → %d×%d: object %d fate %d, reference %d", w, h, origin, mi, m, o[0], o[1], id, got[id], f)
						}
						fates[f]++
					}
				}
			}
		}
	}
	for _, f := range []int{fateWhole, fateOut, fateCut, fateLost} {
		if fates[f] == 0 {
			t.Errorf("no object had fate %d: the comparison does not cover it", f)
		}
	}
	t.Logf("fates compared: %v", fates)
}

// BenchmarkFrameFates times frameFates against its reference on a 512×512
// instance mask of 14 discs under a 10° turn about the center.
//
//	go test -run '^$' -bench FrameFates ./augment/
func BenchmarkFrameFates(b *testing.B) {
	const n = 512
	rng := rand.New(rand.NewPCG(7, 11))
	inst := image.NewGray16(image.Rect(0, 0, n, n))
	var objs []manifest.Object
	for id := 1; id <= 14; id++ {
		cx, cy, r := rng.Float64()*n, rng.Float64()*n, 24+rng.Float64()*72
		for y := 0; y < n; y++ {
			for x := 0; x < n; x++ {
				dx, dy := float64(x)+0.5-cx, float64(y)+0.5-cy
				if dx*dx+dy*dy <= r*r {
					inst.SetGray16(x, y, color.Gray16{Y: uint16(id)})
				}
			}
		}
		objs = append(objs, manifest.Object{Instance: id, Area: 1})
	}
	m := About(Rotate(10), n/2, n/2, n/2, n/2)
	stats := manifest.MeasureInstances(WarpInstances(inst, m, n, n))
	for _, f := range []struct {
		name string
		fn   func([]manifest.Object, *image.Gray16, map[int]*manifest.InstanceStats, Mat, int, int) map[int]int
	}{{"fast", frameFates}, {"reference", frameFatesRef}} {
		b.Run(f.name, func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				f.fn(objs, inst, stats, m, n, n)
			}
		})
	}
}
