package main

import (
	"encoding/json"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// cropPlan crops hard; cuts.policy keep never drops an object, so a mask
// pixel "ignore" (255) in a copy could only be an erased object (the plan
// fills outside the source with background).
const cropPlan = `name: crops
description: hard crops of bin labels
geometry:
  cuts: {policy: keep, tries: 20}
  moves:
    - do: crop
      area: [0.35, 0.8]
      to: [128, 48]
`

// TestBinLabelsReadingsMatchGlyphsShown (issue 12): bin-labels augmented
// with hard crops gives no copy whose reading differs from the glyphs its
// image shows. Checked from the copy's PNGs with the standard library's
// decoder, not from its record: the characters shown are the character
// instances present in the copy's instance mask, read left to right by the
// mean x of their pixels; each must be whole (a character on the frame's
// edge keeping under 60% of the area ratio of the copy's best-kept character
// is cut: one crop scales all characters alike); and no mask pixel may be
// "ignore". Which character an instance is comes from the source's record
// (generate's plan: the masks give one class to every character).
func TestBinLabelsReadingsMatchGlyphsShown(t *testing.T) {
	root := t.TempDir()
	in, out := filepath.Join(root, "bins"), filepath.Join(root, "aug")
	wantCode(t, exitOK, "generate", "--preset", "bin-labels", "--count", "30", "--seed", "3", "--quiet", "--out", in)
	plan := writePlan(t, root, "crops.yaml", cropPlan)
	stdout, _ := wantCode(t, exitOK, "augment", "--in", in, "--out", out, "--plan", plan, "--copies", "10", "--json")
	var j augmentJSON
	if err := json.Unmarshal([]byte(stdout), &j); err != nil {
		t.Fatal(err)
	}
	wantCode(t, exitOK, "verify", out)
	recs := readRecords(t, out)
	byID := map[string]*manifest.Record{}
	for _, r := range recs {
		byID[r.ID] = r
	}
	areas := func(p string) (map[int]int, map[int]float64, map[int]bool) {
		f, err := os.Open(filepath.Join(out, p))
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		m, err := png.Decode(f)
		if err != nil {
			t.Fatal(err)
		}
		g := m.(*image.Gray16)
		w, h := g.Bounds().Dx(), g.Bounds().Dy()
		area, sx, edge := map[int]int{}, map[int]float64{}, map[int]bool{}
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				id := int(g.Gray16At(x, y).Y)
				if id == 0 {
					continue
				}
				area[id]++
				sx[id] += float64(x) + 0.5
				if x == 0 || y == 0 || x == w-1 || y == h-1 {
					edge[id] = true
				}
			}
		}
		for id := range sx {
			sx[id] /= float64(area[id])
		}
		return area, sx, edge
	}
	copies, checked := 0, 0
	for _, r := range recs {
		if r.Lineage == nil {
			continue
		}
		copies++
		src := byID[r.Lineage.Source]
		glyph := map[int]string{}
		for _, o := range src.Objects {
			if o.ClassName == "character" {
				glyph[o.Instance] = o.Glyph
			}
		}
		srcArea, _, _ := areas(src.Instances)
		area, cx, edge := areas(r.Instances)
		var shown []int
		best := 0.0
		for id := range area {
			if glyph[id] != "" {
				shown = append(shown, id)
				best = max(best, float64(area[id])/float64(srcArea[id]))
			}
		}
		sort.Slice(shown, func(a, b int) bool { return cx[shown[a]] < cx[shown[b]] })
		var read strings.Builder
		for _, id := range shown {
			read.WriteString(glyph[id])
			if ratio := float64(area[id]) / float64(srcArea[id]); edge[id] && ratio < 0.6*best {
				t.Errorf("%s: character %q (instance %d) is cut by the frame: %.2f of the area ratio of the best-kept one", r.ID, glyph[id], id, ratio/best)
			}
		}
		if got := r.Targets["code"]; !got.IsStr || got.Str != read.String() {
			t.Errorf("%s: code %v, its masks show %q", r.ID, got, read.String())
		}
		mf, err := os.Open(filepath.Join(out, r.Mask))
		if err != nil {
			t.Fatal(err)
		}
		mm, err := png.Decode(mf)
		mf.Close()
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range mm.(*image.Paletted).Pix {
			if v == manifest.IgnoreID {
				t.Fatalf("%s: an ignore pixel in the mask: an object was erased", r.ID)
			}
		}
		if read.Len() < len(glyph) {
			checked++ // a copy whose crop left characters out
		}
	}
	fb := j.Fallbacks["train"]
	if fb == nil || fb.Written != copies || fb.Written+fb.NotWritten != fb.Planned || fb.Redrawn == 0 {
		t.Fatalf("--json fallbacks %+v; %d copies written", fb, copies)
	}
	if checked == 0 {
		t.Errorf("no copy left a character out; the crops are too mild to test readings")
	}
	t.Logf("bin-labels, 10 hard crops per train source: %+v; %d copies read fewer characters than their source", *fb, checked)
}
