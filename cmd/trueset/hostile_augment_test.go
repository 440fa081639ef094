package main

import (
	"bytes"
	"context"
	"errors"
	"image"
	"image/color"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/trueset/trueset/manifest"
)

// Issue 11, augment's side: hostile inputs through the command line. Every
// case checks the exit code, the file, record or field named, that nothing
// was written beside the output folder (a marker folder there stays as it
// was), that no goroutine stack was printed, and that a refused run left no
// dataset.json. Runs through the binary have a time bound that only detects
// a hang.

// hostileRoot makes a root folder with a marker folder "beside" in it and
// returns the root and the marker folder's digest.
func hostileRoot(t *testing.T) (string, string) {
	t.Helper()
	root := t.TempDir()
	if err := os.MkdirAll(filepath.Join(root, "beside"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(root, "beside", "keep.txt"), []byte("untouched"), 0o644); err != nil {
		t.Fatal(err)
	}
	return root, treeDigest(t, filepath.Join(root, "beside"))
}

// hostileCheck checks what every case checks after a run.
func hostileCheck(t *testing.T, root, beside string, code int, stderr string, want []string) {
	t.Helper()
	if got := treeDigest(t, filepath.Join(root, "beside")); got != beside {
		t.Error("the folder beside the output changed")
	}
	if strings.Contains(stderr, "goroutine ") {
		t.Errorf("stderr holds a goroutine stack:\n%s", stderr)
	}
	if code != exitOK {
		if _, err := os.Stat(filepath.Join(root, "out", manifest.DatasetFile)); err == nil {
			t.Error("a refused run left dataset.json in the output")
		}
	}
	for _, w := range want {
		if !strings.Contains(stderr, w) {
			t.Errorf("stderr %q does not say %q", stderr, w)
		}
	}
}

// editDataset rewrites a trueset dataset's records and dataset.json, with a
// manifest checksum that matches.
func editDataset(t *testing.T, dir string, edit func(recs []*manifest.Record, d *manifest.Dataset)) {
	t.Helper()
	d := readDataset(t, dir)
	recs := readRecords(t, dir)
	edit(recs, d)
	var buf bytes.Buffer
	for _, r := range recs {
		b, err := manifest.MarshalRecord(r)
		if err != nil {
			t.Fatal(err)
		}
		buf.Write(append(b, '\n'))
	}
	d.ManifestSHA256 = manifest.SHA256Hex(buf.Bytes())
	db, err := manifest.MarshalDataset(d)
	if err != nil {
		t.Fatal(err)
	}
	for name, b := range map[string][]byte{manifest.ManifestFile: buf.Bytes(), manifest.DatasetFile: db} {
		if err := os.WriteFile(filepath.Join(dir, name), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// firstTrain returns the index of the first train record.
func firstTrain(t *testing.T, recs []*manifest.Record) int {
	for i, r := range recs {
		if r.Split == "train" {
			return i
		}
	}
	t.Fatal("no train record")
	return -1
}

// hostilePlainFolder writes a plain folder with sources named stems, each an
// 8×8 gray image with a 3×3 square of class 1.
func hostilePlainFolder(t *testing.T, dir string, stems ...string) {
	t.Helper()
	for _, sub := range []string{"images", "masks"} {
		if err := os.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	img := image.NewGray(image.Rect(0, 0, 8, 8))
	mask := image.NewGray(img.Rect)
	for y := 2; y < 5; y++ {
		for x := 2; x < 5; x++ {
			img.SetGray(x, y, color.Gray{200})
			mask.SetGray(x, y, color.Gray{1})
		}
	}
	for _, s := range stems {
		for sub, m := range map[string]image.Image{"images": img, "masks": mask} {
			var b bytes.Buffer
			if err := png.Encode(&b, m); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(filepath.Join(dir, sub, s+".png"), b.Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
}

func TestHostileAugmentInputs(t *testing.T) {
	plan := filepath.Join("..", "..", "testdata", "plans", "every-step.yaml")
	for _, c := range []struct {
		name    string
		plain   []string // a plain folder with these stems; else a generated set
		edit    func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset)
		prepare func(t *testing.T, in string)
		args    []string
		code    int
		want    []string
	}{
		{name: "an id that leaves the folder", edit: func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[0].ID = "../beside/x"
		}, code: exitFailure, want: []string{"manifest.jsonl:1:", `record id "../beside/x" is not a safe file name`}},
		{name: "an id used twice", edit: func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[2].ID = recs[1].ID
		}, code: exitFailure, want: []string{"manifest.jsonl:3:", "ids must be unique"}},
		{name: "a source named like a copy", edit: func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset) {
			i := firstTrain(t, recs)
			recs[(i+1)%len(recs)].ID = recs[i].ID + "-c01"
		}, code: exitFailure, want: []string{"is the name of copy 1 of", "rename one of them"}},
		{name: "a height that lies", edit: func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[3].Height++
		}, code: exitFailure, want: []string{"record 000003", "images/000003.png: the PNG header says"}},
		{name: "a split dataset.json does not have", edit: func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[1].Split = "extra"
		}, code: exitFailure, want: []string{"manifest.jsonl:2:", `split "extra" is not in`}},
		{name: "a class id beyond 8 bits", edit: func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset) {
			d.Classes = append(d.Classes, manifest.Class{ID: 300, Name: "wide"})
		}, code: exitFailure, want: []string{"dataset.json: class \"wide\" has id 300"}},
		{name: "a stem with a backslash", plain: []string{"a", `b\c`}, code: exitFailure,
			want: []string{`images/b\c.png`, "not a safe file name"}},
		{name: "stems a and a-c01", plain: []string{"a", "a-c01"}, code: exitFailure,
			want: []string{"images/a-c01.png", "is the name of copy 1 of", "images/a.png"}},
		{name: "a negative pixel budget", args: []string{"--max-pixels", "-1"}, code: exitUsage, want: []string{"--max-pixels -1"}},
		{name: "a turn that grows the canvas past 4096", plain: []string{"a"}, prepare: func(t *testing.T, in string) {
			big := image.NewGray(image.Rect(0, 0, 3500, 3500))
			for _, sub := range []string{"images", "masks"} {
				var b bytes.Buffer
				if err := png.Encode(&b, big); err != nil {
					t.Fatal(err)
				}
				if err := os.WriteFile(filepath.Join(in, sub, "big.png"), b.Bytes(), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			if err := os.WriteFile(filepath.Join(filepath.Dir(in), "turn.yaml"), []byte("name: turn\ngeometry:\n  moves:\n    - do: flip\n      axis: vertical\n    - do: rotate\n      angle: [-45, 45]\n      grow_canvas: true\n"), 0o644); err != nil {
				t.Fatal(err)
			}
		}, args: []string{"--plan", "{root}/turn.yaml", "--ratios", "train=1"}, code: exitUsage,
			want: []string{"turn.yaml:6:7: geometry.moves[1]", "a side of 4950 pixels", "images/big.png (3500×3500)", "at most 4096"}},
		// Accepted: a record whose image file is named like another
		// source's first copy. The original is written under its own id.
		{name: "a file named like a copy", edit: func(t *testing.T, in string, recs []*manifest.Record, d *manifest.Dataset) {
			i := firstTrain(t, recs)
			j := (i + 1) % len(recs)
			to := "images/" + recs[i].ID + "-c01.png"
			if err := os.Rename(filepath.Join(in, recs[j].Image), filepath.Join(in, to)); err != nil {
				t.Fatal(err)
			}
			recs[j].Image = to
		}, code: exitOK},
	} {
		t.Run(c.name, func(t *testing.T) {
			root, beside := hostileRoot(t)
			in, out := filepath.Join(root, "in"), filepath.Join(root, "out")
			if c.plain != nil {
				hostilePlainFolder(t, in, c.plain...)
			} else {
				wantCode(t, exitOK, "generate", "--count", "8", "--out", in, "--quiet")
			}
			if c.edit != nil {
				editDataset(t, in, func(recs []*manifest.Record, d *manifest.Dataset) { c.edit(t, in, recs, d) })
			}
			if c.prepare != nil {
				c.prepare(t, in)
			}
			args := []string{"augment", "--in", in, "--out", out, "--plan", plan, "--copies", "2", "--quiet"}
			for _, a := range c.args {
				args = append(args, strings.ReplaceAll(a, "{root}", root))
			}
			if c.plain != nil && !strings.Contains(strings.Join(c.args, " "), "--ratios") {
				args = append(args, "--ratios", "train=1")
			}
			code, _, stderr := runCLI(t, args...)
			if code != c.code {
				t.Fatalf("exit %d, want %d\n%s", code, c.code, stderr)
			}
			hostileCheck(t, root, beside, code, stderr, c.want)
			if c.code == exitOK {
				wantCode(t, exitOK, "verify", out)
			}
			if c.name == "a turn that grows the canvas past 4096" {
				if _, err := os.Stat(out); err == nil {
					t.Error("the output folder was made before the plan was refused")
				}
			}
		})
	}
}

// runBinary runs the trueset binary with a time bound that detects a hang.
func runBinary(t *testing.T, bin string, args ...string) (int, string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, args...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	err := cmd.Run()
	if ctx.Err() != nil {
		t.Fatalf("trueset %s did not finish within 2 minutes: it hangs", strings.Join(args, " "))
	}
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		return ee.ExitCode(), stderr.String()
	}
	if err != nil {
		t.Fatal(err)
	}
	return 0, stderr.String()
}

// TestHostileAugmentDevices: a named pipe without a writer or /dev/zero given
// as the plan, labels.csv, classes.json or an image is refused at once,
// naming the file, through the real binary (a hang would block the test
// process itself in-process).
func TestHostileAugmentDevices(t *testing.T) {
	bin := buildBinary(t)
	plan := filepath.Join("..", "..", "testdata", "plans", "every-step.yaml")
	for _, c := range []struct {
		rel  string // under the input folder; "plan" = the plan file
		fifo bool
		code int
		want string
	}{
		{"plan", true, exitUsage, "a named pipe, not a regular file"},
		{"plan", false, exitUsage, "a character device, not a regular file"},
		{"labels.csv", true, exitFailure, "labels.csv: a named pipe"},
		{"classes.json", false, exitFailure, "classes.json: a character device"},
		{"images/b.png", false, exitFailure, "images/b.png: not a regular file"},
		{"masks/b.png", true, exitFailure, "masks/b.png: not a regular file"},
	} {
		kind := "/dev/zero"
		if c.fifo {
			kind = "a named pipe"
		}
		t.Run(c.rel+" as "+kind, func(t *testing.T) {
			root, beside := hostileRoot(t)
			in, out := filepath.Join(root, "in"), filepath.Join(root, "out")
			hostilePlainFolder(t, in, "a", "b")
			p := plan
			target := filepath.Join(in, c.rel)
			if c.rel == "plan" {
				target = filepath.Join(root, "plan.yaml")
				p = target
			}
			os.Remove(target)
			if c.fifo {
				if err := syscall.Mkfifo(target, 0o644); err != nil {
					t.Fatal(err)
				}
			} else if err := os.Symlink("/dev/zero", target); err != nil {
				t.Fatal(err)
			}
			code, stderr := runBinary(t, bin, "augment", "--in", in, "--out", out, "--plan", p, "--ratios", "train=1", "--quiet")
			if code != c.code {
				t.Fatalf("exit %d, want %d\n%s", code, c.code, stderr)
			}
			hostileCheck(t, root, beside, code, stderr, []string{target, c.want})
		})
	}
}

// TestHostileAugmentResume: a run that failed on its input leaves no
// dataset.json and advises fixing the input and --force (a resume would fail
// the same way); --resume into a finished folder made with another seed is
// refused with exit 2, not declared complete.
func TestHostileAugmentResume(t *testing.T) {
	plan := filepath.Join("..", "..", "testdata", "plans", "every-step.yaml")
	root, beside := hostileRoot(t)
	in, out := filepath.Join(root, "in"), filepath.Join(root, "out")
	wantCode(t, exitOK, "generate", "--count", "8", "--out", in, "--quiet")
	// The last record's image changes after its record was written: found
	// when it is carried over, after writing began.
	recs := readRecords(t, in)
	last := filepath.Join(in, recs[len(recs)-1].Image)
	b, err := os.ReadFile(last)
	if err != nil {
		t.Fatal(err)
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if g, ok := m.(*image.Gray); ok {
		g.Pix[0] ^= 0xFF
		err = png.Encode(&buf, g)
	} else {
		r := m.(*image.RGBA)
		r.Pix[0] ^= 0xFF
		err = png.Encode(&buf, r)
	}
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(last, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	args := []string{"augment", "--in", in, "--out", out, "--plan", plan, "--copies", "1", "--workers", "1", "--quiet"}
	code, _, stderr := runCLI(t, args...)
	if code != exitFailure {
		t.Fatalf("exit %d, want %d\n%s", code, exitFailure, stderr)
	}
	hostileCheck(t, root, beside, code, stderr, []string{recs[len(recs)-1].Image + ": SHA-256", "fix the input, then start again with --force"})
	if strings.Contains(stderr, "resume with") {
		t.Errorf("advises resuming a run that would fail the same way: %s", stderr)
	}
	code, _, stderr = runCLI(t, append(args, "--resume")...)
	if code == exitOK {
		t.Fatalf("--resume declared the broken folder complete: %s", stderr)
	}
	hostileCheck(t, root, beside, code, stderr, nil)

	// A finished folder of another seed.
	done := filepath.Join(root, "done")
	in2 := filepath.Join(root, "in2")
	wantCode(t, exitOK, "generate", "--count", "8", "--out", in2, "--quiet")
	wantCode(t, exitOK, "augment", "--in", in2, "--out", done, "--plan", plan, "--seed", "2", "--quiet")
	code, _, stderr = runCLI(t, "augment", "--in", in2, "--out", done, "--plan", plan, "--seed", "3", "--resume", "--quiet")
	if code != exitUsage {
		t.Fatalf("exit %d, want %d\n%s", code, exitUsage, stderr)
	}
	hostileCheck(t, root, beside, code, stderr, []string{"made with other options (seed 2", "start again with --force"})
	wantCode(t, exitOK, "augment", "--in", in2, "--out", done, "--plan", plan, "--seed", "2", "--resume", "--quiet")
}
