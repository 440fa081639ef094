package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// Issue 15: every command that reads a dataset reads the packed layout.
// The reference is the folder twin: the same preset, seed and count
// written in the folder layout, which these commands have always read
// (their own tests check the folder results against recounts, image/png
// and the published formats). A packed set has no images/, masks/ or
// instances/ folder, so a reader that built DIR/images/... itself would
// fail here rather than pass.

// twinSets generates tabletop-dice (40 samples, seed 7: the set the
// batches in testdata/batches were dumped from) in both layouts, as
// TMP/folder/dice7 and TMP/packed/dice7, so that outputs naming the
// dataset name it alike when run from the parent folder.
func twinSets(t *testing.T) (tmp string) {
	t.Helper()
	tmp = t.TempDir()
	base := []string{"generate", "--preset", "tabletop-dice", "--count", "40", "--seed", "7", "--quiet"}
	wantCode(t, exitOK, append(base, "--out", filepath.Join(tmp, "folder", "dice7"))...)
	wantCode(t, exitOK, append(base, "--layout", "packed", "--pack-size", "64KiB", "--out", filepath.Join(tmp, "packed", "dice7"))...)
	for _, sub := range []string{manifest.ImagesDir, manifest.MasksDir, manifest.InstancesDir} {
		if _, err := os.Stat(filepath.Join(tmp, "packed", "dice7", sub)); err == nil {
			t.Fatalf("the packed set has a %s folder", sub)
		}
	}
	if d := readDataset(t, filepath.Join(tmp, "packed", "dice7")); d.Layout == nil || len(d.Layout.Packs) < 3 {
		t.Fatalf("the packed set's layout is %+v; want several packs", d.Layout)
	}
	return tmp
}

// secondsField is the one timing every --json summary carries.
var secondsField = regexp.MustCompile(`"seconds": [0-9.e+-]+`)

// inBoth runs args from TMP/folder and from TMP/packed (args name the set
// dice7, outputs NAME, which lands in TMP/<layout>/NAME) and wants the
// same exit code, stdout and stderr, timings aside.
func inBoth(t *testing.T, tmp string, want int, args ...string) {
	t.Helper()
	var outs [2]string
	for i, layout := range []string{"folder", "packed"} {
		t.Chdir(filepath.Join(tmp, layout))
		code, stdout, stderr := runCLI(t, args...)
		if code != want {
			t.Fatalf("%s: trueset %s: exit %d, want %d\n%s%s", layout, strings.Join(args, " "), code, want, stdout, stderr)
		}
		outs[i] = secondsField.ReplaceAllString(stdout+"\x00"+stderr, `"seconds": 0`)
	}
	if outs[0] != outs[1] {
		t.Errorf("trueset %s prints on the packed set\n%s\nbut on the folder set\n%s", strings.Join(args, " "), outs[1], outs[0])
	}
}

// sameOutput wants TMP/folder/name and TMP/packed/name (a file or a
// folder) byte for byte equal.
func sameOutput(t *testing.T, tmp, name string) {
	t.Helper()
	killSameTree(t, filepath.Join(tmp, "folder", name), filepath.Join(tmp, "packed", name))
}

func TestReadersPackedEqualFolder(t *testing.T) {
	tmp := twinSets(t)
	batches, err := filepath.Abs(filepath.Join("..", "..", "testdata", "batches"))
	if err != nil {
		t.Fatal(err)
	}
	plan, err := filepath.Abs(filepath.Join("..", "..", "testdata", "plans", "every-step.yaml"))
	if err != nil {
		t.Fatal(err)
	}

	inBoth(t, tmp, exitOK, "verify", "dice7")
	inBoth(t, tmp, exitOK, "verify", "dice7", "--json")
	inBoth(t, tmp, exitOK, "stats", "dice7")
	inBoth(t, tmp, exitOK, "stats", "dice7", "--json")

	inBoth(t, tmp, exitOK, "preview", "dice7", "--out", "sheet.png")
	sameOutput(t, tmp, "sheet.png")
	inBoth(t, tmp, exitOK, "report", "dice7", "--out", "report.html")
	sameOutput(t, tmp, "report.html")

	inBoth(t, tmp, exitOK, "export", "dice7", "--format", "objects-json", "--out", "objects.json")
	sameOutput(t, tmp, "objects.json")
	inBoth(t, tmp, exitOK, "export", "dice7", "--format", "center-boxes", "--split", "train", "--out", "boxes")
	sameOutput(t, tmp, "boxes")

	// The batches make_batches.py dumped from this set: a clean one, and
	// one whose loader mirrors images but not masks (an error finding).
	inBoth(t, tmp, exitOK, "readback", "dice7", filepath.Join(batches, "dice7-ok.npz"), "--json")
	inBoth(t, tmp, exitFailure, "readback", "dice7", filepath.Join(batches, "dice7-flip-image-only.npz"), "--json", "--sheet", "flagged.png")
	sameOutput(t, tmp, "flagged.png")

	// augment writes its input's layout (and pack size): the packed
	// input's copy is the folder input's copy converted; with --layout
	// folder it is the folder input's copy itself.
	augment := []string{"augment", "--in", "dice7", "--plan", plan, "--copies", "1", "--seed", "3", "--quiet"}
	inBoth(t, tmp, exitOK, append(augment, "--out", "aug")...)
	wantCode(t, exitOK, "convert", "--in", filepath.Join(tmp, "folder", "aug"), "--out", filepath.Join(tmp, "aug-converted"), "--layout", "packed", "--pack-size", "64KiB", "--quiet")
	killSameTree(t, filepath.Join(tmp, "aug-converted"), filepath.Join(tmp, "packed", "aug"))
	t.Chdir(filepath.Join(tmp, "packed"))
	wantCode(t, exitOK, append(augment, "--out", "aug-folder", "--layout", "folder")...)
	killSameTree(t, filepath.Join(tmp, "folder", "aug"), filepath.Join(tmp, "packed", "aug-folder"))

	// verify --regenerate renders the packed set again in its own layout
	// and pack size and compares every byte.
	inBoth(t, tmp, exitOK, "verify", "dice7", "--regenerate", "--workers", "2")

	// split rewrites the packed set's packs (they are per split and hold
	// the manifest lines): the result is the folder set's re-split,
	// converted to packed with the same pack size.
	inBoth(t, tmp, exitOK, "split", "dice7", "--ratios", "train=0.5,val=0.25,test=0.25", "--json")
	wantCode(t, exitOK, "convert", "--in", filepath.Join(tmp, "folder", "dice7"), "--out", filepath.Join(tmp, "converted"), "--layout", "packed", "--pack-size", "64KiB", "--quiet")
	killSameTree(t, filepath.Join(tmp, "converted"), filepath.Join(tmp, "packed", "dice7"))
	inBoth(t, tmp, exitOK, "verify", "dice7", "--json")
	inBoth(t, tmp, exitOK, "stats", "dice7", "--json")
	inBoth(t, tmp, exitOK, "verify", "dice7", "--regenerate", "--workers", "2")
}

// A packed input whose member bytes differ from the record, or whose pack
// is cut short, is refused by augment naming the record's file (a pack
// that is a named pipe or links out is in the bad-input corpus).
func TestAugmentPackedInputRefused(t *testing.T) {
	tmp := twinSets(t)
	set := filepath.Join(tmp, "packed", "dice7")
	plan, err := filepath.Abs(filepath.Join("..", "..", "testdata", "plans", "every-step.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	d := readDataset(t, set)
	first := d.Layout.Packs[0].Name
	var idx manifest.IndexEntry
	for _, e := range readIndex(t, set) {
		if e.Pack == first {
			idx = e
			break
		}
	}
	img := idx.Files[1] // the first sample's image member in the first pack
	for _, c := range []struct {
		name   string
		damage func(dir string)
		want   []string
	}{
		{"a flipped byte after the image's header", func(dir string) {
			p := filepath.Join(dir, first)
			b := mustRead(t, p)
			b[img.Off+img.Size-20] ^= 0xff
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}, []string{"record " + idx.ID + ": ", filepath.Join("{in}", img.Name) + ": SHA-256", "run trueset verify on the input"}},
		{"a pack cut short", func(dir string) {
			if err := os.Truncate(filepath.Join(dir, first), img.Off+10); err != nil {
				t.Fatal(err)
			}
		}, []string{"record " + idx.ID + ": ", img.Name, first + " ends at byte"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			in := filepath.Join(t.TempDir(), "in")
			killCopyTree(t, set, in)
			c.damage(in)
			code, _, stderr := runBounded(t, "augment", "--in", in, "--out", filepath.Join(t.TempDir(), "out"), "--plan", plan, "--quiet")
			if code != exitFailure {
				t.Fatalf("exit %d, want %d\n%s", code, exitFailure, stderr)
			}
			for _, w := range c.want {
				if w = strings.ReplaceAll(w, "{in}", in); !strings.Contains(stderr, w) {
					t.Errorf("stderr %q lacks %q", stderr, w)
				}
			}
		})
	}
}

// readIndex reads packs/index.jsonl with encoding/json.
func readIndex(t *testing.T, dir string) []manifest.IndexEntry {
	t.Helper()
	var out []manifest.IndexEntry
	for _, line := range bytes.Split(bytes.TrimSuffix(mustRead(t, filepath.Join(dir, manifest.PacksDir, manifest.IndexFile)), []byte("\n")), []byte("\n")) {
		var e manifest.IndexEntry
		if err := json.Unmarshal(line, &e); err != nil {
			t.Fatal(err)
		}
		out = append(out, e)
	}
	return out
}

// split reads every member of a packed set to write the packs again: a
// member whose bytes differ from its record stops it before anything in
// the set changes (the folder layout's split does not read sample files).
func TestSplitPackedDamagedChangesNothing(t *testing.T) {
	tmp := twinSets(t)
	set := filepath.Join(tmp, "packed", "dice7")
	e := readIndex(t, set)[5]
	img := e.Files[1]
	p := filepath.Join(set, e.Pack)
	b := mustRead(t, p)
	b[img.Off+img.Size-20] ^= 0xff
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	before := filepath.Join(tmp, "before")
	killCopyTree(t, set, before)
	code, _, stderr := runBounded(t, "split", set, "--ratios", "train=0.5,val=0.25,test=0.25")
	if code != exitFailure {
		t.Fatalf("exit %d, want %d\n%s", code, exitFailure, stderr)
	}
	for _, w := range []string{"record " + e.ID + ": ", img.Name + ": SHA-256", "nothing was changed"} {
		if !strings.Contains(stderr, w) {
			t.Errorf("stderr %q lacks %q", stderr, w)
		}
	}
	killSameTree(t, before, set)
}
