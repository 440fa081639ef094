package main

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// readDataset reads dir/dataset.json or fails.
func readDataset(t *testing.T, dir string) *manifest.Dataset {
	t.Helper()
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// roundsShare reports whether got is ⌊x⌋ or ⌈x⌉ (allowing float noise in x).
func roundsShare(got int, x float64) bool {
	const eps = 1e-9
	return got == int(math.Floor(x+eps)) || got == int(math.Ceil(x-eps))
}

// checkShares checks dir's stored strata × splits table: every cell and every
// split total is its exact share rounded down or up (the guarantee of
// controlled rounding, Cox & Ernst, "Controlled rounding", INFOR 20(4),
// 1982), rows keep their sizes, and the table matches the manifest's records.
func checkShares(t *testing.T, dir string) *manifest.Dataset {
	t.Helper()
	d := readDataset(t, dir)
	sp, err := manifest.ParseSplits(d.Splits.Spec)
	if err != nil {
		t.Fatalf("dataset.json split spec %q: %v", d.Splits.Spec, err)
	}
	if !slices.Equal(sp.Names, d.Splits.Names) {
		t.Fatalf("spec %q names %v, table names %v", d.Splits.Spec, sp.Names, d.Splits.Names)
	}
	total := 0
	cols := make([]int, len(sp.Names))
	for _, st := range d.Splits.Strata {
		row := 0
		for j, name := range sp.Names {
			q := st.Splits[name]
			row += q
			cols[j] += q
			if x := float64(st.Groups) * sp.Ratios[j]; !roundsShare(q, x) {
				t.Errorf("stratum %s in %s: %d groups, exact share %.3f", st.Key, name, q, x)
			}
		}
		if row != st.Groups {
			t.Errorf("stratum %s: row adds to %d, %d groups", st.Key, row, st.Groups)
		}
		total += st.Groups
	}
	if total != d.Count {
		t.Errorf("strata hold %d groups, dataset.json count %d", total, d.Count)
	}
	for j, name := range sp.Names {
		if cols[j] != d.Splits.Counts[name] {
			t.Errorf("split %s: strata add to %d, counts say %d", name, cols[j], d.Splits.Counts[name])
		}
		if x := float64(d.Count) * sp.Ratios[j]; !roundsShare(cols[j], x) {
			t.Errorf("split %s: %d samples, exact share %.3f", name, cols[j], x)
		}
	}
	// The table describes the records (every generated record is its own
	// group, so records and groups count alike).
	seen := map[string]map[string]int{}
	err = manifest.ReadManifest(dir, func(r *manifest.Record) error {
		if seen[r.Stratum] == nil {
			seen[r.Stratum] = map[string]int{}
		}
		seen[r.Stratum][r.Split]++
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(seen) != len(d.Splits.Strata) {
		t.Errorf("records fall in %d strata, the table has %d", len(seen), len(d.Splits.Strata))
	}
	for _, st := range d.Splits.Strata {
		for _, name := range sp.Names {
			if seen[st.Key][name] != st.Splits[name] {
				t.Errorf("stratum %s in %s: %d records, table says %d", st.Key, name, seen[st.Key][name], st.Splits[name])
			}
		}
	}
	return d
}

// groupsAreIDs fails unless every record of dir is its own group.
func groupsAreIDs(t *testing.T, dir string) {
	t.Helper()
	n := 0
	err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		n++
		if r.Group != r.ID {
			t.Errorf("record %s has group %q, want its id", r.ID, r.Group)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if n == 0 {
		t.Fatal("no records")
	}
}

func TestRequireCoverage(t *testing.T) {
	// workshop-parts draws 0-3 washers, 0-3 nuts, 0-2 brackets and 0-3 pins,
	// so parts=0 is rare (1/(4·4·3·4) of scenes if the counts are uniform
	// and independent): at seed 1 and 100 samples it has fewer members than
	// the three splits. The premise is checked from plans first.
	r, err := gen.Preset("workshop-parts")
	if err != nil {
		t.Fatal(err)
	}
	sp, _ := manifest.ParseSplits(manifest.DefaultSplits)
	_, _, alloc, err := gen.Allocate(r, 1, 100, 2, sp, "parts")
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Contains(alloc.Thin, "parts=0") {
		t.Fatalf("the premise changed: parts=0 is not thin at seed 1, count 100 (thin: %v); pick a count where it is", alloc.Thin)
	}

	t.Run("thin stratum fails, writing nothing", func(t *testing.T) {
		out := filepath.Join(t.TempDir(), "thin")
		_, stderr := wantCode(t, exitFailure, "generate", "--preset", "workshop-parts", "--count", "100", "--seed", "1",
			"--require-coverage", "--out", out)
		if !strings.Contains(stderr, "parts=0 in ") {
			t.Errorf("stderr does not name the thin stratum parts=0:\n%s", stderr)
		}
		for _, cell := range alloc.Uncovered(sp) {
			if !strings.Contains(stderr, cell) {
				t.Errorf("stderr does not name the empty cell %q:\n%s", cell, stderr)
			}
		}
		if !strings.Contains(stderr, "thin strata") || !strings.Contains(stderr, "stratified by parts") {
			t.Errorf("stderr does not show the strata table:\n%s", stderr)
		}
		if _, err := os.Stat(out); !os.IsNotExist(err) {
			t.Errorf("refused run created %s (%v)", out, err)
		}
		// An existing empty folder stays empty.
		empty := t.TempDir()
		wantCode(t, exitFailure, "generate", "--count", "100", "--require-coverage", "--out", empty, "--quiet")
		if ents, _ := os.ReadDir(empty); len(ents) != 0 {
			t.Errorf("refused run left %d entries in %s", len(ents), empty)
		}
	})

	t.Run("balanced dice pass", func(t *testing.T) {
		// tabletop-dice balances 1-4 dice and stratifies by dice: 100 of
		// each in 400 samples, 10 per stratum in val and test.
		out := filepath.Join(t.TempDir(), "dice")
		wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "400", "--require-coverage", "--out", out, "--quiet")
		d := checkShares(t, out)
		if d.Splits.Stratify != "dice" || len(d.Splits.Strata) != 4 || len(d.Splits.Thin) != 0 {
			t.Errorf("stratify %q, %d strata, thin %v; want dice, 4, none", d.Splits.Stratify, len(d.Splits.Strata), d.Splits.Thin)
		}
		for _, st := range d.Splits.Strata {
			if st.Groups != 100 {
				t.Errorf("stratum %s has %d samples, want 100 (balanced)", st.Key, st.Groups)
			}
		}
	})
}

// Every preset, 1000 samples: the stored table keeps its bounds.
func TestStrataTableSharesPresets(t *testing.T) {
	for _, name := range gen.PresetNames() {
		t.Run(name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), name)
			wantCode(t, exitOK, "generate", "--preset", name, "--count", "1000", "--out", out, "--quiet")
			d := checkShares(t, out)
			if d.Splits.Stratify == "" {
				t.Errorf("preset %s is not stratified", name)
			}
			groupsAreIDs(t, out)
			wantCode(t, exitOK, "verify", out)
		})
	}
}

func TestGeneratedGroupsAreIDs(t *testing.T) {
	out := filepath.Join(t.TempDir(), "set")
	wantCode(t, exitOK, "generate", "--count", "30", "--out", out, "--quiet")
	groupsAreIDs(t, out)
}

// fileBytes reads the two files split may rewrite.
func fileBytes(t *testing.T, dir string) (manifestB, datasetB []byte) {
	t.Helper()
	m, err := os.ReadFile(filepath.Join(dir, manifest.ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	d, err := os.ReadFile(filepath.Join(dir, manifest.DatasetFile))
	if err != nil {
		t.Fatal(err)
	}
	return m, d
}

// split with the dataset's own seed, ratios and key deals what generate
// dealt: both files keep every byte.
func TestSplitOwnSettingsIsIdentity(t *testing.T) {
	for _, name := range gen.PresetNames() {
		t.Run(name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "set")
			wantCode(t, exitOK, "generate", "--preset", name, "--count", "40", "--seed", "5", "--out", dir, "--quiet")
			m0, d0 := fileBytes(t, dir)
			wantCode(t, exitOK, "split", dir, "--quiet")
			m1, d1 := fileBytes(t, dir)
			if !bytes.Equal(m0, m1) {
				t.Error("manifest.jsonl changed")
			}
			if !bytes.Equal(d0, d1) {
				t.Error("dataset.json changed")
			}
		})
	}
}

func TestSplitStratifyClasses(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "set")
	wantCode(t, exitOK, "generate", "--count", "60", "--out", dir, "--quiet")
	before := readDataset(t, dir)
	stdout, _ := wantCode(t, exitOK, "split", dir, "--stratify", "classes")
	if !strings.Contains(stdout, "stratified by classes") {
		t.Errorf("split printed no table:\n%s", stdout)
	}
	after := checkShares(t, dir)
	if after.Splits.Stratify != "classes" {
		t.Errorf("dataset.json stratify %q, want classes", after.Splits.Stratify)
	}
	var keysBefore, keysAfter []string
	for _, st := range before.Splits.Strata {
		keysBefore = append(keysBefore, st.Key)
	}
	for _, st := range after.Splits.Strata {
		keysAfter = append(keysAfter, st.Key)
	}
	if slices.Equal(keysBefore, keysAfter) {
		t.Errorf("the strata did not change: %v", keysAfter)
	}
	// Each record's stratum is the set of its classes, written as the
	// sorted names joined by "+".
	err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		set := map[string]bool{}
		for _, o := range r.Objects {
			set[o.ClassName] = true
		}
		var names []string
		for n := range set {
			names = append(names, n)
		}
		slices.Sort(names)
		want := strings.Join(names, "+")
		if want == "" {
			want = "none"
		}
		if r.Stratum != want {
			t.Errorf("record %s: stratum %q, its classes are %q", r.ID, r.Stratum, want)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	groupsAreIDs(t, dir)
	wantCode(t, exitOK, "verify", dir)
	wantCode(t, exitOK, "verify", "--regenerate", dir)
}

// A target measured from masks (a sum of areas) cannot stratify generate,
// which deals splits before any pixel exists; split reads the records and can.
const areaRecipe = `name: discs
description: one to three discs; targets are their number and their total area
canvas:
  width: 32
  height: 32
  mode: gray
background:
  kind: solid
  intensity: [20, 40]
classes:
  - name: disc
    color: [230, 25, 75]
layers:
  - layout:
      kind: scatter
      max_overlap: 0
      least_shown: 0.9
    objects:
      - class: disc
        shape: circle
        count: [1, 3]
        size: [5, 9]
        intensity: [180, 240]
targets:
  - name: discs
    kind: count
  - name: disc_area
    kind: sum
    of: area
`

func TestSplitByAreaTarget(t *testing.T) {
	tmp := t.TempDir()
	recipe := filepath.Join(tmp, "discs.yaml")
	if err := os.WriteFile(recipe, []byte(areaRecipe), 0o644); err != nil {
		t.Fatal(err)
	}
	refused := filepath.Join(tmp, "refused")
	_, stderr := wantCode(t, exitUsage, "generate", "--recipe", recipe, "--count", "40", "--stratify", "disc_area", "--out", refused, "--quiet")
	if !strings.Contains(stderr, "disc_area") || !strings.Contains(stderr, "geometry") {
		t.Errorf("refusal does not name the target and why: %q", stderr)
	}
	if _, err := os.Stat(refused); !os.IsNotExist(err) {
		t.Errorf("refused run created %s", refused)
	}

	dir := filepath.Join(tmp, "set")
	wantCode(t, exitOK, "generate", "--recipe", recipe, "--count", "40", "--out", dir, "--quiet")
	// Many distinct areas, so most strata are thin: --require-coverage
	// refuses and changes nothing.
	m0, d0 := fileBytes(t, dir)
	_, stderr = wantCode(t, exitFailure, "split", dir, "--stratify", "disc_area", "--require-coverage", "--quiet")
	if !strings.Contains(stderr, "nothing was changed") {
		t.Errorf("split --require-coverage said %q", stderr)
	}
	if m1, d1 := fileBytes(t, dir); !bytes.Equal(m0, m1) || !bytes.Equal(d0, d1) {
		t.Error("a refused split changed the files")
	}

	wantCode(t, exitOK, "split", dir, "--stratify", "disc_area", "--quiet")
	d := checkShares(t, dir)
	if d.Splits.Stratify != "disc_area" {
		t.Errorf("dataset.json stratify %q, want disc_area", d.Splits.Stratify)
	}
	// The stratum is the target, and the target is the objects' mask areas.
	err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		sum := 0
		for _, o := range r.Objects {
			sum += o.Area
		}
		if want := fmt.Sprintf("disc_area=%d", sum); r.Stratum != want {
			t.Errorf("record %s: stratum %q, want %q", r.ID, r.Stratum, want)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	wantCode(t, exitOK, "verify", dir)
	wantCode(t, exitOK, "verify", "--regenerate", dir)
}

// --stratify is checked by one function in every command: an unknown class
// or target is exit 2 with the same message, naming it and listing the
// known ones, and nothing is changed.
func TestStratifyRefusedAlike(t *testing.T) {
	root := t.TempDir()
	dir := filepath.Join(root, "dice")
	wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "12", "--out", dir, "--quiet")
	before, _ := fileBytes(t, dir)
	for key, want := range map[string][]string{
		"class:nosuch": {`no class "nosuch"`, "die, pip"},
		"nosuch":       {`no target "nosuch"`, "dice, pip_total", "class:NAME"},
	} {
		_, gen := wantCode(t, exitUsage, "generate", "--preset", "tabletop-dice", "--count", "12", "--out", filepath.Join(root, "g-"+key), "--stratify", key)
		_, split := wantCode(t, exitUsage, "split", dir, "--stratify", key)
		if gen != split {
			t.Errorf("--stratify %s: generate says %q, split says %q", key, gen, split)
		}
		for _, w := range want {
			if !strings.Contains(split, w) {
				t.Errorf("--stratify %s: %q lacks %q", key, split, w)
			}
		}
	}
	if after, _ := fileBytes(t, dir); !bytes.Equal(before, after) {
		t.Error("a refused split changed manifest.jsonl")
	}
	// A trueset dataset keeps its split in augment: --stratify and --ratios
	// are for plain folders and refused here rather than ignored.
	wantCode(t, exitUsage, "augment", "--in", dir, "--out", filepath.Join(root, "aug"), "--plan", "../../testdata/plans/every-step.yaml", "--stratify", "dice")
}

// Ratios must add up to 1 in flags and in a recipe's split.ratios (exit 2,
// showing the sum); an accepted spec is stored as written, and its ratios
// without float noise.
func TestRatiosAddUpToOne(t *testing.T) {
	root := t.TempDir()
	dir := filepath.Join(root, "set")
	wantCode(t, exitOK, "generate", "--count", "16", "--out", dir, "--quiet", "--ratios", "train=0.125,val=0.375,test=0.5")
	for _, c := range []struct {
		args []string
		sum  string
	}{
		{[]string{"generate", "--out", filepath.Join(root, "a"), "--ratios", "train=0.7,val=0.1"}, "0.8"},
		{[]string{"generate", "--out", filepath.Join(root, "b"), "--ratios", "train=0.8,val=0.3"}, "1.1"},
		{[]string{"split", dir, "--ratios", "train=0.7,val=0.1"}, "0.8"},
		{[]string{"split", dir, "--ratios", "train=0.8,val=0.3"}, "1.1"},
	} {
		_, stderr := wantCode(t, exitUsage, c.args...)
		if !strings.Contains(stderr, "add up to "+c.sum+", not 1") || !strings.Contains(stderr, "--ratios") {
			t.Errorf("trueset %s: %q", strings.Join(c.args, " "), stderr)
		}
	}
	d := readDataset(t, dir)
	if d.Splits.Spec != "train=0.125,val=0.375,test=0.5" || d.Splits.Ratios["train"] != 0.125 || d.Splits.Ratios["val"] != 0.375 {
		t.Errorf("stored spec %q ratios %v", d.Splits.Spec, d.Splits.Ratios)
	}
	raw, err := os.ReadFile(filepath.Join(dir, manifest.DatasetFile))
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(string(raw), "0000000") {
		t.Errorf("dataset.json holds float noise:\n%s", raw)
	}
	// As written, spaces trimmed, in split too; the result verifies.
	wantCode(t, exitOK, "split", dir, "--ratios", "train=0.70, val=0.15, test=0.15", "--quiet")
	if d := readDataset(t, dir); d.Splits.Spec != "train=0.70,val=0.15,test=0.15" || d.Splits.Ratios["train"] != 0.7 {
		t.Errorf("stored spec %q ratios %v", d.Splits.Spec, d.Splits.Ratios)
	}
	wantCode(t, exitOK, "verify", dir)

	// The recipe's split.ratios: a recipe error, exit 2.
	src, err := os.ReadFile(walkthroughRecipe)
	if err != nil {
		t.Fatal(err)
	}
	bad := strings.Replace(string(src), "ratios: train=0.8,val=0.1,test=0.1", "ratios: train=0.8,val=0.3", 1)
	if bad == string(src) {
		t.Fatal("the walkthrough recipe has no split.ratios line to break")
	}
	recipe := filepath.Join(root, "bad.yaml")
	if err := os.WriteFile(recipe, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	_, stderr := wantCode(t, exitUsage, "generate", "--recipe", recipe, "--out", filepath.Join(root, "c"))
	if !strings.Contains(stderr, "split.ratios") || !strings.Contains(stderr, "add up to 1.1") {
		t.Errorf("recipe with ratios adding to 1.1: %q", stderr)
	}
}
