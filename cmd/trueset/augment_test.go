package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

const (
	everyStepPlan = "../../testdata/plans/every-step.yaml"
	plainFolder   = "../../testdata/plain"
)

// augSplitCounts counts records per split.
func augSplitCounts(recs []*manifest.Record) map[string]int {
	n := map[string]int{}
	for _, r := range recs {
		n[r.Split]++
	}
	return n
}

// augCheckCopies checks that an augmented output holds every input record
// (same id, split, group, stratum) followed by its copies, that only sources
// in the train split got copies (copies of them), and that every copy keeps
// its source's split, group and stratum and names it in its lineage.
func augCheckCopies(t *testing.T, in []*manifest.Record, out []*manifest.Record, copies int) {
	t.Helper()
	byID := map[string]*manifest.Record{}
	for _, r := range in {
		byID[r.ID] = r
	}
	want, got := augSplitCounts(in), augSplitCounts(out)
	for split, n := range want {
		if split == "train" {
			n *= 1 + copies
		}
		if got[split] != n {
			t.Errorf("split %s: %d records, want %d (input has %d)", split, got[split], n, want[split])
		}
	}
	for split := range got {
		if _, ok := want[split]; !ok {
			t.Errorf("output has split %s, which the input lacks", split)
		}
	}
	perSource := map[string]int{}
	originals := 0
	for i, r := range out {
		if r.Index != i {
			t.Errorf("record %s has index %d at position %d", r.ID, r.Index, i)
		}
		if r.Lineage == nil {
			src := byID[r.ID]
			if src == nil {
				t.Errorf("original %s is not in the input", r.ID)
				continue
			}
			originals++
			if r.Split != src.Split || r.Group != src.Group || r.Stratum != src.Stratum {
				t.Errorf("original %s: split/group/stratum %s/%s/%s, input has %s/%s/%s", r.ID, r.Split, r.Group, r.Stratum, src.Split, src.Group, src.Stratum)
			}
			continue
		}
		src := byID[r.Lineage.Source]
		if src == nil {
			t.Errorf("copy %s names source %q, which is not in the input", r.ID, r.Lineage.Source)
			continue
		}
		perSource[src.ID]++
		if src.Split != "train" {
			t.Errorf("copy %s of %s, which is in %s: only train sources get copies by default", r.ID, src.ID, src.Split)
		}
		if r.Split != src.Split || r.Group != src.Group || r.Stratum != src.Stratum {
			t.Errorf("copy %s: split/group/stratum %s/%s/%s, its source %s has %s/%s/%s", r.ID, r.Split, r.Group, r.Stratum, src.ID, src.Split, src.Group, src.Stratum)
		}
		if wantID := fmt.Sprintf("%s-c%02d", src.ID, perSource[src.ID]); r.ID != wantID {
			t.Errorf("copy id %s, want %s", r.ID, wantID)
		}
		if i == 0 || (out[i-1].ID != src.ID && out[i-1].Lineage == nil) || (out[i-1].Lineage != nil && out[i-1].Lineage.Source != src.ID) {
			t.Errorf("copy %s does not follow its source %s", r.ID, src.ID)
		}
	}
	if originals != len(in) {
		t.Errorf("%d originals carried over, want %d", originals, len(in))
	}
	for _, r := range in {
		n := 0
		if r.Split == "train" {
			n = copies
		}
		if perSource[r.ID] != n {
			t.Errorf("source %s (%s) has %d copies, want %d", r.ID, r.Split, perSource[r.ID], n)
		}
	}
}

func TestAugmentGeneratedSet(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "in")
	wantCode(t, exitOK, "generate", "--count", "40", "--quiet", "--out", in)
	one, two := filepath.Join(root, "w1"), filepath.Join(root, "w2")
	wantCode(t, exitOK, "augment", "--in", in, "--out", one, "--plan", everyStepPlan, "--copies", "3", "--workers", "1", "--quiet")
	wantCode(t, exitOK, "augment", "--in", in, "--out", two, "--plan", everyStepPlan, "--copies", "3", "--workers", "2", "--quiet")
	stdout, _ := wantCode(t, exitOK, "verify", one)
	if !strings.Contains(stdout, "agree") {
		t.Errorf("verify printed %q", stdout)
	}
	// The worker count does not change a byte.
	sameTree(t, one, two)

	inRecs, outRecs := readRecords(t, in), readRecords(t, one)
	if n := augSplitCounts(inRecs)["train"]; n == 0 || n == len(inRecs) {
		t.Fatalf("input has %d train records of %d; the test needs train and held-out records", n, len(inRecs))
	}
	augCheckCopies(t, inRecs, outRecs, 3)

	// Originals are carried over byte for byte.
	inFiles, outFiles := treeBytes(t, in), treeBytes(t, one)
	for _, r := range inRecs {
		for _, p := range []string{r.Image, r.Mask, r.Instances} {
			if !bytes.Equal(inFiles[p], outFiles[p]) {
				t.Errorf("%s differs from the input's", p)
			}
		}
	}
	d := readDataset(t, one)
	if d.Augment == nil || d.Augment.Copies != 3 || d.Augment.Source != "trueset" || d.Augment.SourceSamples != 40 {
		t.Errorf("dataset.json augment = %+v", d.Augment)
	}
	if d.Count != len(outRecs) {
		t.Errorf("dataset.json count %d, manifest has %d", d.Count, len(outRecs))
	}
	// Copies record what was done to them: with every-step.yaml (the
	// pick under pixels has chance 1) every copy has at least one pixel step.
	for _, r := range outRecs {
		if r.Lineage != nil && len(r.Lineage.Pixels) == 0 {
			t.Errorf("copy %s records no pixel steps", r.ID)
		}
	}
}

// writePlan writes a plan file into dir.
func writePlan(t *testing.T, dir, name, src string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

const flipPlan = `name: mirror
geometry:
  moves:
    - do: rotate
      angle: [-5, 5]
    - do: flip
      axis: horizontal
      chance: 0.5
`

// bin-labels declares its glyph class "character" with flip false and reads
// the glyphs into a text target: a plan with a flip is refused before
// anything is written, unless --allow-label-change.
func TestAugmentRefusesFlipOnGlyphs(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "labels")
	wantCode(t, exitOK, "generate", "--preset", "bin-labels", "--count", "20", "--quiet", "--out", in)
	plan := writePlan(t, root, "mirror.yaml", flipPlan)
	out := filepath.Join(root, "out")
	_, stderr := wantCode(t, exitUsage, "augment", "--in", in, "--out", out, "--plan", plan, "--copies", "2")
	for _, w := range []string{`class "character"`, "geometry.moves[1]", "flip horizontal", "--allow-label-change"} {
		if !strings.Contains(stderr, w) {
			t.Errorf("stderr %q lacks %q", stderr, w)
		}
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("the refused run left %s behind (stat: %v)", out, err)
	}
	// An existing empty --out stays empty.
	if err := os.Mkdir(out, 0o755); err != nil {
		t.Fatal(err)
	}
	wantCode(t, exitUsage, "augment", "--in", in, "--out", out, "--plan", plan, "--copies", "2")
	if ents, _ := os.ReadDir(out); len(ents) != 0 {
		t.Errorf("the refused run wrote %d entries into %s", len(ents), out)
	}

	wantCode(t, exitOK, "augment", "--in", in, "--out", out, "--plan", plan, "--copies", "2", "--allow-label-change", "--quiet")
	wantCode(t, exitOK, "verify", out)
	if d := readDataset(t, out); d.Augment == nil || !d.Augment.AllowedChanges {
		t.Errorf("dataset.json does not record --allow-label-change: %+v", d.Augment)
	}
}

func TestAugmentUsageErrors(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "in")
	wantCode(t, exitOK, "generate", "--count", "10", "--quiet", "--out", in)
	// Line 6 holds the bad field: sigma belongs to noise and blur steps.
	bad := writePlan(t, root, "bad.yaml", "name: bad\ngeometry:\n  moves:\n    - do: flip\n      axis: horizontal\n      sigma: 2\n")
	out := filepath.Join(root, "out")
	cases := []struct {
		name string
		args []string
		want []string
	}{
		{"missing --in", []string{"--out", out, "--plan", everyStepPlan}, []string{"--in"}},
		{"missing --out", []string{"--in", in, "--plan", everyStepPlan}, []string{"--out"}},
		{"missing --plan", []string{"--in", in, "--out", out}, []string{"--plan"}},
		{"negative copies", []string{"--in", in, "--out", out, "--plan", everyStepPlan, "--copies", "-1"}, []string{"--copies -1", "0..1000"}},
		{"bad plan file", []string{"--in", in, "--out", out, "--plan", bad}, []string{bad + ":6:", "geometry.moves[0].sigma", "flip does not take sigma"}},
		{"missing plan file", []string{"--in", in, "--out", out, "--plan", filepath.Join(root, "nope.yaml")}, []string{"nope.yaml"}},
		{"unknown split", []string{"--in", in, "--out", out, "--plan", everyStepPlan, "--split", "nosuch"}, []string{"--split nosuch", "train"}},
		{"--in missing", []string{"--in", filepath.Join(root, "absent"), "--out", out, "--plan", everyStepPlan}, []string{"--in", "does not exist"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, stderr := wantCode(t, exitUsage, append([]string{"augment"}, c.args...)...)
			if !strings.HasPrefix(stderr, "trueset: ") {
				t.Errorf("stderr %q does not start with \"trueset: \"", stderr)
			}
			for _, w := range c.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr %q lacks %q", stderr, w)
				}
			}
			if _, err := os.Stat(out); !os.IsNotExist(err) {
				t.Errorf("a usage error left %s behind", out)
				os.RemoveAll(out)
			}
		})
	}
}

// augLabels reads testdata/plain/labels.csv: id → column → cell.
func augLabels(t *testing.T) map[string]map[string]string {
	t.Helper()
	f, err := os.Open(filepath.Join(plainFolder, "labels.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]map[string]string{}
	for _, row := range rows[1:] {
		m := map[string]string{}
		for j, col := range rows[0] {
			m[col] = row[j]
		}
		out[m["id"]] = m
	}
	return out
}

// testdata/plain (its README.md describes it): four leaf-disc photos, one of
// them a JPEG, with labels.csv and a corner tag that declares flip false.
func TestAugmentPlainFolder(t *testing.T) {
	if _, err := os.Stat(filepath.Join(plainFolder, "labels.csv")); err != nil {
		t.Fatalf("testdata/plain is missing: %v", err)
	}
	root := t.TempDir()
	out := filepath.Join(root, "out")
	// every-step.yaml flips; the corner tag says a mirrored tag is another
	// label, so the plan is refused as it stands.
	_, stderr := wantCode(t, exitUsage, "augment", "--in", plainFolder, "--out", out, "--plan", everyStepPlan, "--copies", "3")
	if !strings.Contains(stderr, `class "corner-tag"`) {
		t.Errorf("stderr %q does not name the corner-tag class", stderr)
	}
	wantCode(t, exitOK, "augment", "--in", plainFolder, "--out", out, "--plan", everyStepPlan, "--copies", "3", "--allow-label-change", "--quiet")
	stdout, _ := wantCode(t, exitOK, "verify", out)
	if !strings.Contains(stdout, "agree") {
		t.Errorf("verify printed %q", stdout)
	}
	recs := readRecords(t, out)
	labels := augLabels(t)
	var originals []*manifest.Record
	files := treeBytes(t, out)
	pngSig := []byte("\x89PNG\r\n\x1a\n")
	for _, r := range recs {
		if r.Lineage == nil {
			originals = append(originals, r)
		}
		if r.Group == "" || r.Split == "" {
			t.Errorf("record %s has no group or split", r.ID)
		}
		for _, p := range []string{r.Image, r.Mask, r.Instances} {
			if !strings.HasSuffix(p, ".png") || !bytes.HasPrefix(files[p], pngSig) {
				t.Errorf("record %s: %s is not a PNG", r.ID, p)
			}
		}
		src := r.ID
		if r.Lineage != nil {
			src = r.Lineage.Source
		}
		row := labels[src]
		if row == nil {
			t.Errorf("record %s: source %s is not in labels.csv", r.ID, src)
			continue
		}
		if got := r.Targets["lighting"]; !got.IsStr || got.Str != row["lighting"] {
			t.Errorf("record %s: lighting %v, labels.csv says %q", r.ID, got, row["lighting"])
		}
		if got := r.Targets["leaves"].String(); got != row["leaves"] || r.Targets["leaves"].IsStr {
			t.Errorf("record %s: leaves %v, labels.csv says %s", r.ID, r.Targets["leaves"], row["leaves"])
		}
	}
	if len(originals) != len(labels) {
		t.Fatalf("%d originals, labels.csv has %d rows", len(originals), len(labels))
	}
	// Sources are their own groups; copies follow the same rules as for a
	// trueset input.
	for _, r := range originals {
		if r.Group != r.ID {
			t.Errorf("plain source %s has group %s, want its own id", r.ID, r.Group)
		}
	}
	augCheckCopies(t, originals, recs, 3)
	// A plain folder's objects have no plan factors: copies must not make
	// up a center, size, aspect or angle for them.
	for _, r := range recs {
		for _, o := range r.Objects {
			if o.Center != nil || o.Size != nil || o.Aspect != nil || o.Angle != nil {
				t.Errorf("record %s object %d: planned factors made up for an object read from a plain folder: %+v", r.ID, o.Instance, o)
			}
		}
	}
	// The JPEG source and its copies are PNG on disk.
	jpg := 0
	for _, r := range recs {
		if r.ID == "disc-03" || (r.Lineage != nil && r.Lineage.Source == "disc-03") {
			jpg++
			if r.Image != "images/"+r.ID+".png" {
				t.Errorf("record %s image %s, want images/%s.png", r.ID, r.Image, r.ID)
			}
		}
	}
	if jpg == 0 {
		t.Error("no record of disc-03, the JPEG source")
	}
	if _, err := os.Stat(filepath.Join(plainFolder, "images", "disc-03.jpg")); err != nil {
		t.Errorf("the fixture's JPEG source is gone: %v", err)
	}
	if d := readDataset(t, out); d.Augment == nil || d.Augment.Source != "plain" || d.Augment.SourceSamples != len(labels) {
		t.Errorf("dataset.json augment = %+v", d.Augment)
	}
}

// The README's augmentation commands run as written (from the repository
// root, with the binary on PATH as "trueset").
func TestAugmentReadmeCommands(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary")
	}
	bin := buildBinary(t)
	readme, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	sec := string(readme)
	i := strings.Index(sec, "### Augmentation")
	if i < 0 {
		t.Fatal("README.md has no ### Augmentation section")
	}
	sec = sec[i+len("### Augmentation"):]
	if j := strings.Index(sec, "\n### "); j >= 0 {
		sec = sec[:j]
	}
	var script []string
	pieces := strings.Split(sec, "```")
	for i := 1; i < len(pieces); i += 2 { // the insides of the fences
		block := pieces[i]
		if !strings.HasPrefix(block, "sh\n") {
			continue
		}
		for _, line := range strings.Split(strings.TrimPrefix(block, "sh\n"), "\n") {
			if line = strings.TrimSpace(line); line != "" && !strings.HasPrefix(line, "#") {
				script = append(script, line)
			}
		}
	}
	if len(script) < 3 {
		t.Fatalf("the Augmentation section has %d commands", len(script))
	}
	work := t.TempDir()
	for _, dir := range []string{"testdata", "schema", "examples/plans"} {
		copyTree(t, filepath.Join("../..", dir), filepath.Join(work, dir))
	}
	// The section's example plan is examples/plans/light.yaml, which its
	// command names (augment's TestExamplePlanIsTheREADMEs checks that the
	// two are the same bytes).
	binDir := filepath.Dir(bin)
	if filepath.Base(bin) != "trueset" {
		link := filepath.Join(t.TempDir(), "trueset")
		if err := os.Symlink(bin, link); err != nil {
			t.Fatal(err)
		}
		binDir = filepath.Dir(link)
	}
	for _, line := range script {
		cmd := exec.Command("bash", "-euo", "pipefail", "-c", line)
		cmd.Dir = work
		cmd.Env = append(os.Environ(), "PATH="+binDir+string(os.PathListSeparator)+os.Getenv("PATH"))
		outb, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("README command %q: %v\n%s", line, err, outb)
		}
	}
	// The quoted lineage is the first copy's, shortened at "…".
	k := -1 // the json block that starts with "lineage"
	for off := 0; ; {
		i := strings.Index(sec[off:], "```json\n")
		if i < 0 {
			break
		}
		off += i + len("```json\n")
		if strings.HasPrefix(strings.TrimSpace(sec[off:]), `"lineage"`) {
			k = off - len("```json\n")
			break
		}
	}
	if k < 0 {
		t.Fatal("the Augmentation section quotes no lineage")
	}
	quoted := sec[k+len("```json\n"):]
	quoted = strings.Join(strings.Fields(quoted[:strings.Index(quoted, "```")]), "")
	quoted = strings.TrimPrefix(quoted, `"lineage":`)
	head, tail, ok := strings.Cut(quoted, "…,")
	if !ok {
		t.Fatalf("quoted lineage %s is not shortened with …", quoted)
	}
	var lin *manifest.Lineage
	for _, r := range readRecords(t, filepath.Join(work, "parts-aug")) {
		if r.ID == "000000-c01" {
			lin = r.Lineage
		}
	}
	if lin == nil {
		t.Fatal("parts-aug has no copy 000000-c01")
	}
	b, err := json.Marshal(lin)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(string(b), head) || !strings.HasSuffix(string(b), tail) {
		t.Errorf("README quotes the lineage\n%s…%s\nbut 000000-c01 has\n%s", head, tail, b)
	}
}
