package gen

import (
	"bytes"
	"context"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"

	"github.com/trueset/trueset/internal/yamlnode"
	"github.com/trueset/trueset/manifest"
	"github.com/trueset/trueset/manifest/inspect"
)

// The instruments' tests read back what was planted from the written files
// and hold it to bounds from the binomial distribution. Each bound uses the
// normal approximation to the binomial (de Moivre–Laplace): a count of
// successes in n trials of probability p lies within z·√(n·p·(1−p)) of n·p,
// here with z = 4 (two-sided tail ≈ 6·10⁻⁵). The seeds are fixed, so a
// test gives the same answer every run; the bound says how far a correct
// generator may stray, so a broken one (a wrong share, noise in the wrong
// split) falls outside it.
const zBound = 4

func binomialWithin(t *testing.T, what string, got, n int, p float64) {
	t.Helper()
	mean := float64(n) * p
	sd := math.Sqrt(float64(n) * p * (1 - p))
	if math.Abs(float64(got)-mean) > zBound*sd {
		t.Errorf("%s: %d of %d, expected %.1f ± %.1f (z = %d, p = %.4f)", what, got, n, mean, zBound*sd, zBound, p)
	}
}

func runRecipe(t *testing.T, r *Recipe, count, workers int, seed uint64, shard, shards int) string {
	t.Helper()
	dir := t.TempDir()
	if _, err := Run(context.Background(), RunOptions{Recipe: r, Out: dir, Count: count, Seed: seed, Workers: workers, Shard: shard, Shards: shards, Version: "test"}); err != nil {
		t.Fatal(err)
	}
	return dir
}

func readRecords(t *testing.T, dir string) []*manifest.Record {
	t.Helper()
	var out []*manifest.Record
	if err := manifest.ReadManifest(dir, func(r *manifest.Record) error { out = append(out, r); return nil }); err != nil {
		t.Fatal(err)
	}
	return out
}

func loadExample(t *testing.T, name string) *Recipe {
	t.Helper()
	r, err := LoadRecipe(filepath.Join("..", "examples", "instruments", name))
	if err != nil {
		t.Fatal(err)
	}
	return r
}

func verifyProblems(t *testing.T, dir string) []manifest.Problem {
	t.Helper()
	var ps []manifest.Problem
	if _, err := manifest.Verify(dir, func(p manifest.Problem) { ps = append(ps, p) }); err != nil {
		t.Fatal(err)
	}
	return ps
}

// rewriteRecords applies edit to the records of dir and writes manifest.jsonl
// back with dataset.json's checksum updated, so that only the edited labels
// can fail verify.
func rewriteRecords(t *testing.T, dir string, edit func(recs []*manifest.Record)) {
	t.Helper()
	recs := readRecords(t, dir)
	edit(recs)
	var b bytes.Buffer
	for _, r := range recs {
		line, err := manifest.MarshalRecord(r)
		if err != nil {
			t.Fatal(err)
		}
		b.Write(line)
		b.WriteByte('\n')
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.ManifestFile), b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	d.ManifestSHA256 = manifest.SHA256Hex(b.Bytes())
	db, err := manifest.MarshalDataset(d)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), db, 0o644); err != nil {
		t.Fatal(err)
	}
}

func hasProblem(ps []manifest.Problem, id, check string) bool {
	for _, p := range ps {
		if p.ID == id && p.Check == check {
			return true
		}
	}
	return false
}

// A recipe on which every corruption always finds something to corrupt:
// every sample has letters, digits and a non-empty reading.
const mislabelRecipe = `name: shelf-tags
canvas: {width: 96, height: 28}
background: {intensity: 20}
classes:
  - {name: letter, color: [230, 25, 75]}
  - {name: digit, color: [60, 180, 75]}
layers:
  - layout: {kind: row, spacing: [1, 2]}
    objects:
      - class: letter
        glyph: {font: gomonobold, chars: ABCDE}
        count: [1, 3]
        size: [18, 20]
        intensity: 230
      - class: digit
        glyph: {font: gomonobold, chars: "123"}
        count: [1, 2]
        size: [18, 20]
        intensity: 200
targets:
  - {name: code, kind: text}
  - {name: letters, kind: count, classes: [letter]}
  - {name: digits, kind: count, classes: [digit]}
split: {ratios: "train=0.5,val=0.25,test=0.25"}
mislabel:
  share: 0.3
  kinds:
    - {kind: swap-class, odds: 2}
    - {kind: mask-edge, by: [1, 2]}
    - {kind: box-jitter, by: [1, 3]}
    - {kind: target-off, targets: [letters, digits], by: [1, 2]}
    - {kind: char-swap}
`

// Planted noise: the share of noisy train records is binomial(n, share),
// each kind binomial(n, share·odds/Σodds), and no other split has any.
func TestMislabelRateFromWrittenRecords(t *testing.T) {
	r, err := ParseRecipe("shelf-tags.yaml", []byte(mislabelRecipe))
	if err != nil {
		t.Fatal(err)
	}
	dir := runRecipe(t, r, 800, 4, 11, 0, 0)
	recs := readRecords(t, dir)
	n, noisy := 0, 0
	kinds := map[string]int{}
	for _, rec := range recs {
		if rec.Split != "train" {
			if rec.Mislabel != nil {
				t.Errorf("record %s in %s carries planted noise; the recipe plants it in train only", rec.ID, rec.Split)
			}
			continue
		}
		n++
		if rec.Mislabel != nil {
			noisy++
			kinds[rec.Mislabel.Kind]++
		}
	}
	if n != 400 {
		t.Fatalf("%d train records, want 400", n)
	}
	binomialWithin(t, "noisy train records", noisy, n, 0.3)
	for k, odds := range map[string]float64{"swap-class": 2, "mask-edge": 1, "box-jitter": 1, "target-off": 1, "char-swap": 1} {
		binomialWithin(t, k+" records", kinds[k], n, 0.3*odds/6)
	}
	if ps := verifyProblems(t, dir); len(ps) > 0 {
		t.Fatalf("verify: %v", ps)
	}
	// stats reads the same rate back.
	st, err := inspect.Compute(dir, inspect.Options{Split: "train"})
	if err != nil {
		t.Fatal(err)
	}
	if st.Planted == nil || len(st.Planted.Noise) != 3 || st.Planted.Noise[0].Split != "train" || st.Planted.Noise[0].Noisy != noisy || st.Planted.Noise[1].Noisy != 0 {
		t.Errorf("stats planted noise %+v; want train %d noisy, val 0", st.Planted, noisy)
	}
}

// Each corruption's record keeps the true labels beside the noisy ones and
// follows from them; a tampered one fails verify with check "mislabel".
func TestMislabelVerifyCatchesTampering(t *testing.T) {
	r, err := ParseRecipe("shelf-tags.yaml", []byte(mislabelRecipe))
	if err != nil {
		t.Fatal(err)
	}
	dir := runRecipe(t, r, 200, 2, 5, 0, 0)
	recs := readRecords(t, dir)
	first := map[string]*manifest.Record{}
	for _, rec := range recs {
		if m := rec.Mislabel; m != nil && first[m.Kind] == nil {
			first[m.Kind] = rec
		}
	}
	// The true values are the record's own (measured from the masks).
	for kind, rec := range first {
		m := rec.Mislabel
		for _, no := range m.Objects {
			var o *manifest.Object
			for i := range rec.Objects {
				if rec.Objects[i].Instance == no.Instance {
					o = &rec.Objects[i]
				}
			}
			if o == nil {
				t.Fatalf("%s: object %d not in record %s", kind, no.Instance, rec.ID)
			}
			if no.TrueBox != nil && *no.TrueBox != o.Box || no.TrueClass != 0 && no.TrueClass != o.Class {
				t.Errorf("%s: record %s's true values %+v differ from the object %+v", kind, rec.ID, no, *o)
			}
		}
		for name, nv := range m.Targets {
			if rec.Targets[name] != nv.True || nv.Noisy == nv.True {
				t.Errorf("%s: record %s target %s: true %v noisy %v, record %v", kind, rec.ID, name, nv.True, nv.Noisy, rec.Targets[name])
			}
		}
	}
	tampers := map[string]func(m *manifest.Mislabel){
		"swap-class": func(m *manifest.Mislabel) {
			for k, v := range m.Targets { // a noisy count that does not follow from the swap
				v.Noisy = manifest.Number(v.Noisy.Num + 1)
				m.Targets[k] = v
				return
			}
		},
		"mask-edge":  func(m *manifest.Mislabel) { a := *m.Objects[0].Area + 1; m.Objects[0].Area = &a },
		"box-jitter": func(m *manifest.Mislabel) { b := *m.Objects[0].Box; b[0] += 10; m.Objects[0].Box = &b },
		"target-off": func(m *manifest.Mislabel) {
			for k, v := range m.Targets {
				v.Noisy = v.True // off by 0
				m.Targets[k] = v
			}
		},
		"char-swap": func(m *manifest.Mislabel) {
			for k, v := range m.Targets {
				v.Noisy = manifest.Text(v.True.Str + "Z")
				m.Targets[k] = v
			}
		},
	}
	for kind, tamper := range tampers {
		t.Run(kind, func(t *testing.T) {
			rec := first[kind]
			if rec == nil {
				t.Fatalf("no %s record among 200 samples", kind)
			}
			d := t.TempDir()
			copyTree(t, dir, d)
			rewriteRecords(t, d, func(recs []*manifest.Record) { tamper(recs[rec.Index].Mislabel) })
			ps := verifyProblems(t, d)
			if !hasProblem(ps, rec.ID, manifest.KindMislabel) {
				t.Errorf("verify does not catch a tampered %s record; problems: %v", kind, ps)
			}
			for _, p := range ps {
				if p.Check != manifest.KindMislabel {
					t.Errorf("tampering with the noise fails another check too: %v", p)
				}
			}
		})
	}
	// Noise planted in a split the recipe does not name.
	d := t.TempDir()
	copyTree(t, dir, d)
	var victim string
	rewriteRecords(t, d, func(recs []*manifest.Record) {
		for _, rec := range recs {
			if rec.Split == "val" {
				rec.Mislabel = first["target-off"].Mislabel
				victim = rec.ID
				return
			}
		}
	})
	if ps := verifyProblems(t, d); !hasProblem(ps, victim, manifest.KindMislabel) {
		t.Errorf("verify accepts noise in val: %v", ps)
	}
}

func copyTree(t *testing.T, from, to string) {
	t.Helper()
	err := filepath.Walk(from, func(p string, info os.FileInfo, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(from, p)
		if info.IsDir() {
			return os.MkdirAll(filepath.Join(to, rel), 0o755)
		}
		if strings.HasPrefix(info.Name(), ".") {
			return nil // the writer's lock
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(to, rel), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// isRedTriangle is the held-out combination of examples/instruments/
// unseen-paint.yaml, judged here on the written record by hand.
func isRedTriangle(o manifest.Object) bool {
	return o.ClassName == "triangle" && o.Color != nil && o.Color[0] >= 128 && o.Color[1] <= 100 && o.Color[2] <= 100
}

// Held-out combinations: no train or val record shows one, test has them,
// and the strata table shows them, dealt to test only.
func TestHoldOutNeverInTrain(t *testing.T) {
	r := loadExample(t, "unseen-paint.yaml")
	dir := runRecipe(t, r, 600, 3, 2, 0, 0)
	held := map[string]int{}
	for _, rec := range readRecords(t, dir) {
		shows := false
		for _, o := range rec.Objects {
			shows = shows || isRedTriangle(o)
		}
		if shows {
			held[rec.Split]++
		}
		if shows != (rec.HeldOut == "red-triangle") {
			t.Errorf("record %s: shows a red triangle %v, held_out %q", rec.ID, shows, rec.HeldOut)
		}
	}
	if held["train"] != 0 || held["val"] != 0 {
		t.Errorf("red triangles in train %d, val %d; want none", held["train"], held["val"])
	}
	// Triangles appear in half the scenes with colors uniform over
	// [0,255]×[0,200]²; a red one (r ≥ 128, g, b ≤ 100) has probability
	// (128/256)·(101/201)² per triangle.
	p := 0.5 * (128.0 / 256) * (101.0 / 201) * (101.0 / 201)
	binomialWithin(t, "held-out samples", held["test"], 600, p)
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, st := range d.Splits.Strata {
		if st.Key == manifest.HeldOutPrefix+"red-triangle" {
			found = true
			if st.Splits["train"] != 0 || st.Splits["val"] != 0 || st.Splits["test"] != held["test"] {
				t.Errorf("strata table row %+v; want all %d in test", st, held["test"])
			}
		}
	}
	if !found {
		t.Errorf("the strata table has no held-out row: %+v", d.Splits.Strata)
	}
	if ps := verifyProblems(t, dir); len(ps) > 0 {
		t.Fatalf("verify: %v", ps)
	}
	// A train record recolored into the held-out combination fails verify.
	var victim string
	rewriteRecords(t, dir, func(recs []*manifest.Record) {
		for _, rec := range recs {
			for i := range rec.Objects {
				if rec.Split == "train" && rec.Objects[i].ClassName == "triangle" {
					rec.Objects[i].Color = &[3]uint8{200, 10, 10}
					victim = rec.ID
					return
				}
			}
		}
	})
	if ps := verifyProblems(t, dir); !hasProblem(ps, victim, manifest.KindHeldOut) {
		t.Errorf("verify accepts a red triangle in train: %v", ps)
	}
}

// Held-out size and angle ranges: none in train, and the factor stays
// uniform over its range: the share of objects inside a band is binomial
// with p = band width / range width.
func TestHoldOutSizeAndAngleKeepTheirDistribution(t *testing.T) {
	src := `name: washers
canvas: {width: 64, height: 64}
classes: [{name: washer, color: [230, 25, 75]}]
layers:
  - layout: {max_overlap: 0, min_gap: 1}
    objects:
      - {class: washer, shape: ring, count: [1, 2], size: [10, 20], angle: [0, 90], intensity: 200}
targets: [{name: washers, kind: count}]
hold_out:
  splits: [val, test]
  combos:
    - {name: big, class: washer, size: [17.5, 20]}
    - {name: steep, class: washer, angle: [60, 70]}
`
	r, err := ParseRecipe("washers.yaml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	dir := runRecipe(t, r, 800, 3, 9, 0, 0)
	objects, big, steep := 0, 0, 0
	for _, rec := range readRecords(t, dir) {
		for _, o := range rec.Objects {
			objects++
			inBig, inSteep := *o.Size >= 17.5 && *o.Size <= 20, *o.Angle >= 60 && *o.Angle <= 70
			if inBig {
				big++
			}
			if inSteep {
				steep++
			}
			if (inBig || inSteep) && rec.Split == "train" {
				t.Errorf("record %s in train has an object of size %v, angle %v", rec.ID, *o.Size, *o.Angle)
			}
		}
	}
	binomialWithin(t, "objects of size in [17.5, 20]", big, objects, 2.5/10)
	binomialWithin(t, "objects of angle in [60, 70]", steep, objects, 10.0/90)
	if ps := verifyProblems(t, dir); len(ps) > 0 {
		t.Fatalf("verify: %v", ps)
	}
}

// cornerOn reads the corner-mark cue from a written PNG: every pixel of the
// square at the mark's tone.
func cornerOn(t *testing.T, dir, rel string, size int, tone uint8) bool {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, rel))
	if err != nil {
		t.Fatal(err)
	}
	m, err := png.Decode(bytes.NewReader(b)) // the standard library's decoder
	if err != nil {
		t.Fatal(err)
	}
	g, ok := m.(*image.Gray)
	if !ok {
		t.Fatalf("%s is not gray", rel)
	}
	for y := 0; y < size; y++ {
		for x := 0; x < size; x++ {
			if g.GrayAt(x, y).Y != tone {
				return false
			}
		}
	}
	return true
}

// Shortcut bait, measured from the PNGs: in train the corner mark agrees
// with the answer (beads > 1) with probability (1+s)/2 (the cue follows it
// with probability s, else a fair coin); reversed elsewhere it agrees with
// probability (1−s)/2; independent, 1/2. Under independence Pearson's r
// times √n is approximately standard normal (the large-sample null
// distribution of r), so |r| ≤ 4/√n.
func TestBaitCorrelationFromImages(t *testing.T) {
	const s = 0.95
	for _, elsewhere := range []string{"reversed", "independent"} {
		t.Run(elsewhere, func(t *testing.T) {
			r := loadExample(t, "bead-bait.yaml")
			r.Bait.Elsewhere = elsewhere
			if err := r.reinstrument(); err != nil {
				t.Fatal(err)
			}
			dir := runRecipe(t, r, 1000, 3, 4, 0, 0)
			agree, n := map[string]int{}, map[string]int{}
			for _, rec := range readRecords(t, dir) {
				on := cornerOn(t, dir, rec.Image, 3, 255)
				if rec.Bait == nil || on != (rec.Bait.Cue == 1) {
					t.Fatalf("record %s: the image shows the mark %v, the record says %+v", rec.ID, on, rec.Bait)
				}
				yes := rec.Targets["beads"].Num > 1
				n[rec.Split]++
				if on == yes {
					agree[rec.Split]++
				}
			}
			binomialWithin(t, "train samples whose mark agrees", agree["train"], n["train"], (1+s)/2)
			for _, sp := range []string{"val", "test"} {
				p := 0.5
				if elsewhere == "reversed" {
					p = (1 - s) / 2
				}
				binomialWithin(t, sp+" samples whose mark agrees", agree[sp], n[sp], p)
			}
			st, err := inspect.Compute(dir, inspect.Options{Split: "train"})
			if err != nil {
				t.Fatal(err)
			}
			for _, b := range st.Planted.Bait.Splits {
				bound := zBound / math.Sqrt(float64(b.Samples))
				switch {
				case b.Split == "train" && b.CueAnswer < 0.8:
					t.Errorf("train: r(cue, answer) = %.3f, want ≥ 0.8 for strength %.2f", b.CueAnswer, s)
				case b.Split != "train" && elsewhere == "reversed" && b.CueAnswer > -0.8:
					t.Errorf("%s: r(cue, answer) = %.3f, want ≤ −0.8 reversed", b.Split, b.CueAnswer)
				case b.Split != "train" && elsewhere == "independent" && math.Abs(b.CueAnswer) > bound:
					t.Errorf("%s: r(cue, answer) = %.3f, want |r| ≤ %.3f independent", b.Split, b.CueAnswer, bound)
				}
			}
			if ps := verifyProblems(t, dir); len(ps) > 0 {
				t.Fatalf("verify: %v", ps)
			}
			// A record that claims the mark where the image has none fails.
			var victim string
			rewriteRecords(t, dir, func(recs []*manifest.Record) {
				for _, rec := range recs {
					if rec.Bait.Cue == 0 {
						rec.Bait.Cue, victim = 1, rec.ID
						return
					}
				}
			})
			if ps := verifyProblems(t, dir); !hasProblem(ps, victim, manifest.KindBait) {
				t.Errorf("verify accepts a mark the image lacks: %v", ps)
			}
		})
	}
}

// reinstrument validates the instruments again after a test changed one.
func (r *Recipe) reinstrument() error {
	return r.validateInstruments(yamlnode.NewDecoder("test"))
}

// All three instruments at once: the same bytes for 1 and 3 workers and
// for three shards merged.
const allInstruments = `name: parts-bench
canvas: {width: 48, height: 48}
background: {kind: noise, intensity: [0, 60], cell: 6}
classes:
  - {name: nut, color: [230, 25, 75]}
  - {name: pin, color: [60, 180, 75]}
layers:
  - layout: {max_overlap: 0, min_gap: 1, region: [6, 6, 48, 48]}
    objects:
      - {class: nut, shape: polygon, sides: 6, count: [0, 3], size: [7, 11], angle: [0, 60], intensity: [120, 255]}
      - {class: pin, shape: bar, count: [0, 2], size: [5, 7], aspect: [2, 3], angle: [0, 180], intensity: [120, 255]}
targets:
  - {name: nuts, kind: count, classes: [nut]}
  - {name: pins, kind: count, classes: [pin]}
split: {ratios: "train=0.6,val=0.2,test=0.2", stratify: nuts}
mislabel:
  share: 0.4
  kinds: [{kind: swap-class}, {kind: mask-edge}, {kind: box-jitter}, {kind: target-off}]
hold_out:
  combos:
    - {name: bright-pin, class: pin, intensity: [230, 255]}
    - {name: long-pin, class: pin, size: [6.5, 7]}
    - {name: crowd, class: nut, more_than: 2}
bait:
  target: pins
  above: 0
  strength: 0.8
  cue: {kind: background, shift: 30}
`

func TestInstrumentsReproducible(t *testing.T) {
	r, err := ParseRecipe("parts-bench.yaml", []byte(allInstruments))
	if err != nil {
		t.Fatal(err)
	}
	one := runRecipe(t, r, 90, 1, 3, 0, 0)
	if ps := verifyProblems(t, one); len(ps) > 0 {
		t.Fatalf("verify: %v", ps)
	}
	want := tree(t, one)
	for _, k := range []string{`"mislabel"`, `"held_out"`, `"bait"`} {
		b, _ := os.ReadFile(filepath.Join(one, manifest.ManifestFile))
		if !bytes.Contains(b, []byte(k)) {
			t.Errorf("no record carries %s; the test would not exercise it", k)
		}
	}
	if got := tree(t, runRecipe(t, r, 90, 3, 3, 0, 0)); got != want {
		t.Errorf("3 workers write other bytes than 1")
	}
	var shards []string
	for i := 0; i < 3; i++ {
		shards = append(shards, runRecipe(t, r, 90, 2, 3, i, 3))
	}
	merged := filepath.Join(t.TempDir(), "merged")
	if _, err := manifest.Merge(shards, merged, manifest.MergeOptions{}); err != nil {
		t.Fatal(err)
	}
	if got := tree(t, merged); got != want {
		t.Errorf("three shards merged differ from one run:\n%s", firstDiff(got, want))
	}
}

func firstDiff(a, b string) string {
	al, bl := strings.Split(a, "\n"), strings.Split(b, "\n")
	for i := range al {
		if i >= len(bl) || al[i] != bl[i] {
			return fmt.Sprintf("got  %s\nwant %s", al[i], bl[min(i, len(bl)-1)])
		}
	}
	return "(lengths differ)"
}

// The schema describes the instruments (draft 2020-12, checked by the same
// validator as the presets): the examples validate, the Go types and the
// schema name the same fields, and each refusal of trueset is one of the
// schema's.
func TestInstrumentsSchema(t *testing.T) {
	sch := compileRecipeSchema(t)
	for _, name := range []string{"noisy-sorting.yaml", "unseen-paint.yaml", "bead-bait.yaml"} {
		b, err := os.ReadFile(filepath.Join("..", "examples", "instruments", name))
		if err != nil {
			t.Fatal(err)
		}
		if err := sch.Validate(recipeAsJSON(t, b)); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	}
	for _, doc := range []string{mislabelRecipe, allInstruments} {
		if err := sch.Validate(recipeAsJSON(t, []byte(doc))); err != nil {
			t.Errorf("schema rejects a test recipe: %v", err)
		}
	}
	doc := loadSchemaDoc(t)
	for _, c := range []struct {
		typ reflect.Type
		at  string
	}{
		{reflect.TypeOf(MislabelSpec{}), "properties/mislabel"},
		{reflect.TypeOf(MislabelKind{}), "$defs/corruption"},
		{reflect.TypeOf(Confusion{}), "$defs/corruption/properties/confusion/items"},
		{reflect.TypeOf(HoldOutSpec{}), "properties/hold_out"},
		{reflect.TypeOf(HoldOutCombo{}), "$defs/combo"},
		{reflect.TypeOf(BaitSpec{}), "properties/bait"},
		{reflect.TypeOf(BaitCue{}), "properties/bait/properties/cue"},
	} {
		var fields []string
		for i := 0; i < c.typ.NumField(); i++ {
			if n := yamlnode.FieldName(c.typ.Field(i)); n != "" {
				fields = append(fields, n)
			}
		}
		sort.Strings(fields)
		s := schemaAt(t, doc, c.at)
		if got := schemaKeys(schemaAt(t, s, "properties")); !reflect.DeepEqual(got, fields) {
			t.Errorf("%s: schema %v, Go %v", c.at, got, fields)
		}
		if s["additionalProperties"] != false {
			t.Errorf("%s: additionalProperties is not false", c.at)
		}
	}
	bad := []struct{ name, why, old, new string }{
		{"share above 1", "at '/mislabel/share'", "share: 0.3", "share: 1.5"},
		{"unknown kind", "at '/mislabel/kinds/0/kind'", "kind: swap-class, odds: 2", "kind: relabel"},
		{"how on box-jitter", "at '/mislabel/kinds/2/how'", "kind: box-jitter, by: [1, 3]", "kind: box-jitter, how: [dilate]"},
		{"mask-edge by 9", "at '/mislabel/kinds/1/by'", "kind: mask-edge, by: [1, 2]", "kind: mask-edge, by: 9"},
	}
	for _, c := range bad {
		t.Run(c.name, func(t *testing.T) {
			src := schemaEdit(t, mislabelRecipe, c.old, c.new)
			if _, err := ParseRecipe("bad.yaml", []byte(src)); err == nil {
				t.Errorf("trueset accepts it")
			}
			err := sch.Validate(recipeAsJSON(t, []byte(src)))
			if err == nil || !strings.Contains(err.Error(), c.why) {
				t.Errorf("schema: want %q, got %v", c.why, err)
			}
		})
	}
	badAll := []struct{ name, why, old, new string }{
		{"combo without a factor", "at '/hold_out/combos/0'", "{name: bright-pin, class: pin, intensity: [230, 255]}", "{name: bright-pin, class: pin}"},
		{"bad combo name", "at '/hold_out/combos/0/name'", "name: bright-pin", "name: Bright Pin"},
		{"strength above 1", "at '/bait/strength'", "strength: 0.8", "strength: 2"},
		{"shift on a corner mark", "at '/bait/cue'", "{kind: background, shift: 30}", "{kind: corner-mark, shift: 30}"},
		{"elsewhere", "at '/bait/elsewhere'", "strength: 0.8", "strength: 0.8\n  elsewhere: sideways"},
	}
	for _, c := range badAll {
		t.Run(c.name, func(t *testing.T) {
			src := schemaEdit(t, allInstruments, c.old, c.new)
			if _, err := ParseRecipe("bad.yaml", []byte(src)); err == nil {
				t.Errorf("trueset accepts it")
			}
			err := sch.Validate(recipeAsJSON(t, []byte(src)))
			if err == nil || !strings.Contains(err.Error(), c.why) {
				t.Errorf("schema: want %q, got %v", c.why, err)
			}
		})
	}
}

// Refusals name the field and what is allowed.
func TestInstrumentsRefusals(t *testing.T) {
	cases := []struct{ name, old, new, want string }{
		{"unknown confusion class", "kind: swap-class, odds: 2", "kind: swap-class, confusion: [{class: letter, as: vowel}]", "mislabel.kinds[0].confusion[0].as: unknown class"},
		{"target-off on text", "targets: [letters, digits]", "targets: [code]", "want a numeric target"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseRecipe("bad.yaml", []byte(schemaEdit(t, mislabelRecipe, c.old, c.new)))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("want %q, got %v", c.want, err)
			}
		})
	}
	// A hold_out split the run's ratios lack is refused before anything is
	// written (a RecipeError: exit 2).
	r, err := ParseRecipe("parts-bench.yaml", []byte(schemaEdit(t, allInstruments, "hold_out:\n", "hold_out:\n  splits: [holdout]\n")))
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "out")
	_, err = Run(context.Background(), RunOptions{Recipe: r, Out: dir, Count: 10, Seed: 1, Version: "test"})
	if _, ok := err.(*RecipeError); !ok || !strings.Contains(err.Error(), `no split "holdout"`) {
		t.Errorf("want a RecipeError naming the split, got %v", err)
	}
	if _, serr := os.Stat(dir); serr == nil {
		t.Errorf("%s was created", dir)
	}
}
