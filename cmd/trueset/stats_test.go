package main

import (
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
	"github.com/trueset/trueset/manifest/inspect"
)

// statsGenerate renders n samples of a preset into a new folder.
func statsGenerate(t *testing.T, preset string, n int) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), preset)
	wantCode(t, exitOK, "generate", "--preset", preset, "--out", dir, "--count", fmt.Sprint(n), "--quiet")
	return dir
}

// statsJSON runs `trueset stats --json` and decodes it.
func statsJSON(t *testing.T, args ...string) (*inspect.Stats, string) {
	t.Helper()
	out, _ := wantCode(t, exitOK, append([]string{"stats", "--json"}, args...)...)
	var st inspect.Stats
	if err := json.Unmarshal([]byte(out), &st); err != nil {
		t.Fatalf("stats --json is not one JSON document: %v\n%s", err, out)
	}
	return &st, out
}

// statsDecode decodes a dataset PNG with the standard library's decoder.
func statsDecode(t *testing.T, dir, rel string) image.Image {
	t.Helper()
	f, err := os.Open(filepath.Join(dir, rel))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", rel, err)
	}
	return m
}

// The figures of `stats --json` against recounts done here: split counts
// against the manifest; class pixels against the masks decoded with
// image/png (the standard library's PNG decoder, ISO/IEC 15948); the
// normalization against the two-pass mean and population variance over the
// train images; the median-frequency weights against Eigen & Fergus's
// definition applied to the recount. Output equal for 1 and 3 workers.
func TestStatsJSONMatchesRecount(t *testing.T) {
	for _, preset := range []string{gen.DefaultPreset, "tabletop-dice"} {
		t.Run(preset, func(t *testing.T) {
			dir := statsGenerate(t, preset, 240)
			st, out1 := statsJSON(t, dir, "-j", "1")
			_, out3 := statsJSON(t, dir, "-j", "3")
			if out1 != out3 {
				t.Errorf("stats --json differs between 1 and 3 workers")
			}
			d := readDataset(t, dir)
			recs := readRecords(t, dir)
			if st.Samples != len(recs) {
				t.Errorf("samples %d, manifest has %d", st.Samples, len(recs))
			}
			counts := map[string]int{}
			for _, r := range recs {
				counts[r.Split]++
			}
			var names []string
			for _, s := range st.PerSplit {
				names = append(names, s.Name)
				if s.Samples != counts[s.Name] || s.Groups != counts[s.Name] {
					t.Errorf("split %s: %d samples %d groups, manifest has %d (one group per generated sample)", s.Name, s.Samples, s.Groups, counts[s.Name])
				}
			}
			if !slices.Equal(names, d.Splits.Names) {
				t.Errorf("splits %v, dataset.json %v", names, d.Splits.Names)
			}

			channels := st.Pixels.Channels
			var values [3][]float64
			pix := map[int]int64{}
			present := map[int]int64{}
			for _, r := range recs {
				if r.Split != "train" {
					continue
				}
				img := statsDecode(t, dir, r.Image)
				b := img.Bounds()
				for y := b.Min.Y; y < b.Max.Y; y++ {
					for x := b.Min.X; x < b.Max.X; x++ {
						if channels == 1 {
							values[0] = append(values[0], float64(color.GrayModel.Convert(img.At(x, y)).(color.Gray).Y))
							continue
						}
						c := color.NRGBAModel.Convert(img.At(x, y)).(color.NRGBA)
						values[0] = append(values[0], float64(c.R))
						values[1] = append(values[1], float64(c.G))
						values[2] = append(values[2], float64(c.B))
					}
				}
				mask := statsDecode(t, dir, r.Mask).(*image.Paletted)
				here := map[int]int64{}
				for _, v := range mask.Pix {
					if v != manifest.IgnoreID {
						here[int(v)]++
					}
				}
				for c, n := range here {
					pix[c] += n
					present[c] += int64(len(mask.Pix))
				}
			}
			for c := 0; c < channels; c++ {
				mean, sq := 0.0, 0.0
				for _, v := range values[c] {
					mean += v
				}
				mean /= float64(len(values[c]))
				for _, v := range values[c] {
					sq += (v - mean) * (v - mean)
				}
				std := math.Sqrt(sq / float64(len(values[c])))
				if st.Pixels.Count != int64(len(values[c])) || math.Abs(st.Pixels.Mean[c]-mean) > 1e-9*mean || math.Abs(st.Pixels.Std[c]-std) > 1e-9*std {
					t.Errorf("channel %d: count %d mean %.12g std %.12g; two-pass over %d values: %.12g %.12g",
						c, st.Pixels.Count, st.Pixels.Mean[c], st.Pixels.Std[c], len(values[c]), mean, std)
				}
			}
			var freqs []float64
			for _, c := range d.Classes {
				if pix[c.ID] > 0 {
					freqs = append(freqs, float64(pix[c.ID])/float64(present[c.ID]))
				}
			}
			sort.Float64s(freqs)
			med := freqs[len(freqs)/2]
			if len(freqs)%2 == 0 {
				med = (freqs[len(freqs)/2-1] + freqs[len(freqs)/2]) / 2
			}
			if len(st.Classes) != len(d.Classes) {
				t.Fatalf("%d classes, dataset.json has %d", len(st.Classes), len(d.Classes))
			}
			for _, c := range st.Classes {
				if c.Pixels != pix[c.ID] {
					t.Errorf("class %s: %d pixels, the masks have %d", c.Name, c.Pixels, pix[c.ID])
				}
				want := med / (float64(pix[c.ID]) / float64(present[c.ID]))
				if math.Abs(c.WeightMedian-want) > 1e-12*want {
					t.Errorf("class %s: median-frequency weight %v, recount %v", c.Name, c.WeightMedian, want)
				}
				objects := 0
				for _, r := range recs {
					for _, o := range r.Objects {
						if o.Class == c.ID {
							objects++
						}
					}
				}
				if c.Objects != objects {
					t.Errorf("class %s: %d objects, records have %d", c.Name, c.Objects, objects)
				}
			}
		})
	}
}

// plantCopy copies the image of record from over the image of record to and
// fixes to's SHA-256 and the manifest checksum, so the set stays
// self-consistent (verify passes: the masks are not compared with the
// image's pixels). alter, if set, changes the copy first.
func plantCopy(t *testing.T, dir string, from, to *manifest.Record, alter func(*image.Gray)) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, from.Image))
	if err != nil {
		t.Fatal(err)
	}
	if alter != nil {
		m := statsDecode(t, dir, from.Image)
		g := image.NewGray(m.Bounds())
		draw.Draw(g, g.Bounds(), m, image.Point{}, draw.Src)
		alter(g)
		var buf strings.Builder
		if err := png.Encode(&buf, g); err != nil {
			t.Fatal(err)
		}
		b = []byte(buf.String())
	}
	if err := os.WriteFile(filepath.Join(dir, to.Image), b, 0o644); err != nil {
		t.Fatal(err)
	}
	editRecord(t, dir, to.ID, func(r *manifest.Record) { r.SHA256["image"] = manifest.SHA256Hex(b) })
	refreshManifestSum(t, dir)
}

// A train image copied over a test image is reported, and only that pair:
// once byte for byte (distance 0, identical by the records' SHA-256), once
// with noise ±2 (a near duplicate; dHash distance ≤ 4, Krawetz's dHash from
// memory). The default preset has no other pair at threshold 4 here.
func TestLeakPlantedNearDuplicate(t *testing.T) {
	dir := statsGenerate(t, gen.DefaultPreset, 200)
	recs := readRecords(t, dir)
	var train, test, val []*manifest.Record
	for _, r := range recs {
		switch r.Split {
		case "train":
			train = append(train, r)
		case "test":
			test = append(test, r)
		case "val":
			val = append(val, r)
		}
	}
	st, _ := statsJSON(t, dir)
	if st.Leakage.PairsFound != 0 {
		t.Fatalf("fresh set already has pairs: %+v", st.Leakage.Pairs)
	}
	plantCopy(t, dir, train[3], test[5], nil)
	r := rand.New(rand.NewPCG(9, 9))
	plantCopy(t, dir, train[10], val[2], func(g *image.Gray) {
		for i, v := range g.Pix {
			g.Pix[i] = uint8(max(0, min(255, int(v)+r.IntN(5)-2)))
		}
	})
	wantCode(t, exitOK, "verify", dir)
	st, _ = statsJSON(t, dir)
	got := map[[2]string]inspect.LeakPair{}
	for _, p := range st.Leakage.Pairs {
		k := [2]string{p.A, p.B}
		if p.B < p.A {
			k = [2]string{p.B, p.A}
		}
		got[k] = p
	}
	pairKey := func(a, b string) [2]string {
		if b < a {
			a, b = b, a
		}
		return [2]string{a, b}
	}
	exact, ok := got[pairKey(train[3].ID, test[5].ID)]
	if !ok || exact.Distance != 0 || !exact.Identical {
		t.Errorf("exact copy %s → %s: got %+v (found %v)", train[3].ID, test[5].ID, exact, ok)
	}
	near, ok := got[pairKey(train[10].ID, val[2].ID)]
	if !ok || near.Distance > 4 || near.Identical {
		t.Errorf("noisy copy %s → %s: got %+v (found %v)", train[10].ID, val[2].ID, near, ok)
	}
	if len(got) != 2 || st.Leakage.PairsFound != 2 {
		t.Errorf("want exactly the 2 planted pairs, got %d: %+v", st.Leakage.PairsFound, st.Leakage.Pairs)
	}
	t.Logf("planted: exact copy distance %d, noise ±2 copy distance %d", exact.Distance, near.Distance)
	if !slices.ContainsFunc(st.Warnings, func(w string) bool { return strings.Contains(w, "2 near-duplicate image pairs across splits") }) {
		t.Errorf("no leakage warning in %q", st.Warnings)
	}
	// A pair within one split is not leakage.
	plantCopy(t, dir, train[20], train[21], nil)
	if st2, _ := statsJSON(t, dir); st2.Leakage.PairsFound != 2 {
		t.Errorf("a duplicate inside train changed the pairs: %+v", st2.Leakage.Pairs)
	}
	// Threshold 0 keeps only the exact copy.
	if st0, _ := statsJSON(t, dir, "--threshold", "0"); st0.Leakage.Threshold != 0 || st0.Leakage.PairsFound != 1+b2i(near.Distance == 0) {
		t.Errorf("--threshold 0: %+v", st0.Leakage)
	}
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// Fresh sets of 500 samples per preset. A 64-bit dHash sees a 9×8
// thumbnail, so on tabletop-dice and bin-labels different scenes with the
// same coarse layout (one die on the same felt gradient; a label's text
// block in the same place) fall within 4 bits: those are the method's
// candidates, counted here against a recount from the images. Confirmation
// at full size (mean absolute gray difference ≤ inspect.ConfirmMAD) must
// leave no pair: a fresh set has no real near-duplicates across splits.
func TestLeakFreshSetsNoFalseHitDefault(t *testing.T) {
	for _, preset := range []string{gen.DefaultPreset, "tabletop-dice", "bin-labels"} {
		dir := statsGenerate(t, preset, 500)
		st, _ := statsJSON(t, dir)
		recs := readRecords(t, dir)
		hs := make([]uint64, len(recs))
		for i, r := range recs {
			hs[i] = inspect.DHash(statsDecode(t, dir, r.Image))
		}
		nearest, within := 64, 0
		for i := range hs {
			for j := i + 1; j < len(hs); j++ {
				if recs[i].Split != recs[j].Split {
					d := inspect.Hamming(hs[i], hs[j])
					nearest = min(nearest, d)
					if d <= 4 {
						within++
					}
				}
			}
		}
		t.Logf("%s, 500 samples: %d candidates within 4 bits (recount %d), %d confirmed; nearest cross-split distance %d",
			preset, st.Leakage.Candidates, within, st.Leakage.PairsFound, nearest)
		if st.Leakage.Candidates != within {
			t.Errorf("%s: %d candidates reported, %d pairs within 4 bits recounted", preset, st.Leakage.Candidates, within)
		}
		if st.Leakage.PairsFound != 0 {
			t.Errorf("%s: false hits after confirmation %+v", preset, st.Leakage.Pairs)
		}
	}
}

// dHash on rendered images of every preset (Krawetz's dHash, from memory):
// a copy with noise ±2 is within 4 bits for nearly every image; unrelated
// images differ in far more than 10 bits on average. A 1-pixel shift is
// measured and logged: at 64 pixels it is 1/7 of a thumbnail cell, and a
// typical copy stays within 4 bits but not every one does.
func TestDHashGeneratedImages(t *testing.T) {
	for _, preset := range []string{gen.DefaultPreset, "tabletop-dice", "bin-labels"} {
		dir := statsGenerate(t, preset, 120)
		recs := readRecords(t, dir)
		r := rand.New(rand.NewPCG(11, 12))
		var noise, shift []int
		var hs []uint64
		for _, rec := range recs {
			m := statsDecode(t, dir, rec.Image)
			b := m.Bounds()
			h := inspect.DHash(m)
			hs = append(hs, h)
			n := image.NewRGBA(b)
			s := image.NewRGBA(b)
			draw.Draw(n, b, m, b.Min, draw.Src)
			for i := range n.Pix {
				if i%4 != 3 {
					n.Pix[i] = uint8(max(0, min(255, int(n.Pix[i])+r.IntN(5)-2)))
				}
			}
			for y := b.Min.Y; y < b.Max.Y; y++ {
				for x := b.Min.X; x < b.Max.X; x++ {
					s.Set(x, y, m.At(max(b.Min.X, x-1), y))
				}
			}
			noise = append(noise, inspect.Hamming(h, inspect.DHash(n)))
			shift = append(shift, inspect.Hamming(h, inspect.DHash(s)))
		}
		sum, cnt := 0, 0
		for i := range hs {
			for j := i + 1; j < len(hs); j++ {
				sum += inspect.Hamming(hs[i], hs[j])
				cnt++
			}
		}
		sort.Ints(noise)
		sort.Ints(shift)
		n := len(noise)
		q := func(xs []int, p float64) int { return xs[min(n-1, int(p*float64(n)))] }
		unrelated := float64(sum) / float64(cnt)
		t.Logf("%s: noise ±2 median %d p90 %d max %d; 1-px shift median %d p90 %d max %d; unrelated mean %.1f",
			preset, q(noise, 0.5), q(noise, 0.9), noise[n-1], q(shift, 0.5), q(shift, 0.9), shift[n-1], unrelated)
		if q(noise, 0.9) > 4 {
			t.Errorf("%s: noise ±2 moved more than 10%% of the images by > 4 bits: %v", preset, noise)
		}
		if q(shift, 0.5) > 4 {
			t.Errorf("%s: a 1-pixel shift moved the median image by > 4 bits: %v", preset, shift)
		}
		if unrelated <= 10 {
			t.Errorf("%s: unrelated images: mean distance %.1f, want > 10", preset, unrelated)
		}
	}
}

// The text report has its tables and the normalization formula; bad flags
// are usage errors (exit 2); a folder that is not a dataset fails (exit 1).
func TestStatsTextAndUsage(t *testing.T) {
	dir := statsGenerate(t, gen.DefaultPreset, 60)
	out, _ := wantCode(t, exitOK, "stats", dir)
	for _, want := range []string{"splits:", "normalization over split train", "(x − ", "population std",
		"weight median-f", "objects (all splits", "targets (split train", "leakage (64-bit dHash", "parts"} {
		if !strings.Contains(out, want) {
			t.Errorf("text report lacks %q:\n%s", want, out)
		}
	}
	wantCode(t, exitUsage, "stats")
	wantCode(t, exitUsage, "stats", dir, "--split", "nope")
	wantCode(t, exitUsage, "stats", dir, "--threshold", "40")
	wantCode(t, exitUsage, "stats", dir, "--threshold", "-1")
	wantCode(t, exitFailure, "stats", t.TempDir())
	// Stats on another split.
	st, _ := statsJSON(t, dir, "--split", "val")
	if st.Pixels.Split != "val" || st.Targets[0].Split != "val" {
		t.Errorf("--split val: %+v", st.Pixels)
	}
	// A missing image names its record.
	recs := readRecords(t, dir)
	if err := os.Remove(filepath.Join(dir, recs[7].Image)); err != nil {
		t.Fatal(err)
	}
	_, stderr := wantCode(t, exitFailure, "stats", dir)
	if !strings.Contains(stderr, "record "+recs[7].ID) {
		t.Errorf("stderr %q does not name record %s", stderr, recs[7].ID)
	}
}

// Stats works on augmented sets, from a generated set and from a plain
// labeled folder: copies stay in their source's split (no group spans
// splits), ignore pixels are counted apart.
func TestStatsAugmentedSets(t *testing.T) {
	src := statsGenerate(t, gen.DefaultPreset, 80)
	aug := filepath.Join(t.TempDir(), "aug")
	wantCode(t, exitOK, "augment", "--in", src, "--out", aug, "--plan", filepath.Join("..", "..", "testdata", "plans", "every-step.yaml"), "--copies", "2", "--quiet")
	plain := filepath.Join(t.TempDir(), "plain")
	wantCode(t, exitOK, "augment", "--in", filepath.Join("..", "..", "testdata", "plain"), "--out", plain, "--plan", filepath.Join("..", "..", "testdata", "plans", "upright.yaml"), "--copies", "2", "--quiet")
	for _, dir := range []string{aug, plain} {
		st, _ := statsJSON(t, dir)
		recs := readRecords(t, dir)
		if st.Samples != len(recs) {
			t.Errorf("%s: %d samples, manifest %d", dir, st.Samples, len(recs))
		}
		if len(st.Leakage.GroupsSpanned) != 0 {
			t.Errorf("%s: groups span splits: %v", dir, st.Leakage.GroupsSpanned)
		}
		var ignore int64
		for _, r := range recs {
			if r.Split != "train" {
				continue
			}
			for _, v := range statsDecode(t, dir, r.Mask).(*image.Paletted).Pix {
				if v == manifest.IgnoreID {
					ignore++
				}
			}
		}
		if st.IgnorePixels != ignore {
			t.Errorf("%s: %d ignore pixels, masks have %d", dir, st.IgnorePixels, ignore)
		}
		t.Logf("%s: %d records, %d groups in train, %d ignore pixels, %d leak pairs, warnings %q", filepath.Base(dir), st.Samples, st.PerSplit[0].Groups, ignore, st.Leakage.PairsFound, st.Warnings)
		wantCode(t, exitOK, "stats", dir)
	}
}

// `stats --json` has the shape of every --json summary: "command", "dir",
// "samples", and the split table under "splits" exactly as dataset.json
// holds it (names, spec, ratios, counts, stratify, strata as a list,
// thin_strata), not nested one level deeper; no "records", "dataset" or
// "strata" at the top. Every key is spelled the American way.
func TestStatsJSONShape(t *testing.T) {
	dir := statsGenerate(t, "tabletop-dice", 60)
	_, out := statsJSON(t, dir)
	var top map[string]json.RawMessage
	if err := json.Unmarshal([]byte(out), &top); err != nil {
		t.Fatal(err)
	}
	if string(top["command"]) != `"stats"` {
		t.Errorf(`"command" is %s, want "stats"`, top["command"])
	}
	if want, _ := json.Marshal(dir); string(top["dir"]) != string(want) {
		t.Errorf(`"dir" is %s, want %s`, top["dir"], want)
	}
	if string(top["samples"]) != "60" {
		t.Errorf(`"samples" is %s, want 60`, top["samples"])
	}
	for _, old := range []string{"records", "dataset", "strata"} {
		if _, ok := top[old]; ok {
			t.Errorf("stats --json still has the top-level key %q", old)
		}
	}
	raw, err := os.ReadFile(filepath.Join(dir, manifest.DatasetFile))
	if err != nil {
		t.Fatal(err)
	}
	var ds map[string]any
	if err := json.Unmarshal(raw, &ds); err != nil {
		t.Fatal(err)
	}
	var got any
	if err := json.Unmarshal(top["splits"], &got); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, ds["splits"]) {
		t.Errorf("stats --json splits\n%s\ndiffer from dataset.json's\n%v", top["splits"], ds["splits"])
	}
	sp, _ := got.(map[string]any)
	if _, ok := sp["strata"].([]any); !ok || len(sp["strata"].([]any)) == 0 {
		t.Errorf("splits.strata is %T, want the list of strata", sp["strata"])
	}
	for _, k := range []string{"names", "spec", "ratios", "counts", "stratify", "strata"} {
		if _, ok := sp[k]; !ok {
			t.Errorf("splits lacks %q", k)
		}
	}
	var doc any
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	british := regexp.MustCompile(`(?i)colour|grey|centre|normalis|neighbour`)
	var walk func(path string, v any)
	walk = func(path string, v any) {
		switch v := v.(type) {
		case map[string]any:
			for k, e := range v {
				if british.MatchString(k) {
					t.Errorf("key %s.%s is not American spelling", path, k)
				}
				walk(path+"."+k, e)
			}
		case []any:
			for i, e := range v {
				walk(fmt.Sprintf("%s.%d", path, i), e)
			}
		}
	}
	walk("", doc)
}

// Text and JSON say what a target is the same way the report does:
// "numeric" or "text" (never "number", a recipe target kind); figures are
// rounded; counts agree with their nouns.
func TestStatsTextTargetTypesAndPlurals(t *testing.T) {
	dir := statsGenerate(t, "bin-labels", 40)
	out, _ := wantCode(t, exitOK, "stats", dir)
	st, _ := statsJSON(t, dir)
	_, table, _ := strings.Cut(out, "\ntargets (split train")
	table, _, _ = strings.Cut(table, "\n\n")
	if !strings.Contains(table, " type ") || strings.Contains(table, "number") || strings.Contains(table, " kind ") {
		t.Errorf("targets table:\n%s", table)
	}
	for _, tg := range st.Targets {
		want := "numeric"
		if !tg.Numeric {
			want = "text"
		}
		if !regexp.MustCompile(`(?m)^\s*` + regexp.QuoteMeta(tg.Name) + `\s+` + want + `\s`).MatchString(table) {
			t.Errorf("target %s is not shown as %s:\n%s", tg.Name, want, table)
		}
	}
	if noise := regexp.MustCompile(`\d\.\d{5,}`).FindString(out); noise != "" {
		t.Errorf("stats text prints %s unrounded", noise)
	}
	if m := regexp.MustCompile(`\b1 (candidates|images|pairs|samples|groups|values)\b`).FindString(out); m != "" {
		t.Errorf("stats text says %q", m)
	}
	if !regexp.MustCompile(`(\d+) candidates?,`).MatchString(out) {
		t.Errorf("no candidate count in:\n%s", out)
	}
}
