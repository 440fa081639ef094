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
	sp.Cover = true // as --require-coverage allocates: only thin strata stay out of a split
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
		for _, st := range alloc.Thin {
			if !strings.Contains(stderr, st) {
				t.Errorf("stderr does not name the thin stratum %s:\n%s", st, stderr)
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

// recordTable counts dir's records per stratum and split from manifest.jsonl
// (every generated record is its own group).
func recordTable(t *testing.T, dir string) map[string]map[string]int {
	t.Helper()
	seen := map[string]map[string]int{}
	err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		if seen[r.Stratum] == nil {
			seen[r.Stratum] = map[string]int{}
		}
		seen[r.Stratum][r.Split]++
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return seen
}

// Issue 12's case: 5000 tabletop-dice scenes at seed 7 stratified by
// pip_total have strata of 3 groups, whose shares at 0.8/0.1/0.1 are
// 2.4/0.3/0.3; controlled rounding keeps each cell within ±1 of its share,
// so it leaves them out of val and test. --require-coverage now puts every
// stratum of at least 3 groups in every split (read back from the records
// and from dataset.json), verify accepts the set, and split with the same
// flags deals it identically.
func TestRequireCoverageDice5000(t *testing.T) {
	r, err := gen.Preset("tabletop-dice")
	if err != nil {
		t.Fatal(err)
	}
	sp, _ := manifest.ParseSplits(manifest.DefaultSplits)
	_, _, plain, err := gen.Allocate(r, 7, 5000, 4, sp, "pip_total")
	if err != nil {
		t.Fatal(err)
	}
	premise := 0
	for _, st := range plain.Table {
		for _, q := range st.Splits {
			if st.Groups >= 3 && q == 0 {
				premise++
			}
		}
	}
	if premise == 0 {
		t.Fatalf("the premise changed: controlled rounding covers every stratum at seed 7, count 5000 (%v)", plain.Table)
	}

	dir := filepath.Join(t.TempDir(), "dice")
	wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "5000", "--seed", "7",
		"--stratify", "pip_total", "--require-coverage", "--out", dir, "--quiet")
	d := readDataset(t, dir)
	seen := recordTable(t, dir)
	if !d.Splits.RequireCoverage {
		t.Error("dataset.json does not record require_coverage")
	}
	if len(seen) != len(d.Splits.Strata) {
		t.Errorf("records fall in %d strata, dataset.json lists %d", len(seen), len(d.Splits.Strata))
	}
	total := 0
	for _, st := range d.Splits.Strata {
		row := 0
		for _, name := range d.Splits.Names {
			q := st.Splits[name]
			row += q
			if seen[st.Key][name] != q {
				t.Errorf("stratum %s in %s: %d records, dataset.json says %d", st.Key, name, seen[st.Key][name], q)
			}
			if st.Groups >= len(d.Splits.Names) && seen[st.Key][name] == 0 {
				t.Errorf("stratum %s has %d groups but none in %s", st.Key, st.Groups, name)
			}
		}
		if row != st.Groups {
			t.Errorf("stratum %s: row adds to %d, %d groups", st.Key, row, st.Groups)
		}
		total += st.Groups
	}
	if total != 5000 || len(d.Splits.Thin) != 0 {
		t.Errorf("strata hold %d groups (want 5000), thin %v (want none)", total, d.Splits.Thin)
	}
	// Rule 4 of manifest.CoverRound: split totals stay within ±1 of their
	// shares whenever the cells allow; here they do (5000 × 0.8/0.1/0.1).
	for j, name := range d.Splits.Names {
		if x := 5000 * sp.Ratios[j]; !roundsShare(d.Splits.Counts[name], x) {
			t.Errorf("split %s: %d samples, share %.1f", name, d.Splits.Counts[name], x)
		}
	}
	for _, st := range d.Splits.Strata {
		if st.Groups <= 16 {
			t.Logf("thin end: %s %d groups → %v", st.Key, st.Groups, st.Splits)
		}
	}
	wantCode(t, exitOK, "verify", dir)

	m0, d0 := fileBytes(t, dir)
	wantCode(t, exitOK, "split", dir, "--stratify", "pip_total", "--require-coverage", "--quiet")
	if m1, d1 := fileBytes(t, dir); !bytes.Equal(m0, m1) || !bytes.Equal(d0, d1) {
		t.Error("split with generate's flags dealt the set differently")
	}

	// Impossible coverage: four splits, and strata of 3 groups. Refused
	// (exit 1, as every --require-coverage failure) naming them; nothing
	// changes.
	_, stderr := wantCode(t, exitFailure, "split", dir, "--stratify", "pip_total", "--require-coverage",
		"--ratios", "a=0.7,b=0.1,c=0.1,d=0.1", "--quiet")
	for _, st := range d.Splits.Strata {
		named := strings.Contains(stderr, st.Key+" (")
		if thin := st.Groups < 4; thin != named {
			t.Errorf("stratum %s (%d groups, 4 splits): named %v in the refusal:\n%s", st.Key, st.Groups, named, stderr)
		}
	}
	if !strings.Contains(stderr, "nothing was changed") {
		t.Errorf("refusal does not say nothing changed: %q", stderr)
	}
	if m1, d1 := fileBytes(t, dir); !bytes.Equal(m0, m1) || !bytes.Equal(d0, d1) {
		t.Error("a refused split changed the files")
	}
}

// Coverage first is a function of the plans, the seed and the flags only:
// any worker count and any shard layout give the same bytes. 40 dice scenes
// (10 per number of dice) at 0.9/0.05/0.05 have shares 9/0.5/0.5, so every
// stratum is raised (8/1/1).
func TestRequireCoverageWorkersShards(t *testing.T) {
	root := t.TempDir()
	args := []string{"generate", "--preset", "tabletop-dice", "--count", "40", "--stratify", "dice",
		"--ratios", "train=0.9,val=0.05,test=0.05", "--require-coverage", "--quiet"}
	one := filepath.Join(root, "one")
	wantCode(t, exitOK, append(args, "--workers", "1", "--out", one)...)
	d := readDataset(t, one)
	for _, st := range d.Splits.Strata {
		if st.Groups != 10 || st.Splits["train"] != 8 || st.Splits["val"] != 1 || st.Splits["test"] != 1 {
			t.Errorf("stratum %s: %d groups → %v, want 10 → train 8, val 1, test 1", st.Key, st.Groups, st.Splits)
		}
	}
	many := filepath.Join(root, "many")
	wantCode(t, exitOK, append(args, "--workers", "5", "--out", many)...)
	sameTree(t, one, many)
	var parts []string
	for i := 0; i < 3; i++ {
		p := filepath.Join(root, fmt.Sprintf("part-%d", i))
		wantCode(t, exitOK, append(args, "--shard", fmt.Sprintf("%d/3", i), "--out", p)...)
		parts = append(parts, p)
	}
	merged := filepath.Join(root, "merged")
	wantCode(t, exitOK, append(append([]string{"merge"}, parts...), "--out", merged, "--quiet")...)
	sameTree(t, one, merged)
	wantCode(t, exitOK, "verify", merged)
}
