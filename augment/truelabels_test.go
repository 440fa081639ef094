package augment

import (
	"context"
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// Issue 12, done when: a plain folder with a declared count column, a
// declared reading column and an undeclared numeric column, augmented with
// heavy crops and turns, gives copies whose declared columns equal what the
// masks show, and no copy that carries an undeclared column it may have
// broken. The scenario (invented data): photos of parts bins from above,
// each with washers (class 1, discs of radius 4) and a bin tag of three
// digits, each digit its own class (digit-1 … digit-9, drawn as 3×6 bars).
// labels.csv has washers (declared count), bin_code (declared text
// reading), hand_count (the washers as someone counted them; undeclared)
// and lighting (declared image property).
//
// Every check reads the written PNGs with the standard library's decoder
// and labels them itself (tbComponents, 4-connected regions: a common
// practice of its own here, not trueset's folderComponents), never trueset's
// records' objects.

const tbW, tbH = 64, 48

type tbSource struct {
	id      string
	washers int
	code    string
}

// tbFolder writes the parts-bin folder and returns its sources.
func tbFolder(t *testing.T, dir string, n int) []tbSource {
	t.Helper()
	for _, d := range []string{"images", "masks"} {
		os.MkdirAll(filepath.Join(dir, d), 0o755)
	}
	classes := []map[string]any{{"id": 1, "name": "washer", "color": []int{150, 150, 160}}}
	glyphs := map[string]string{}
	for k := 1; k <= 9; k++ {
		name := fmt.Sprintf("digit-%d", k)
		classes = append(classes, map[string]any{"id": 1 + k, "name": name, "color": []int{20 * k, 40, 200}})
		glyphs[name] = fmt.Sprint(k)
	}
	cj, _ := json.Marshal(classes)
	writeFile(t, filepath.Join(dir, "classes.json"), cj)
	colj, _ := json.Marshal(map[string]any{
		"glyphs": glyphs,
		"columns": map[string]any{
			"washers":  map[string]any{"kind": "count", "classes": []string{"washer"}},
			"bin_code": map[string]any{"kind": "text"},
			"lighting": map[string]any{"kind": "image"},
		},
	})
	writeFile(t, filepath.Join(dir, "columns.json"), colj)
	rng := rand.New(rand.NewPCG(12, 34))
	var srcs []tbSource
	var csv strings.Builder
	csv.WriteString("id,washers,bin_code,hand_count,lighting\n")
	for i := 0; i < n; i++ {
		img := image.NewRGBA(image.Rect(0, 0, tbW, tbH))
		mask := image.NewGray(image.Rect(0, 0, tbW, tbH))
		for j := range img.Pix {
			img.Pix[j] = 90
			if j%4 == 3 {
				img.Pix[j] = 255
			}
		}
		paint := func(x, y int, cls uint8) {
			mask.Pix[y*mask.Stride+x] = cls
			img.SetRGBA(x, y, color.RGBA{uint8(40 + 20*cls), 220 - 15*cls, 60, 255})
		}
		// Three digits at (x0 + 6k, 6..12), away from the washers below.
		code := ""
		x0 := 10 + rng.IntN(30)
		for k := 0; k < 3; k++ {
			d := 1 + rng.IntN(9)
			code += fmt.Sprint(d)
			for y := 6; y < 12; y++ {
				for x := x0 + 6*k; x < x0+6*k+3; x++ {
					paint(x, y, uint8(1+d))
				}
			}
		}
		// Washers: discs of radius 4 (pixel centers inside), 2..5 of them,
		// at least 2 pixels apart, in y 18..44.
		var centers [][2]float64
		want := 2 + rng.IntN(4)
		for tries := 0; len(centers) < want && tries < 1000; tries++ {
			c := [2]float64{6 + rng.Float64()*52, 22 + rng.Float64()*20}
			ok := true
			for _, o := range centers {
				if (c[0]-o[0])*(c[0]-o[0])+(c[1]-o[1])*(c[1]-o[1]) < 11*11 {
					ok = false
				}
			}
			if ok {
				centers = append(centers, c)
			}
		}
		for _, c := range centers {
			for y := 0; y < tbH; y++ {
				for x := 0; x < tbW; x++ {
					dx, dy := float64(x)+0.5-c[0], float64(y)+0.5-c[1]
					if dx*dx+dy*dy <= 16 {
						paint(x, y, 1)
					}
				}
			}
		}
		id := fmt.Sprintf("bin-%02d", i)
		writeFile(t, filepath.Join(dir, "images", id+".png"), pngBytes(t, img))
		writeFile(t, filepath.Join(dir, "masks", id+".png"), pngBytes(t, mask))
		light := []string{"even", "side"}[i%2]
		fmt.Fprintf(&csv, "%s,%d,%s,%d,%s\n", id, len(centers), code, len(centers), light)
		srcs = append(srcs, tbSource{id, len(centers), code})
	}
	writeFile(t, filepath.Join(dir, "labels.csv"), []byte(csv.String()))
	return srcs
}

// tbRegion is one 8-connected region of one class in a semantic mask.
type tbRegion struct {
	class  int
	area   int
	cx     float64 // mean of pixel center x
	border bool    // touches the frame
}

// tbComponents labels a semantic mask PNG's 8-connected regions of equal
// class (0 excluded; 255, ignore, is a region too): a nearest-neighbour turn may leave an edge
// pixel joined to its object by a corner only, and the objects of the
// fixture are at least 2 pixels apart.
func tbComponents(t *testing.T, p string) []tbRegion {
	t.Helper()
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	pm, ok := m.(*image.Paletted)
	if !ok {
		t.Fatalf("%s: not an indexed PNG", p)
	}
	b := pm.Bounds()
	w, h := b.Dx(), b.Dy()
	seen := make([]bool, w*h)
	var out []tbRegion
	for start := range seen {
		c := int(pm.Pix[(start/w)*pm.Stride+start%w])
		if seen[start] || c == 0 {
			continue
		}
		r := tbRegion{class: c}
		stack := []int{start}
		seen[start] = true
		sx := 0.0
		for len(stack) > 0 {
			i := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			x, y := i%w, i/w
			r.area++
			sx += float64(x) + 0.5
			if x == 0 || y == 0 || x == w-1 || y == h-1 {
				r.border = true
			}
			for _, n := range [][2]int{{x - 1, y}, {x + 1, y}, {x, y - 1}, {x, y + 1}, {x - 1, y - 1}, {x + 1, y - 1}, {x - 1, y + 1}, {x + 1, y + 1}} {
				if n[0] < 0 || n[1] < 0 || n[0] >= w || n[1] >= h {
					continue
				}
				j := n[1]*w + n[0]
				if !seen[j] && int(pm.Pix[n[1]*pm.Stride+n[0]]) == c {
					seen[j] = true
					stack = append(stack, j)
				}
			}
		}
		r.cx = sx / float64(r.area)
		out = append(out, r)
	}
	return out
}

// tbShown is what a copy's mask shows: the washers, the digits read left to
// right, and whether a region looks cut: one on the frame's edge whose area
// is under 60% of the largest region of its kind in the same copy (all
// washers, and all digits, are one size in the sources and one copy scales
// them alike; nearest-neighbour sampling alone moves a 3-pixel-wide bar's
// area by up to a quarter, so only larger losses are told apart), or any
// "ignore" pixel (the plan fills outside the source with background, so an
// ignore pixel is a dropped object the image still shows).
func tbShown(regs []tbRegion) (washers int, code string, cut bool) {
	maxW, maxD := 0, 0
	var digits []tbRegion
	for _, r := range regs {
		if r.class == 255 {
			continue
		}
		if r.class == 1 {
			washers++
			maxW = max(maxW, r.area)
		} else {
			digits = append(digits, r)
			maxD = max(maxD, r.area)
		}
	}
	for _, r := range regs {
		m := maxD
		if r.class == 1 {
			m = maxW
		}
		if r.class == 255 || r.border && float64(r.area) < 0.6*float64(m) {
			cut = true
		}
	}
	digits = slices.DeleteFunc(digits, func(r tbRegion) bool { return r.class == 255 })
	sort.Slice(digits, func(a, b int) bool { return digits[a].cx < digits[b].cx })
	for _, d := range digits {
		code += fmt.Sprint(d.class - 1)
	}
	return washers, code, cut
}

const tbPlan = `name: heavy
description: heavy crops and turns
geometry:
  cuts: {policy: redraw, least_shown: 0.5, tries: 20}
  moves:
    - do: rotate
      angle: [-30, 30]
    - do: crop
      area: [0.5, 0.8]
      to: [64, 48]
`

func tbRun(t *testing.T, accept bool) (string, []tbSource, manifest.Dataset, Summary) {
	t.Helper()
	tmp := t.TempDir()
	in := filepath.Join(tmp, "bins")
	srcs := tbFolder(t, in, 10)
	plan, err := ParsePlan("heavy.yaml", []byte(tbPlan))
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(tmp, "out")
	sum, err := Run(context.Background(), RunOptions{In: in, Out: out, Plan: plan, Copies: 12, Seed: 5, Workers: 3,
		SplitSpec: "train=0.8,val=0.1,test=0.1", AcceptStale: accept, Version: "test"})
	if err != nil {
		t.Fatal(err)
	}
	labVerify(t, out)
	d, err := manifest.ReadDataset(out)
	if err != nil {
		t.Fatal(err)
	}
	return out, srcs, *d, sum
}

func TestPlainColumnsStayTrue(t *testing.T) {
	out, srcs, d, sum := tbRun(t, false)
	bySrc := map[string]tbSource{}
	for _, s := range srcs {
		bySrc[s.id] = s
	}
	copies := 0
	err := manifest.ReadManifest(out, func(r *manifest.Record) error {
		washers, code, cut := tbShown(tbComponents(t, filepath.Join(out, r.Mask)))
		if got := r.Targets["washers"]; got.IsStr || got.Num != float64(washers) {
			t.Errorf("%s: washers %v, its mask shows %d", r.ID, got, washers)
		}
		if got := r.Targets["bin_code"]; !got.IsStr || got.Str != code {
			t.Errorf("%s: bin_code %v, its mask reads %q", r.ID, got, code)
		}
		if l := r.Targets["lighting"]; !l.IsStr || (l.Str != "even" && l.Str != "side") {
			t.Errorf("%s: lighting %v not carried", r.ID, l)
		}
		if r.Lineage == nil {
			return nil
		}
		copies++
		src := bySrc[r.Lineage.Source]
		// The undeclared column is carried only into copies that kept every
		// object whole: all washers and all three digits still there, none
		// cut by the frame.
		hc, ok := r.Targets["hand_count"]
		if !ok || hc.Num != float64(src.washers) {
			t.Errorf("%s: hand_count %v, its source's is %d", r.ID, hc, src.washers)
		}
		if len(r.StaleTargets) > 0 {
			t.Errorf("%s: stale_targets %v without --accept-stale-columns", r.ID, r.StaleTargets)
		}
		if washers != src.washers || len(code) != 3 || cut {
			t.Errorf("%s carries the undeclared hand_count %v, but its mask shows %d washers (source %d), code %q, cut %v", r.ID, hc, washers, src.washers, code, cut)
		}
		if code != src.code {
			t.Errorf("%s: its mask reads %q, its source's code is %q (a turn within 30° keeps the order)", r.ID, code, src.code)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	fb := d.Augment.Fallbacks["train"]
	if fb == nil || fb.Planned != 8*12 || fb.Written+fb.NotWritten != fb.Planned || fb.Written != copies {
		t.Fatalf("fallbacks %+v; %d copies in the manifest, 8 sources × 12 planned", fb, copies)
	}
	if fb.NotWritten == 0 || fb.Redrawn == 0 {
		t.Errorf("heavy crops and turns should make some copies redrawn and some not written: %+v", fb)
	}
	if !slicesEq(d.Augment.UndeclaredColumns, []string{"hand_count"}) || !slicesEq(d.Augment.ImageColumns, []string{"lighting"}) {
		t.Errorf("dataset.json augment: undeclared %v, image %v", d.Augment.UndeclaredColumns, d.Augment.ImageColumns)
	}
	if sum.Fallbacks["train"].NotWritten != fb.NotWritten || len(sum.NotWritten) == 0 || !strings.Contains(sum.NotWritten[0], "not written") {
		t.Errorf("summary: %+v, notes %v", sum.Fallbacks["train"], sum.NotWritten)
	}
	t.Logf("done-when scenario: %+v", *fb)
}

// With --accept-stale-columns copies that lost, cut or dropped objects are
// written, and exactly those carry stale_targets ["hand_count"]: a copy
// without the mark shows every washer of its source whole.
func TestPlainColumnsAcceptStale(t *testing.T) {
	out, srcs, d, _ := tbRun(t, true)
	bySrc := map[string]tbSource{}
	for _, s := range srcs {
		bySrc[s.id] = s
	}
	stale, fresh := 0, 0
	manifest.ReadManifest(out, func(r *manifest.Record) error {
		if r.Lineage == nil {
			return nil
		}
		washers, code, cut := tbShown(tbComponents(t, filepath.Join(out, r.Mask)))
		if got := r.Targets["washers"]; got.Num != float64(washers) {
			t.Errorf("%s: washers %v, its mask shows %d", r.ID, got, washers)
		}
		if got := r.Targets["bin_code"]; got.Str != code {
			t.Errorf("%s: bin_code %v, its mask reads %q", r.ID, got, code)
		}
		src := bySrc[r.Lineage.Source]
		if len(r.StaleTargets) > 0 {
			stale++
			if !slicesEq(r.StaleTargets, []string{"hand_count"}) {
				t.Errorf("%s: stale_targets %v", r.ID, r.StaleTargets)
			}
			return nil
		}
		fresh++
		if washers != src.washers || cut {
			t.Errorf("%s: no stale mark, but its mask shows %d washers (source %d), cut %v", r.ID, washers, src.washers, cut)
		}
		return nil
	})
	fb := d.Augment.Fallbacks["train"]
	if stale == 0 || fresh == 0 || fb.Stale != stale || !d.Augment.AcceptStale {
		t.Errorf("stale %d, fresh %d, fallbacks %+v, accept %v", stale, fresh, fb, d.Augment.AcceptStale)
	}
	t.Logf("--accept-stale-columns: %+v", *fb)
}

func slicesEq(a, b []string) bool {
	return strings.Join(a, "\x00") == strings.Join(b, "\x00") && len(a) == len(b)
}

// TestPlainColumnsResume: a run interrupted after a few sources and resumed
// writes the bytes of an uninterrupted run, although copies that were not
// written leave gaps in the records (resume finds whole sources by id), and
// dataset.json's fallbacks count the kept sources too.
func TestPlainColumnsResume(t *testing.T) {
	tmp := t.TempDir()
	in := filepath.Join(tmp, "bins")
	tbFolder(t, in, 10)
	plan, err := ParsePlan("heavy.yaml", []byte(tbPlan))
	if err != nil {
		t.Fatal(err)
	}
	opts := func(out string) RunOptions {
		return RunOptions{In: in, Out: out, Plan: plan, Copies: 12, Seed: 5, Workers: 1,
			SplitSpec: "train=0.8,val=0.1,test=0.1", Version: "test"}
	}
	ref := filepath.Join(tmp, "ref")
	if _, err := Run(context.Background(), opts(ref)); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(tmp, "out")
	ctx, cancel := context.WithCancel(context.Background())
	o := opts(out)
	o.Progress = func(done, total int) {
		if done >= 4 {
			cancel()
		}
	}
	if _, err := Run(ctx, o); err == nil {
		t.Fatal("the interrupted run did not stop")
	}
	o = opts(out)
	o.Resume = true
	sum, err := Run(context.Background(), o)
	if err != nil {
		t.Fatal(err)
	}
	if sum.Resumed == 0 {
		t.Fatalf("nothing was kept from the interrupted run")
	}
	a, b := labTree(t, ref), labTree(t, out)
	for p, x := range a {
		if p == manifest.RunMarkerFile {
			continue
		}
		if string(b[p]) != string(x) {
			t.Errorf("%s differs from an uninterrupted run's", p)
		}
	}
	if len(a) != len(b) {
		t.Errorf("%d files, an uninterrupted run has %d", len(b), len(a))
	}
}
