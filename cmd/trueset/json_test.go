package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"image/png"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// decodeOneJSON decodes stdout into v and fails unless stdout is exactly one
// JSON document (whitespace around it allowed, nothing else).
func decodeOneJSON(t *testing.T, stdout string, v any) {
	t.Helper()
	dec := json.NewDecoder(strings.NewReader(stdout))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		t.Fatalf("stdout is not a JSON document: %v\n%s", err, stdout)
	}
	var extra json.RawMessage
	if err := dec.Decode(&extra); !errors.Is(err, io.EOF) {
		t.Fatalf("stdout holds more than one JSON document (next: %s, %v)\n%s", extra, err, stdout)
	}
}

// folderBytes is the total size of the regular files under dir.
func folderBytes(t *testing.T, dir string) int64 {
	t.Helper()
	var n int64
	err := filepath.WalkDir(dir, func(p string, e fs.DirEntry, err error) error {
		if err != nil || e.IsDir() {
			return err
		}
		st, err := e.Info()
		if err != nil {
			return err
		}
		n += st.Size()
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// sameSplits compares a summary's split table with dataset.json's, through
// their JSON (the form both are written in).
func sameSplits(t *testing.T, got, want manifest.SplitTable) {
	t.Helper()
	g, _ := json.Marshal(got)
	w, _ := json.Marshal(want)
	if !bytes.Equal(g, w) {
		t.Errorf("splits in the summary\n%s\ndiffer from dataset.json's\n%s", g, w)
	}
}

// recipeName is the name inside dataset.json's normalized recipe.
func recipeName(t *testing.T, d *manifest.Dataset) string {
	t.Helper()
	var r struct {
		Name string `json:"name"`
	}
	if err := json.Unmarshal(d.Recipe, &r); err != nil {
		t.Fatal(err)
	}
	return r.Name
}

func TestGenerateJSON(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "dice")
	stdout, stderr := wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "24", "--seed", "5", "--out", dir, "--json")
	if stderr != "" {
		t.Errorf("stderr: %q", stderr)
	}
	var j generateJSON
	decodeOneJSON(t, stdout, &j)
	d := readDataset(t, dir)
	recs := readRecords(t, dir)
	if j.Command != "generate" || j.Dir != dir || j.Recipe != "tabletop-dice" || j.Recipe != recipeName(t, d) || j.Seed != 5 || j.Seed != d.Seed {
		t.Errorf("command %q dir %q recipe %q seed %d, want generate, %q, %q and 5", j.Command, j.Dir, j.Recipe, j.Seed, dir, recipeName(t, d))
	}
	if j.Samples != 24 || j.Samples != d.Count || j.Samples != len(recs) || j.Resumed != 0 {
		t.Errorf("samples %d resumed %d; dataset.json count %d, manifest records %d", j.Samples, j.Resumed, d.Count, len(recs))
	}
	// A fresh run wrote every file in the folder.
	if want := folderBytes(t, dir); j.Bytes != want {
		t.Errorf("bytes %d, the folder holds %d", j.Bytes, want)
	}
	if j.Seconds <= 0 || j.SamplesPerSecond <= 0 {
		t.Errorf("seconds %v, samples/s %v: want both > 0", j.Seconds, j.SamplesPerSecond)
	}
	// Seconds is rounded to milliseconds and the rate to tenths.
	if rate := float64(j.Samples) / j.Seconds; math.Abs(rate-j.SamplesPerSecond) > 0.05+rate*0.001/j.Seconds {
		t.Errorf("samples/s %v, but %d samples in %vs is %v", j.SamplesPerSecond, j.Samples, j.Seconds, rate)
	}
	if j.Shard != nil || j.Shards != 0 {
		t.Errorf("not sharded, yet shard %v of %d", j.Shard, j.Shards)
	}
	sameSplits(t, j.Splits, d.Splits)
	counts := map[string]int{}
	for _, r := range recs {
		counts[r.Split]++
	}
	if !reflect.DeepEqual(counts, j.Splits.Counts) {
		t.Errorf("split counts %v, the manifest has %v", j.Splits.Counts, counts)
	}

	// Resuming a complete set: one document still, nothing written, every
	// sample kept; the note goes to stderr.
	stdout, stderr = wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "24", "--seed", "5", "--out", dir, "--json", "--resume")
	var again generateJSON
	decodeOneJSON(t, stdout, &again)
	if again.Samples != 24 || again.Resumed != 24 || again.Bytes != 0 || again.Seed != 5 || again.Dir != dir || !strings.Contains(stderr, "already complete") {
		t.Errorf("resume of a complete set: %+v, stderr %q", again, stderr)
	}
	sameSplits(t, again.Splits, d.Splits)

	// A shard says which one it is.
	sdir := filepath.Join(t.TempDir(), "part-1")
	stdout, _ = wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "24", "--shard", "1/3", "--out", sdir, "--json")
	var sj generateJSON
	decodeOneJSON(t, stdout, &sj)
	if sj.Shard == nil || *sj.Shard != 1 || sj.Shards != 3 || sj.Samples != 8 || sj.Bytes != folderBytes(t, sdir) {
		t.Errorf("shard 1/3 of 24: %+v (folder %d bytes)", sj, folderBytes(t, sdir))
	}
}

func TestGenerateJSONErrorsOnStderr(t *testing.T) {
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "keep.txt"), []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	stdout, stderr := wantCode(t, exitUsage, "generate", "--out", dir, "--json")
	if stdout != "" || !strings.HasPrefix(stderr, "trueset: ") {
		t.Errorf("stdout %q, stderr %q: want the error on stderr only", stdout, stderr)
	}
}

func TestAugmentJSON(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "in")
	wantCode(t, exitOK, "generate", "--count", "20", "--seed", "3", "--out", in, "--quiet")
	out := filepath.Join(root, "aug")
	stdout, _ := wantCode(t, exitOK, "augment", "--in", in, "--out", out, "--plan", "../../testdata/plans/every-step.yaml",
		"--copies", "2", "--json")
	var j augmentJSON
	decodeOneJSON(t, stdout, &j)
	src := readRecords(t, in)
	recs := readRecords(t, out)
	d := readDataset(t, out)
	train, copies := 0, 0
	for _, r := range src {
		if r.Split == "train" {
			train++
		}
	}
	for _, r := range recs {
		if r.Lineage != nil {
			copies++
		}
	}
	if j.Command != "augment" || j.Dir != out || j.Input != in || j.Plan != "every-step" || j.Seed != 1 {
		t.Errorf("command %q dir %q input %q plan %q seed %d", j.Command, j.Dir, j.Input, j.Plan, j.Seed)
	}
	if j.Sources != len(src) || j.Copies != 2*train || j.Copies != copies || j.Samples != len(recs) || j.Samples != j.Sources+j.Copies {
		t.Errorf("summary %+v; want %d sources, %d copies (2 × %d train), %d records", j, len(src), copies, train, len(recs))
	}
	if j.Resumed != 0 || j.Skipped == nil || len(j.Skipped) != 0 {
		t.Errorf("resumed %d, skipped %v: want 0 and []", j.Resumed, j.Skipped)
	}
	if want := folderBytes(t, out); j.Bytes != want {
		t.Errorf("bytes %d, the folder holds %d", j.Bytes, want)
	}
	if j.Seconds <= 0 {
		t.Errorf("seconds %v", j.Seconds)
	}
	sameSplits(t, j.Splits, d.Splits)

	stdout, _ = wantCode(t, exitOK, "augment", "--in", in, "--out", out, "--plan", "../../testdata/plans/every-step.yaml",
		"--copies", "2", "--json", "--resume")
	var again augmentJSON
	decodeOneJSON(t, stdout, &again)
	if again.Sources != j.Sources || again.Copies != j.Copies || again.Samples != j.Samples || again.Resumed != j.Samples || again.Bytes != 0 ||
		again.Plan != j.Plan || again.Seed != j.Seed || again.Dir != out {
		t.Errorf("resume of a complete set: %+v, first run %+v", again, j)
	}
}

func TestVerifyJSON(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "set")
	wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "16", "--seed", "2", "--out", dir, "--quiet")

	stdout, _ := wantCode(t, exitOK, "verify", dir, "--json", "--regenerate", "--workers", "2")
	var j verifyJSON
	decodeOneJSON(t, stdout, &j)
	if j.Seconds <= 0 {
		t.Errorf("seconds %v", j.Seconds)
	}
	j.Seconds = 0
	want := verifyJSON{Command: "verify", Dir: dir, Samples: 16, Problems: []problemJSON{}, OK: true, Regenerated: true}
	if !reflect.DeepEqual(j, want) {
		t.Errorf("clean set: %+v, want %+v", j, want)
	}

	// An image re-encoded with other compression: the same pixels and a
	// matching checksum pass every check, but the bytes are not the ones
	// the recipe and seed give.
	recs := readRecords(t, dir)
	victim := recs[3]
	p := filepath.Join(dir, victim.Image)
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(f)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := (&png.Encoder{CompressionLevel: png.NoCompression}).Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	editRecord(t, dir, victim.ID, func(r *manifest.Record) { r.SHA256["image"] = manifest.SHA256Hex(buf.Bytes()) })
	refreshManifestSum(t, dir)
	stdout, stderr := wantCode(t, exitFailure, "verify", dir, "--json", "--regenerate", "--workers", "2")
	j = verifyJSON{}
	decodeOneJSON(t, stdout, &j)
	if j.OK || !j.Regenerated || j.FirstDifference != victim.Image || len(j.Problems) != 0 || j.Samples != 16 {
		t.Errorf("re-encoded image: %+v, want first_difference %s", j, victim.Image)
	}
	if !strings.Contains(stderr, "differ") {
		t.Errorf("stderr %q does not say the bytes differ", stderr)
	}

	// A damaged mask: a problem with the record's id, exit 1, and no
	// regeneration (the checks failed first).
	mp := filepath.Join(dir, recs[5].Mask)
	if err := os.WriteFile(mp, []byte("not a png"), 0o644); err != nil {
		t.Fatal(err)
	}
	stdout, stderr = wantCode(t, exitFailure, "verify", dir, "--json", "--regenerate", "--max-problems", "0")
	j = verifyJSON{}
	decodeOneJSON(t, stdout, &j)
	if j.OK || j.Regenerated || j.FirstDifference != "" || len(j.Problems) == 0 {
		t.Fatalf("damaged mask: %+v", j)
	}
	for _, p := range j.Problems {
		if p.ID != recs[5].ID || p.Message == "" || p.File != recs[5].Mask || !slices.Contains(manifest.ProblemKinds, p.Check) {
			t.Errorf("problem %+v: want record %s, file %s, a known check and a message", p, recs[5].ID, recs[5].Mask)
		}
	}
	if j.Problems[0].Check != manifest.KindSHA256 {
		t.Errorf("first problem of a damaged mask: check %q, want sha256", j.Problems[0].Check)
	}
	if !strings.HasPrefix(stderr, "trueset: ") || !strings.Contains(stderr, "problems found") {
		t.Errorf("stderr %q", stderr)
	}

	// An incomplete folder: a dataset-wide problem (id "").
	if err := os.Remove(filepath.Join(dir, manifest.DatasetFile)); err != nil {
		t.Fatal(err)
	}
	stdout, _ = wantCode(t, exitFailure, "verify", dir, "--json")
	j = verifyJSON{}
	decodeOneJSON(t, stdout, &j)
	if j.OK || len(j.Problems) != 1 || j.Problems[0].ID != "" || !strings.Contains(j.Problems[0].Message, "dataset.json") ||
		j.Problems[0].File != "dataset.json" || j.Problems[0].Check != manifest.KindIncomplete {
		t.Errorf("no dataset.json: %+v", j)
	}

	// Not a folder: a usage error, nothing on stdout.
	stdout, _ = wantCode(t, exitUsage, "verify", filepath.Join(dir, "nope"), "--json")
	if stdout != "" {
		t.Errorf("stdout %q on a usage error", stdout)
	}
}

// split, merge and version print one JSON document of the shared shape, and
// what split and merge write verifies.
func TestSplitMergeVersionJSON(t *testing.T) {
	root := t.TempDir()
	dir := filepath.Join(root, "dice")
	wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "30", "--out", dir, "--quiet")
	stdout, _ := wantCode(t, exitOK, "split", dir, "--ratios", "train=0.5,val=0.25,test=0.25", "--stratify", "dice", "--json")
	var sj splitJSON
	decodeOneJSON(t, stdout, &sj)
	if sj.Command != "split" || sj.Dir != dir || sj.Samples != 30 || sj.Splits.Spec != "train=0.5,val=0.25,test=0.25" {
		t.Errorf("split --json: %+v", sj)
	}
	sameSplits(t, sj.Splits, readDataset(t, dir).Splits)
	wantCode(t, exitOK, "verify", dir)

	var parts []string
	for i := 0; i < 3; i++ {
		p := filepath.Join(root, fmt.Sprintf("part-%d", i))
		wantCode(t, exitOK, "generate", "--count", "30", "--seed", "4", "--shard", fmt.Sprintf("%d/3", i), "--out", p, "--quiet")
		parts = append(parts, p)
	}
	out := filepath.Join(root, "merged")
	stdout, _ = wantCode(t, exitOK, append(append([]string{"merge"}, parts...), "--out", out, "--json")...)
	var mj mergeJSON
	decodeOneJSON(t, stdout, &mj)
	d := readDataset(t, out)
	if mj.Command != "merge" || mj.Dir != out || !slices.Equal(mj.Shards, parts) || mj.Samples != 30 || mj.Seed != 4 || mj.Bytes != folderBytes(t, out) {
		t.Errorf("merge --json: %+v (folder %d bytes)", mj, folderBytes(t, out))
	}
	sameSplits(t, mj.Splits, d.Splits)
	wantCode(t, exitOK, "verify", out)

	stdout, _ = wantCode(t, exitOK, "version", "--json")
	var vj versionJSON
	decodeOneJSON(t, stdout, &vj)
	if vj.Command != "version" || vj.Version != version || vj.Go == "" || vj.OS == "" || vj.Arch == "" {
		t.Errorf("version --json: %+v", vj)
	}
}

// Every --json document starts with "command" and names its folder "dir",
// never "out", and counts "samples", never "records".
func TestJSONSharedKeys(t *testing.T) {
	root := t.TempDir()
	dir := filepath.Join(root, "set")
	docs := map[string]string{}
	docs["generate"], _ = wantCode(t, exitOK, "generate", "--count", "12", "--out", dir, "--json")
	docs["verify"], _ = wantCode(t, exitOK, "verify", dir, "--json")
	docs["split"], _ = wantCode(t, exitOK, "split", dir, "--json")
	docs["augment"], _ = wantCode(t, exitOK, "augment", "--in", dir, "--out", filepath.Join(root, "aug"), "--plan", "../../testdata/plans/every-step.yaml", "--json")
	for name, doc := range docs {
		var m map[string]any
		if err := json.Unmarshal([]byte(doc), &m); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if m["command"] != name || m["dir"] == nil || m["samples"] == nil || m["seconds"] == nil {
			t.Errorf("%s --json lacks command, dir, samples or seconds: %s", name, doc)
		}
		for _, old := range []string{"out", "records"} {
			if _, ok := m[old]; ok {
				t.Errorf("%s --json has %q", name, old)
			}
		}
		if name != "verify" {
			if _, ok := m["splits"].(map[string]any)["strata"].([]any); !ok {
				t.Errorf("%s --json: splits.strata is not a list", name)
			}
		}
		if !strings.HasPrefix(doc, "{\n  \"command\": ") {
			t.Errorf("%s --json does not start with command: %.40q", name, doc)
		}
	}
}
