package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"syscall"
	"testing"
	"time"
)

// badDir holds the corpus of bad inputs; README.md there lists every case.
var badDir = filepath.Join("..", "..", "testdata", "bad")

// badCase is one bad input run through the CLI. The fixture (a file or a
// folder under testdata/bad, or made by prepare) is copied to TMP/in; a
// sibling folder TMP/sibling holds a file the tool must not touch; output
// goes to TMP/out. want fragments may use {in} for the input path.
type badCase struct {
	file  string // under testdata/bad; for generated cases, the name in the README
	run   string // recipe | plan | plain | verify | augment | flag
	wrong string // what is wrong with it
	code  int    // the exit code
	want  []string
	// prepare makes a generated input in TMP and returns its path.
	prepare func(t *testing.T, tmp string) string
}

var badCases = []badCase{
	// Plain labeled folders, through augment --in.
	{file: "plain/truncated-png", run: "plain", code: exitFailure, wrong: "images/a.png ends 10 bytes into its IDAT chunk",
		want: []string{"{in}/images/a.png: corrupt", "not enough pixel data"}},
	{file: "plain/png-bad-crc", run: "plain", code: exitFailure, wrong: "the IDAT chunk's stored CRC-32 does not match its data (one byte of the CRC changed)",
		want: []string{"{in}/images/a.png: corrupt", "invalid checksum"}},
	{file: "plain/png-huge-header", run: "plain", code: exitFailure, wrong: "a valid IHDR declaring 100000×100000 pixels, no pixel data",
		want: []string{"{in}/images/a.png: too large", "100000×100000 = 10000000000 pixels", "not decoded"}},
	{file: "plain/jpeg-named-png-mask", run: "plain", code: exitFailure, wrong: "masks/a.png holds JPEG data",
		want: []string{"{in}/masks/a.png: JPEG content", "must be PNG"}},
	{file: "plain/mask-size-differs", run: "plain", code: exitFailure, wrong: "the mask is 8×6, its image 8×8",
		want: []string{"{in}/masks/a.png is 8×6 but {in}/images/a.png is 8×8", "a mask must have its image's size"}},
	{file: "plain/mask-unknown-value", run: "plain", code: exitFailure, wrong: "mask value 7, but classes.json lists only id 1",
		want: []string{"{in}/masks/a.png: value 7 (first at pixel x=2, y=2) is no class in classes.json"}},
	{file: "plain/labels-no-id-column", run: "plain", code: exitFailure, wrong: "labels.csv has no id column (its first column is \"stem\")",
		want: []string{"{in}/labels.csv:1:", `no "id" column in the header (stem,dots)`}},
	{file: "plain/labels-missing-row", run: "plain", code: exitFailure, wrong: "labels.csv has no row for image b",
		want: []string{"{in}/labels.csv:", `no row for "b"`}},
	{file: "plain/labels-not-finite", run: "plain", code: exitFailure, wrong: "a numeric column holds NaN",
		want: []string{"{in}/labels.csv:3:", `column "dots"`, `"NaN" is not a finite number`}},
	{file: "plain/labels-overflow", run: "plain", code: exitFailure, wrong: "a numeric column holds 1e999, beyond float64",
		want: []string{"{in}/labels.csv:3:", `column "dots"`, `"1e999" is not a finite number`}},
	{file: "plain/labels-unknown-id", run: "plain", code: exitFailure, wrong: "labels.csv has a row for c, which has no image",
		want: []string{"{in}/labels.csv:4:", `id "c" matches no image`}},
	{file: "plain/labels-short-row", run: "plain", code: exitFailure, wrong: "a labels.csv row has 2 fields under a 3-column header",
		want: []string{"{in}/labels.csv:3:", "row has 2 fields but the header has 3 columns"}},
	{file: "plain/duplicate-stems", run: "plain", code: exitFailure, wrong: "images/a.png and images/a.jpg share the stem a",
		want: []string{"{in}/images/a.png", "{in}/images/a.jpg", `two files with the stem "a"`}},
	{file: "plain/empty-image", run: "plain", code: exitFailure, wrong: "images/a.png is 0 bytes",
		want: []string{"{in}/images/a.png: empty file"}},
	{file: "plain/gif-named-png", run: "plain", code: exitFailure, wrong: "images/a.png holds GIF data",
		want: []string{"{in}/images/a.png: unknown format"}},
	{file: "plain/classes-json-syntax", run: "plain", code: exitFailure, wrong: "classes.json has a trailing comma in an object",
		want: []string{"{in}/classes.json:2:", "invalid character '}'"}},
	{file: "plain/instance-two-classes", run: "plain", code: exitFailure, wrong: "instance 1 covers pixels of class 1 and class 2",
		want: []string{"{in}/instances/a.png with {in}/masks/a.png", "instance 1 lies on two classes", "pixel x=5, y=2"}},

	// Trueset datasets, through verify and through augment --in.
	{file: "datasets/path-dotdot", run: "verify", code: exitFailure, wrong: `a record's image is "../sibling/000000.png"`,
		want: []string{"{in}/manifest.jsonl:1:", `path "../sibling/000000.png" leaves the dataset folder`}},
	{file: "datasets/path-dotdot", run: "augment", code: exitFailure, wrong: `a record's image is "../sibling/000000.png"`,
		want: []string{"{in}/manifest.jsonl:1:", `path "../sibling/000000.png" leaves the dataset folder`}},
	{file: "datasets/path-absolute", run: "verify", code: exitFailure, wrong: `a record's mask is "/etc/passwd"`,
		want: []string{"{in}/manifest.jsonl:1:", `path "/etc/passwd" leaves the dataset folder`}},
	{file: "datasets/path-absolute", run: "augment", code: exitFailure, wrong: `a record's mask is "/etc/passwd"`,
		want: []string{"{in}/manifest.jsonl:1:", `path "/etc/passwd" leaves the dataset folder`}},
	{file: "datasets/manifest-torn-line", run: "verify", code: exitFailure, wrong: "manifest.jsonl line 2 is cut in half",
		want: []string{"{in}/manifest.jsonl:2:", "manifest has 2 records, dataset.json says 3"}}, // verify reads on past a torn line
	{file: "datasets/manifest-torn-line", run: "augment", code: exitFailure, wrong: "manifest.jsonl line 2 is cut in half",
		want: []string{"{in}/manifest.jsonl:2:"}},
	{file: "datasets/sha-mismatch", run: "verify", code: exitFailure, wrong: "one byte of images/000001.png changed after its record was written",
		want: []string{"record 000001: images/000001.png: SHA-256", "record says"}},
	{file: "datasets/sha-mismatch", run: "augment", code: exitFailure, wrong: "one byte of images/000001.png changed after its record was written",
		want: []string{"{in}/images/000001.png: SHA-256", "the record says", "run trueset verify on the input"}},
	{file: "datasets/no-dataset-json", run: "verify", code: exitFailure, wrong: "dataset.json is missing (an interrupted run)",
		want: []string{"{in}/dataset.json: missing: the dataset is incomplete"}},
	{file: "datasets/no-dataset-json", run: "augment", code: exitFailure, wrong: "dataset.json is missing (an interrupted run)",
		want: []string{"{in}: has manifest.jsonl but no dataset.json", "incomplete trueset dataset"}},
	{file: "datasets/dataset-json-malformed", run: "verify", code: exitFailure, wrong: "dataset.json is cut in half",
		want: []string{"{in}/dataset.json: unexpected end of JSON input"}},
	{file: "datasets/dataset-json-malformed", run: "augment", code: exitFailure, wrong: "dataset.json is cut in half",
		want: []string{"{in}/dataset.json: unexpected end of JSON input"}},
	{file: "datasets/huge-png", run: "verify", code: exitFailure, wrong: "images/000000.png declares 100000×100000 (its record's SHA-256 matches)",
		want: []string{"record 000000: images/000000.png is 100000x100000, the record says 16x16"}},
	{file: "datasets/huge-png", run: "augment", code: exitFailure, wrong: "images/000000.png declares 100000×100000 (its record's SHA-256 matches)",
		want: []string{"{in}/images/000000.png: 100000×100000 pixels is over the budget"}},
	{file: "datasets/unknown-record-field", run: "verify", code: exitFailure, wrong: `record 000000 has a field "color_space" the schema does not know`,
		want: []string{"{in}/manifest.jsonl:1:", `unknown field "color_space"`}},
	{file: "datasets/unknown-record-field", run: "augment", code: exitFailure, wrong: `record 000000 has a field "color_space" the schema does not know`,
		want: []string{"{in}/manifest.jsonl:1:", `unknown field "color_space"`}},
	{file: "symlink-out (made in the test)", run: "verify", code: exitFailure, wrong: "images/000000.png is a symbolic link to a file beside the dataset folder (same bytes, so the SHA-256 matches)",
		want: []string{`record 000000: image: path "images/000000.png" is a symbolic link to`, "outside the dataset folder"}, prepare: badSymlinkDataset},
	{file: "symlink-out (made in the test)", run: "augment", code: exitFailure, wrong: "images/000000.png is a symbolic link to a file beside the dataset folder (same bytes, so the SHA-256 matches)",
		want: []string{`record 000000: path "images/000000.png" is a symbolic link to`, "outside the dataset folder"}, prepare: badSymlinkDataset},

	// Recipes, through generate --recipe.
	{file: "recipes/canvas-4097-wide.yaml", run: "recipe", code: exitUsage, wrong: "canvas.width 4097, one over the bound",
		want: []string{"{in}:4:10: canvas.width", "1..4096", "(got 4097)"}},
	{file: "recipes/count-1001.yaml", run: "recipe", code: exitUsage, wrong: "one object entry with count 1001",
		want: []string{"{in}:13:16: layers[0].objects[0].count", "at most 1000 objects per scene (got 1001)"}},
	{file: "recipes/count-1001-two-layers.yaml", run: "recipe", code: exitUsage, wrong: "two layers of up to 600 and 401 objects",
		want: []string{"{in}:9:1: layers", "at most 1000 objects", "(got 1001)"}},
	{file: "glyph-chars-4097.yaml (made in the test)", run: "recipe", code: exitUsage, wrong: "glyph.chars of 4097 characters (\"0123456789\" repeated), over the 4096 bound",
		want: []string{"{in}:", "layers[0].objects[0].glyph.chars", "at most 4096 characters (got 4097 characters)"}, prepare: badCharsRecipe},
	{file: "recipe-over-1MiB.yaml (made in the test)", run: "recipe", code: exitUsage, wrong: "a valid recipe padded with comments to 1 MiB + 1 byte",
		want: []string{"{in}: recipe is 1048577 bytes; at most 1048576 allowed"}, prepare: badBigRecipe},
	{file: "recipes/impossible-layout.yaml", run: "recipe", code: exitUsage, wrong: "twenty non-overlapping 12-pixel discs on a 32×32 canvas",
		want: []string{"{in}: layers[0].layout: sample 0 cannot be laid out", "could not place object"}},
	{file: "recipes/unknown-field.yaml", run: "recipe", code: exitUsage, wrong: `an object with the field "weight"`,
		want: []string{"{in}:14:9: layers[0].objects[0].weight", `unknown field "weight"`}},
	{file: "recipes/unknown-class.yaml", run: "recipe", code: exitUsage, wrong: "an object of an undeclared class",
		want: []string{"{in}:11:16: layers[0].objects[0].class", "declared classes: dot", `(got "square")`}},
	{file: "recipes/malformed.yaml", run: "recipe", code: exitUsage, wrong: "a flow list [16 that is never closed",
		want: []string{"{in}:", "YAML syntax", "did not find expected ',' or ']'"}},

	// Issue 11: files that are not regular files, silent acceptance, unsafe names.
	{file: "recipe-fifo.yaml (made in the test)", run: "recipe", code: exitUsage, wrong: "the recipe is a named pipe with no writer (reading it would wait forever)",
		want: []string{"{in}: a named pipe, not a regular file"}, prepare: badFIFORecipe},
	{file: "recipe-dev-zero.yaml (made in the test)", run: "recipe", code: exitUsage, wrong: "the recipe is a symbolic link to /dev/zero (endless zeros; Stat says 0 bytes)",
		want: []string{"{in}: a character device, not a regular file"}, prepare: badDevZeroRecipe},
	{file: "font-fifo.yaml (made in the test)", run: "recipe", code: exitUsage, wrong: "a glyph font file that is a named pipe",
		want: []string{"{in}:", "layers[0].objects[0].glyph.file", "a named pipe, not a regular file"}, prepare: badFIFOFont},
	{file: "recipes/second-document.yaml", run: "recipe", code: exitUsage, wrong: "a second YAML document after ---",
		want: []string{"{in}:15:1:", "a recipe is one YAML document; a second one starts here"}},
	{file: "recipes/count-given-twice.yaml", run: "recipe", code: exitUsage, wrong: `a weighted count giving the count 1 twice ({"1": 1, "1": 5})`,
		want: []string{"{in}:13:", "layers[0].objects[0].count", "count 1 is given twice"}},
	{file: "recipes/class-name-200-bytes.yaml", run: "recipe", code: exitUsage, wrong: "a class name of 200 bytes, which every record would repeat",
		want: []string{"{in}:7:", "classes[0].name", "at most 64 bytes"}},
	{file: "datasets/id-dotdot", run: "verify", code: exitFailure, wrong: `a record's id is "../../victim" (augment would name files after it)`,
		want: []string{"{in}/manifest.jsonl:1:", `record id "../../victim" is not a safe file name`}},
	{file: "datasets/id-dotdot", run: "augment", code: exitFailure, wrong: `a record's id is "../../victim" (augment would name files after it)`,
		want: []string{"{in}/manifest.jsonl:1:", `record id "../../victim" is not a safe file name`}},
	{file: "datasets/path-dataset-json", run: "verify", code: exitFailure, wrong: `a record's image is "dataset.json"`,
		want: []string{"{in}/manifest.jsonl:1:", `image path "dataset.json" is not a file under images/`}},
	{file: "datasets/path-dataset-json", run: "augment", code: exitFailure, wrong: `a record's image is "dataset.json"`,
		want: []string{"{in}/manifest.jsonl:1:", `image path "dataset.json" is not a file under images/`}},

	// Issue 15: packed sets (made in the test with generate --layout packed).
	{file: "packed-link-out (made in the test)", run: "verify", code: exitFailure, wrong: "a packed set whose first pack is a symbolic link to a copy of itself beside the dataset folder",
		want: []string{`packs/train-00000.tar: path "packs/train-00000.tar" is a symbolic link to`, "outside the dataset folder"}, prepare: badPackedLinkOut},
	{file: "packed-link-out (made in the test)", run: "augment", code: exitFailure, wrong: "a packed set whose first pack is a symbolic link to a copy of itself beside the dataset folder",
		want: []string{"packs/train-00000.tar:", "outside the dataset folder"}, prepare: badPackedLinkOut},
	{file: "packed-fifo (made in the test)", run: "verify", code: exitFailure, wrong: "a packed set whose first pack is a named pipe with no writer",
		want: []string{"packs/train-00000.tar: a named pipe, not a regular file"}, prepare: badPackedFIFO},
	{file: "packed-fifo (made in the test)", run: "augment", code: exitFailure, wrong: "a packed set whose first pack is a named pipe with no writer",
		want: []string{".png: packs/train-00000.tar: a named pipe, not a regular file"}, prepare: badPackedFIFO},
	{file: "packed-index-past-end (made in the test)", run: "augment", code: exitFailure, wrong: "packs/index.jsonl puts sample 000000's image 1 TB into a 70 kB pack",
		want: []string{"{in}/packs/index.jsonl:1:", "is not inside the sample's"}, prepare: badPackedIndex},

	// Augmentation plans and flags, through augment.
	{file: "plans/steps-201.yaml", run: "plan", code: exitUsage, wrong: "201 steps",
		want: []string{"{in}:404:5: pixels[200]", "at most 200 steps"}},
	{file: "plans/unknown-field.yaml", run: "plan", code: exitUsage, wrong: `a step with the field "chanse"`,
		want: []string{"{in}:6:5: pixels[0].chanse", `unknown field "chanse"`, `did you mean "chance"?`}},
	{file: "plans/malformed.yaml", run: "plan", code: exitUsage, wrong: "a flow list [horizontal that is never closed",
		want: []string{"{in}:", "YAML syntax", "did not find expected ',' or ']'"}},
	{file: "--copies 1001 (a flag)", run: "flag", code: exitUsage, wrong: "--copies 1001, one over the bound",
		want: []string{"--copies 1001: want 0..1000"}},
}

func TestBadInput(t *testing.T) {
	plan, err := filepath.Abs(filepath.Join("..", "..", "testdata", "plans", "every-step.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	plainOK, err := filepath.Abs(filepath.Join("..", "..", "testdata", "plain"))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range badCases {
		t.Run(c.run+":"+c.file, func(t *testing.T) {
			tmp := t.TempDir()
			sibling := filepath.Join(tmp, "sibling")
			badWrite(t, filepath.Join(sibling, "keep.txt"), []byte("not the tool's\n"))
			var in string
			switch {
			case c.prepare != nil:
				in = c.prepare(t, tmp)
			case strings.HasSuffix(c.file, ".yaml"):
				in = filepath.Join(tmp, "in", filepath.Base(c.file))
				badCopy(t, filepath.Join(badDir, c.file), in)
			case c.run == "flag":
				in = filepath.Join(tmp, "in")
				badCopy(t, plainOK, in)
			default:
				in = filepath.Join(tmp, "in")
				badCopy(t, filepath.Join(badDir, c.file), in)
				// The file a "../sibling/…" path would reach, so only the
				// path check can refuse it.
				if b, err := os.ReadFile(filepath.Join(in, "images", "000000.png")); err == nil {
					badWrite(t, filepath.Join(sibling, "000000.png"), b)
				}
			}
			out := filepath.Join(tmp, "out")
			var args []string
			switch c.run {
			case "recipe":
				args = []string{"generate", "--recipe", in, "--out", out, "--count", "3", "--quiet"}
			case "plan":
				plain := filepath.Join(tmp, "plain")
				badCopy(t, plainOK, plain)
				args = []string{"augment", "--in", plain, "--out", out, "--plan", in, "--quiet"}
			case "plain", "augment":
				args = []string{"augment", "--in", in, "--out", out, "--plan", plan, "--quiet"}
			case "flag":
				args = []string{"augment", "--in", in, "--out", out, "--plan", plan, "--copies", "1001", "--quiet"}
			case "verify":
				args = []string{"verify", in}
			default:
				t.Fatalf("unknown run %q", c.run)
			}

			before := badSnapshot(t, tmp, out)
			code, stdout, stderr := runBounded(t, args...)
			all := stdout + stderr
			if code != c.code {
				t.Errorf("exit %d, want %d", code, c.code)
			}
			for _, w := range c.want {
				if w = strings.ReplaceAll(w, "{in}", in); !strings.Contains(all, w) {
					t.Errorf("output lacks %q", w)
				}
			}
			if t.Failed() {
				t.Logf("trueset %s\nstdout: %s\nstderr: %s", strings.Join(args, " "), stdout, stderr)
			}
			after := badSnapshot(t, tmp, out)
			badSame(t, before, after)
			if _, err := os.Lstat(filepath.Join(out, "dataset.json")); err == nil {
				t.Error("a refused input left dataset.json in the output")
			}
		})
	}
}

// TestBadInputREADME keeps testdata/bad/README.md and the corpus in step with
// the table above: every fixture is a case, every case's file is there and
// is listed in the README with its expected fragment.
func TestBadInputREADME(t *testing.T) {
	readme, err := os.ReadFile(filepath.Join(badDir, "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	listed := map[string]bool{}
	for _, c := range badCases {
		listed[c.file] = true
		if c.prepare == nil && c.run != "flag" {
			if _, err := os.Stat(filepath.Join(badDir, c.file)); err != nil {
				t.Errorf("case %s: %v", c.file, err)
			}
		}
		row := badREADMERow(c)
		if !strings.Contains(string(readme), row) {
			t.Errorf("README.md lacks the row\n%s", row)
		}
	}
	if len(badCases) < 25 {
		t.Errorf("%d cases, want at least 25", len(badCases))
	}
	for _, sub := range []string{"plain", "datasets", "recipes", "plans"} {
		ents, err := os.ReadDir(filepath.Join(badDir, sub))
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range ents {
			if !listed[sub+"/"+e.Name()] {
				t.Errorf("%s/%s is in testdata/bad but not in the table", sub, e.Name())
			}
		}
	}
	var size int64
	filepath.WalkDir(badDir, func(p string, e fs.DirEntry, err error) error {
		if err == nil && e.Type().IsRegular() {
			if st, err := e.Info(); err == nil {
				size += st.Size()
			}
		}
		return err
	})
	if size > 200<<10 {
		t.Errorf("testdata/bad holds %d bytes, want at most 200 KiB", size)
	}
	if os.Getenv("TRUESET_PRINT_BAD_TABLE") != "" {
		for _, c := range badCases {
			fmt.Println(badREADMERow(c))
		}
	}
}

// badREADMERow is a case's row in README.md.
func badREADMERow(c badCase) string {
	var w []string
	for _, s := range c.want {
		w = append(w, "`"+strings.ReplaceAll(s, "|", `\|`)+"`")
	}
	via := map[string]string{
		"plain": "augment --in", "augment": "augment --in", "verify": "verify", "recipe": "generate --recipe",
		"plan": "augment --plan", "flag": "augment",
	}[c.run]
	return fmt.Sprintf("| `%s` | %s | %s | %d | %s |", c.file, via, c.wrong, c.code, strings.Join(w, " … "))
}

// badSymlinkDataset generates a small dataset and replaces one image by a
// symbolic link to the same bytes in the sibling folder.
func badSymlinkDataset(t *testing.T, tmp string) string {
	in := filepath.Join(tmp, "in")
	wantCode(t, exitOK, "generate", "--out", in, "--count", "3", "--quiet")
	img := filepath.Join(in, "images", "000000.png")
	b, err := os.ReadFile(img)
	if err != nil {
		t.Fatal(err)
	}
	badWrite(t, filepath.Join(tmp, "sibling", "000000.png"), b)
	if err := os.Remove(img); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(filepath.Join("..", "..", "sibling", "000000.png"), img); err != nil {
		t.Fatalf("symbolic link: %v", err)
	}
	return in
}

// badPacked generates a small packed set in TMP/in.
func badPacked(t *testing.T, tmp string) string {
	in := filepath.Join(tmp, "in")
	wantCode(t, exitOK, "generate", "--out", in, "--count", "6", "--quiet", "--layout", "packed")
	return in
}

// badPackedLinkOut: the first pack moved beside the set, a link left.
func badPackedLinkOut(t *testing.T, tmp string) string {
	in := badPacked(t, tmp)
	p := filepath.Join(in, "packs", "train-00000.tar")
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	badWrite(t, filepath.Join(tmp, "sibling", "train-00000.tar"), b)
	os.Remove(p)
	if err := os.Symlink(filepath.Join("..", "..", "sibling", "train-00000.tar"), p); err != nil {
		t.Fatal(err)
	}
	return in
}

// badPackedFIFO: the first pack replaced by a named pipe.
func badPackedFIFO(t *testing.T, tmp string) string {
	in := badPacked(t, tmp)
	p := filepath.Join(in, "packs", "train-00000.tar")
	os.Remove(p)
	if err := syscall.Mkfifo(p, 0o644); err != nil {
		t.Fatal(err)
	}
	return in
}

// badPackedIndex: the index says sample 000000's image is 1 TB long.
func badPackedIndex(t *testing.T, tmp string) string {
	in := badPacked(t, tmp)
	p := filepath.Join(in, "packs", "index.jsonl")
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	i := bytes.Index(b, []byte(`["images/000000.png",`))
	j := i + bytes.IndexByte(b[i:], ']')
	k := bytes.LastIndexByte(b[:j], ',')
	b = append(append(append([]byte{}, b[:k+1]...), []byte("1000000000000")...), b[j:]...)
	badWrite(t, p, b)
	return in
}

// badCharsRecipe is a recipe whose glyph.chars is 4097 characters long.
func badCharsRecipe(t *testing.T, tmp string) string {
	chars := strings.Repeat("0123456789", 410)[:4097]
	src := "name: many-chars\ncanvas:\n  width: 32\n  height: 32\nclasses:\n  - name: digit\n    color: [200, 40, 40]\n" +
		"layers:\n  - objects:\n      - class: digit\n        glyph:\n          chars: \"" + chars + "\"\n        count: 1\n        size: 12\n"
	p := filepath.Join(tmp, "in", "glyph-chars-4097.yaml")
	badWrite(t, p, []byte(src))
	return p
}

// badBigRecipe is a valid recipe padded with comment lines to 1 MiB + 1 byte.
func badBigRecipe(t *testing.T, tmp string) string {
	src := "name: big\ncanvas:\n  width: 16\n  height: 16\nclasses:\n  - name: dot\n    color: [200, 40, 40]\n" +
		"layers:\n  - objects:\n      - class: dot\n        shape: circle\n        count: 1\n        size: 6\n"
	var b strings.Builder
	b.WriteString(src)
	line := "# " + strings.Repeat("padding ", 12) + "\n"
	for b.Len()+len(line) <= 1<<20 {
		b.WriteString(line)
	}
	b.WriteString(strings.Repeat("#", 1<<20+1-b.Len()-1) + "\n")
	if b.Len() != 1<<20+1 {
		t.Fatalf("recipe is %d bytes", b.Len())
	}
	p := filepath.Join(tmp, "in", "recipe-over-1MiB.yaml")
	badWrite(t, p, []byte(b.String()))
	return p
}

func badWrite(t *testing.T, p string, b []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// badCopy copies a file or a folder tree.
func badCopy(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		q := filepath.Join(dst, rel)
		if e.IsDir() {
			return os.MkdirAll(q, 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		badWrite(t, q, b)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

// badSnapshot records every entry under root except skip: kind, size,
// modification time, inode and SHA-256, so even a rewrite with the same
// bytes shows.
func badSnapshot(t *testing.T, root, skip string) map[string]string {
	t.Helper()
	m := map[string]string{}
	err := filepath.WalkDir(root, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if p == skip {
			return filepath.SkipDir
		}
		st, err := os.Lstat(p)
		if err != nil {
			return err
		}
		ino := uint64(0)
		if s, ok := st.Sys().(*syscall.Stat_t); ok {
			ino = uint64(s.Ino)
		}
		// A folder's time changes with its entries, which are compared
		// themselves: the folder gives only its kind.
		desc := st.Mode().String()
		if !st.IsDir() {
			desc = fmt.Sprintf("%v %d %d %d", st.Mode(), st.Size(), st.ModTime().UnixNano(), ino)
		}
		switch {
		case st.Mode()&fs.ModeSymlink != 0:
			target, _ := os.Readlink(p)
			desc += " -> " + target
		case st.Mode().IsRegular():
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			s := sha256.Sum256(b)
			desc += " " + hex.EncodeToString(s[:])
		}
		rel, _ := filepath.Rel(root, p)
		m[rel] = desc
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func badSame(t *testing.T, before, after map[string]string) {
	t.Helper()
	var diffs []string
	for p, b := range before {
		if a, ok := after[p]; !ok {
			diffs = append(diffs, p+" was removed")
		} else if a != b {
			diffs = append(diffs, p+" changed")
		}
	}
	for p := range after {
		if _, ok := before[p]; !ok {
			diffs = append(diffs, p+" appeared")
		}
	}
	sort.Strings(diffs)
	for _, d := range diffs {
		t.Errorf("outside the output folder: %s", d)
	}
}

// Bounds every hostile input must respect (issue 11): a refusal comes within
// badTimeLimit (a hang detector, far above any honest run here, not a speed
// test), allocates at most badAllocLimit in total (reading /dev/zero or a
// decompression bomb would blow it), and never prints a Go panic or
// goroutine stack.
const (
	badTimeLimit  = 60 * time.Second
	badAllocLimit = 1 << 30
)

// runBounded runs the CLI in-process like runCLI and enforces those bounds.
func runBounded(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	done := make(chan struct{})
	go func() {
		defer close(done)
		code, stdout, stderr = runCLI(t, args...)
	}()
	select {
	case <-done:
	case <-time.After(badTimeLimit):
		t.Fatalf("trueset %s: no answer within %v (a hang)", strings.Join(args, " "), badTimeLimit)
	}
	runtime.ReadMemStats(&after)
	if n := after.TotalAlloc - before.TotalAlloc; n > badAllocLimit {
		t.Errorf("trueset %s allocated %d MiB, over the %d MiB bound", strings.Join(args, " "), n>>20, badAllocLimit>>20)
	}
	for _, s := range []string{"goroutine ", "panic:", "runtime error"} {
		if strings.Contains(stdout+stderr, s) {
			t.Errorf("trueset %s printed %q:\n%s%s", strings.Join(args, " "), s, stdout, stderr)
		}
	}
	return code, stdout, stderr
}

// badFIFORecipe is a named pipe where the recipe should be.
func badFIFORecipe(t *testing.T, tmp string) string {
	p := filepath.Join(tmp, "in", "recipe-fifo.yaml")
	badWrite(t, filepath.Join(tmp, "in", ".keep"), nil)
	if err := syscall.Mkfifo(p, 0o644); err != nil {
		t.Fatalf("mkfifo: %v", err)
	}
	return p
}

// badDevZeroRecipe is a symbolic link to /dev/zero where the recipe should be.
func badDevZeroRecipe(t *testing.T, tmp string) string {
	p := filepath.Join(tmp, "in", "recipe-dev-zero.yaml")
	badWrite(t, filepath.Join(tmp, "in", ".keep"), nil)
	if err := os.Symlink("/dev/zero", p); err != nil {
		t.Fatalf("symlink: %v", err)
	}
	return p
}

// badFIFOFont is a valid recipe whose glyph font file is a named pipe.
func badFIFOFont(t *testing.T, tmp string) string {
	src := "name: pipe-font\ncanvas:\n  width: 32\n  height: 32\nclasses:\n  - name: digit\n    color: [200, 40, 40]\n" +
		"layers:\n  - objects:\n      - class: digit\n        glyph:\n          file: font.ttf\n          chars: \"123\"\n        count: 1\n        size: 12\n"
	p := filepath.Join(tmp, "in", "font-fifo.yaml")
	badWrite(t, p, []byte(src))
	if err := syscall.Mkfifo(filepath.Join(tmp, "in", "font.ttf"), 0o644); err != nil {
		t.Fatalf("mkfifo: %v", err)
	}
	return p
}
