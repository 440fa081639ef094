package augment

import (
	"bytes"
	"context"
	"errors"
	"image"
	"image/color"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/trueset/trueset/manifest"
)

// Issue 11: augment never trusts its input. Each case below is a class of
// hostile input; a refused one must name the file or record and leave no
// dataset.json (nor anything outside the output folder: a marker folder
// beside it stays untouched); an accepted one must give an output that
// manifest.Verify accepts.

// hostilePlan is a plan every case can run: one move and one pixel step.
const hostilePlan = "name: hostile\ngeometry:\n  moves:\n    - do: flip\n      axis: horizontal\npixels:\n  - do: brightness\n    delta: [-10, 10]\n"

func mustPlan(t *testing.T, src string) *Plan {
	t.Helper()
	p, err := ParsePlan("hostile.yaml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// rewriteTrueset edits a trueset dataset's records and dataset.json and
// writes both back with a manifest checksum that matches (as a hostile but
// careful hand would).
func rewriteTrueset(t *testing.T, dir string, edit func(recs []*manifest.Record, d *manifest.Dataset)) {
	t.Helper()
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	var recs []*manifest.Record
	if err := manifest.ReadManifest(dir, func(r *manifest.Record) error { recs = append(recs, r); return nil }); err != nil {
		t.Fatal(err)
	}
	edit(recs, d)
	var buf bytes.Buffer
	for _, r := range recs {
		b, err := manifest.MarshalRecord(r)
		if err != nil {
			t.Fatal(err)
		}
		buf.Write(append(b, '\n'))
	}
	writeFile(t, filepath.Join(dir, manifest.ManifestFile), buf.Bytes())
	if d.ManifestSHA256 != "keep" {
		d.ManifestSHA256 = manifest.SHA256Hex(buf.Bytes())
	} else {
		d.ManifestSHA256 = strings.Repeat("0", 64)
	}
	b, err := manifest.MarshalDataset(d)
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(dir, manifest.DatasetFile), b)
}

// hostileRun runs augment from in into root/out with a marker folder
// root/beside, within a time bound that only detects a hang; it checks the
// marker is untouched and returns Run's error.
func hostileRun(t *testing.T, root, in string, o RunOptions) error {
	t.Helper()
	beside := filepath.Join(root, "beside")
	writeFile(t, filepath.Join(beside, "keep.txt"), []byte("untouched"))
	o.In, o.Out = in, filepath.Join(root, "out")
	if o.Plan == nil {
		o.Plan = mustPlan(t, hostilePlan)
	}
	if o.Copies == 0 {
		o.Copies = 1
	}
	o.Version, o.Workers = "test", 2
	done := make(chan error, 1)
	go func() { _, err := Run(context.Background(), o); done <- err }()
	var err error
	select {
	case err = <-done:
	case <-time.After(2 * time.Minute):
		t.Fatal("augment did not finish within 2 minutes: it hangs")
	}
	ents, rerr := os.ReadDir(beside)
	if rerr != nil || len(ents) != 1 {
		t.Errorf("the folder beside the output changed: %v %v", ents, rerr)
	}
	if err != nil {
		if _, serr := os.Stat(filepath.Join(o.Out, manifest.DatasetFile)); serr == nil {
			t.Errorf("a failed run left %s", filepath.Join(o.Out, manifest.DatasetFile))
		}
		if strings.Contains(err.Error(), "goroutine ") {
			t.Errorf("error holds a stack: %v", err)
		}
	}
	return err
}

// verifyClean runs manifest.Verify on dir and fails on any problem.
func verifyClean(t *testing.T, dir string) {
	t.Helper()
	var problems []string
	if _, err := manifest.Verify(dir, func(p manifest.Problem) { problems = append(problems, p.String()) }); err != nil || len(problems) > 0 {
		t.Errorf("verify %s: %v %q", dir, err, problems)
	}
}

// trainAndOther returns the index of a train record and of a record in
// another split.
func trainAndOther(t *testing.T, recs []*manifest.Record) (int, int) {
	tr, ot := -1, -1
	for i, r := range recs {
		if r.Split == "train" && tr < 0 {
			tr = i
		}
		if r.Split != "train" && ot < 0 {
			ot = i
		}
	}
	if tr < 0 || ot < 0 {
		t.Fatal("the input needs a train record and another")
	}
	return tr, ot
}

func TestHostileTruesetInputs(t *testing.T) {
	for _, c := range []struct {
		name string
		edit func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset)
		want []string // fragments of the error; nil = accepted, and the output verifies
	}{
		{"an id used twice", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[3].ID = recs[1].ID
		}, []string{"manifest.jsonl:4:", "record 000001: the id of record 2 too"}},
		{"ids differing in letter case", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[0].ID, recs[1].ID = "Leaf", "leaf"
		}, []string{"record 1", "record 2", "differ only in letter case"}},
		{"a source named like a copy", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			tr, _ := trainAndOther(t, recs)
			other := (tr + 1) % len(recs)
			recs[other].ID = recs[tr].ID + "-c01"
		}, []string{`is the name of copy 1 of`, "manifest.jsonl: record"}},
		{"a width that lies", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[2].Width = 30
		}, []string{"record 000002", "images/000002.png: the PNG header says 24×20, the record says 30×20"}},
		{"a mask of the wrong kind", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			writeFile(t, filepath.Join(dir, recs[1].Mask), pngOf(t, image.NewGray(image.Rect(0, 0, 24, 20))))
		}, []string{"record 000001", "masks/000001.png: the PNG is 8-bit gray; a trueset mask is an 8-bit indexed PNG"}},
		{"a split dataset.json does not have", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[0].Split = "holdout"
		}, []string{"manifest.jsonl:1:", `split "holdout" is not in`, "dataset.json's split table (train, val, test)"}},
		{"a manifest dataset.json does not name", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			d.ManifestSHA256 = "keep"
		}, []string{"manifest.jsonl: SHA-256", "dataset.json says 0000"}},
		{"a class id that no mask can hold", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			d.Classes = append(d.Classes, manifest.Class{ID: 300, Name: "big"})
		}, []string{"dataset.json: class \"big\" has id 300; class ids are 0..254"}},
		{"a negative class id", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			d.Classes = append(d.Classes, manifest.Class{ID: -1, Name: "neg"})
		}, []string{"has id -1"}},
		{"a group in two splits", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			tr, ot := trainAndOther(t, recs)
			recs[ot].Group = recs[tr].Group
		}, []string{"group", "a group must stay in one split"}},
		{"a strata table that lies", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			d.Splits.Strata[0].Splits["train"]++
		}, []string{"dataset.json: the strata table says stratum \"all\" has"}},
		{"splits swapped against the seeded allocation", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			tr, ot := trainAndOther(t, recs)
			recs[tr].Split, recs[ot].Split = recs[ot].Split, recs[tr].Split
		}, []string{"allocation", "puts its group in"}},
		{"a box that lies", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[5].Objects[0].Box[2]++
		}, []string{"record 000005", "instances/000005.png: object", "box"}},
		{"a count that lies", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[4].Targets["objects"] = manifest.Number(7)
		}, []string{"record 000004", "target objects is 7, the instance mask holds"}},
		{"a file changed after its record", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			p := filepath.Join(dir, recs[6].Image)
			b, _ := os.ReadFile(p)
			m, _, err := image.Decode(bytes.NewReader(b))
			if err != nil {
				t.Fatal(err)
			}
			g := m.(*image.Gray)
			g.Pix[0] ^= 0xFF
			writeFile(t, p, pngOf(t, g))
		}, []string{"record 000006", "images/000006.png: SHA-256", "the record says"}},
		// Accepted: record paths that are not the output's names. The
		// originals are written under their ids, so a record whose image
		// is called like another source's copy cannot overwrite it.
		{"files named like a copy of another source", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			tr, _ := trainAndOther(t, recs)
			other := (tr + 1) % len(recs)
			to := manifest.ImagesDir + "/" + recs[tr].ID + "-c01.png"
			if err := os.Rename(filepath.Join(dir, recs[other].Image), filepath.Join(dir, to)); err != nil {
				t.Fatal(err)
			}
			recs[other].Image = to
		}, nil},
		{"ids with inner spaces and copy-like tails", func(t *testing.T, dir string, recs []*manifest.Record, d *manifest.Dataset) {
			recs[0].ID, recs[1].ID = "leaf one", "leaf-c1"
		}, nil},
	} {
		t.Run(c.name, func(t *testing.T) {
			root := t.TempDir()
			in := filepath.Join(root, "in")
			diskWriteInput(t, in, 8)
			rewriteTrueset(t, in, func(recs []*manifest.Record, d *manifest.Dataset) { c.edit(t, in, recs, d) })
			err := hostileRun(t, root, in, RunOptions{})
			out := filepath.Join(root, "out")
			if c.want == nil {
				if err != nil {
					t.Fatal(err)
				}
				verifyClean(t, out)
				return
			}
			if err == nil {
				t.Fatal("accepted")
			}
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Errorf("%v is not an InputError", err)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("%q does not say %q", err, w)
				}
			}
		})
	}
}

// plainSource writes image, mask (and no instances) of one w×h source into
// a plain folder; the mask has one square of class 1.
func plainSourceFiles(t *testing.T, dir, stem string, w, h int) {
	t.Helper()
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for i := range img.Pix {
		img.Pix[i] = uint8(i % 251)
		if i%4 == 3 {
			img.Pix[i] = 255
		}
	}
	mask := image.NewGray(img.Rect)
	for y := h / 4; y < h/2; y++ {
		for x := w / 4; x < w/2; x++ {
			mask.SetGray(x, y, color.Gray{1})
		}
	}
	writeFile(t, filepath.Join(dir, manifest.ImagesDir, stem+".png"), pngOf(t, img))
	writeFile(t, filepath.Join(dir, manifest.MasksDir, stem+".png"), pngOf(t, mask))
}

func TestHostilePlainFolders(t *testing.T) {
	for _, c := range []struct {
		name    string
		prepare func(t *testing.T, dir string)
		want    []string // nil = accepted and verified
	}{
		{"a stem with a backslash", func(t *testing.T, dir string) {
			plainSourceFiles(t, dir, `a\b`, 8, 8)
		}, []string{`images/a\b.png`, `"a\\b" is not a safe file name`, "rename the file"}},
		{"a stem read as a flag", func(t *testing.T, dir string) {
			plainSourceFiles(t, dir, "-rf", 8, 8)
		}, []string{"images/-rf.png", `starts with "-"`}},
		{"a stem named like a copy", func(t *testing.T, dir string) {
			plainSourceFiles(t, dir, "a-c01", 8, 8)
		}, []string{"images/a-c01.png", `is the name of copy 1 of`, "images/a.png"}},
		{"a class name with a slash", func(t *testing.T, dir string) {
			writeFile(t, filepath.Join(dir, "classes.json"), []byte(`[{"id": 1, "name": "leaf/stem"}]`))
		}, []string{"classes.json: entry 1 (id 1)", `"leaf/stem" is not a safe file name`}},
		{"a class name of 65 bytes", func(t *testing.T, dir string) {
			writeFile(t, filepath.Join(dir, "classes.json"), []byte(`[{"id": 1, "name": "`+strings.Repeat("x", 65)+`"}]`))
		}, []string{"classes.json: entry 1", "65 bytes; at most 64"}},
		{"a labels id with a backslash", func(t *testing.T, dir string) {
			writeFile(t, filepath.Join(dir, "labels.csv"), []byte("id,n\na,1\n"+`a\b,2`+"\n"))
		}, []string{"labels.csv:3:", "not a safe file name"}},
		{"a labels column name of 100 bytes", func(t *testing.T, dir string) {
			writeFile(t, filepath.Join(dir, "labels.csv"), []byte("id,"+strings.Repeat("n", 100)+"\na,1\n"))
		}, []string{"labels.csv:1: column 2", "at most 64"}},
		{"labels with 300 columns", func(t *testing.T, dir string) {
			var h, r strings.Builder
			h.WriteString("id")
			r.WriteString("a")
			for i := 0; i < 299; i++ {
				h.WriteString(",t" + string(rune('a'+i%26)) + strings.Repeat("x", i/26))
				r.WriteString(",1")
			}
			writeFile(t, filepath.Join(dir, "labels.csv"), []byte(h.String()+"\n"+r.String()+"\n"))
		}, []string{"labels.csv:1: 300 columns", "at most 256"}},
		{"a progressive-style JPEG with 5000 scans", func(t *testing.T, dir string) {
			writeFile(t, filepath.Join(dir, manifest.ImagesDir, "j.jpg"), jpegWithScans(t, 4999))
			mask := image.NewGray(image.Rect(0, 0, 16, 16))
			writeFile(t, filepath.Join(dir, manifest.MasksDir, "j.png"), pngOf(t, mask))
		}, []string{"images/j.jpg: too much decode work: over 100 scans", "not decoded"}},
		{"an over-wide turn", func(t *testing.T, dir string) {}, []string{"hostile.yaml:", "geometry.moves[0]", "a side of 4243 pixels", "at most 4096"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			root := t.TempDir()
			in := filepath.Join(root, "in")
			o := RunOptions{SplitSpec: "train=1"}
			if c.name == "an over-wide turn" {
				plainSourceFiles(t, in, "a", 3000, 3000)
				o.Plan = mustPlan(t, "name: wide\ngeometry:\n  moves:\n    - do: rotate\n      angle: [40, 50]\n      grow_canvas: true\n")
			} else {
				plainSourceFiles(t, in, "a", 8, 8)
			}
			c.prepare(t, in)
			err := hostileRun(t, root, in, o)
			if c.want == nil {
				if err != nil {
					t.Fatal(err)
				}
				verifyClean(t, filepath.Join(root, "out"))
				return
			}
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("%q does not say %q", err, w)
				}
			}
			if c.name == "an over-wide turn" {
				if _, serr := os.Stat(filepath.Join(root, "out")); serr == nil {
					t.Error("the output folder was made before the plan was refused")
				}
			}
		})
	}
}

// TestNonRegularInputFiles: a named pipe (no writer: reading it would block
// forever) or /dev/zero (reading it never ends) given as any file augment
// reads is refused at once, naming it. hostileRun's time bound detects a
// hang.
func TestNonRegularInputFiles(t *testing.T) {
	if _, err := os.Stat("/dev/zero"); err != nil {
		t.Fatal("/dev/zero is needed:", err)
	}
	for _, c := range []struct {
		rel  string
		fifo bool
		want string
	}{
		{"labels.csv", true, "labels.csv: a named pipe, not a regular file"},
		{"labels.csv", false, "labels.csv: a character device, not a regular file"},
		{"classes.json", true, "classes.json: a named pipe"},
		{"classes.json", false, "classes.json: a character device"},
		{"images/z.png", true, "images/z.png: not a regular file"},
		{"masks/a.png", false, "masks/a.png: not a regular file"},
	} {
		kind := "/dev/zero"
		if c.fifo {
			kind = "fifo"
		}
		t.Run(c.rel+" as "+kind, func(t *testing.T) {
			root := t.TempDir()
			in := filepath.Join(root, "in")
			plainSourceFiles(t, in, "a", 8, 8)
			if c.rel == "images/z.png" {
				plainSourceFiles(t, in, "z", 8, 8)
			}
			p := filepath.Join(in, c.rel)
			os.Remove(p)
			if c.fifo {
				if err := syscall.Mkfifo(p, 0o644); err != nil {
					t.Fatal(err)
				}
			} else if err := os.Symlink("/dev/zero", p); err != nil {
				t.Fatal(err)
			}
			err := hostileRun(t, root, in, RunOptions{SplitSpec: "train=1"})
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want %q", err, c.want)
			}
		})
	}
	// The plan file too, and a trueset dataset's files.
	dir := t.TempDir()
	fifo := filepath.Join(dir, "plan.yaml")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Fatal(err)
	}
	zero := filepath.Join(dir, "zero.yaml")
	if err := os.Symlink("/dev/zero", zero); err != nil {
		t.Fatal(err)
	}
	for p, want := range map[string]string{fifo: "a named pipe", zero: "a character device"} {
		done := make(chan error, 1)
		go func() { _, err := LoadPlan(p); done <- err }()
		select {
		case err := <-done:
			if err == nil || !strings.Contains(err.Error(), p) || !strings.Contains(err.Error(), want) {
				t.Errorf("LoadPlan(%s): %v, want %q", p, err, want)
			}
		case <-time.After(time.Minute):
			t.Fatalf("LoadPlan(%s) hangs", p)
		}
	}
	for _, rel := range []string{"images/000003.png", "masks/000003.png", "instances/000003.png", "manifest.jsonl"} {
		t.Run("trueset "+rel, func(t *testing.T) {
			root := t.TempDir()
			in := filepath.Join(root, "in")
			diskWriteInput(t, in, 4)
			p := filepath.Join(in, rel)
			os.Remove(p)
			if err := syscall.Mkfifo(p, 0o644); err != nil {
				t.Fatal(err)
			}
			err := hostileRun(t, root, in, RunOptions{})
			if err == nil || !strings.Contains(err.Error(), rel+": a named pipe") {
				t.Errorf("error %v, want it to name %s as a named pipe", err, rel)
			}
		})
	}
}

// TestPlanSecondDocument: a second YAML document is refused with its line.
func TestPlanSecondDocument(t *testing.T) {
	_, err := ParsePlan("two.yaml", []byte(hostilePlan+"---\nname: other\n"))
	if err == nil || !strings.Contains(err.Error(), "two.yaml:9:1:") || !strings.Contains(err.Error(), "one YAML document") {
		t.Errorf("error %v", err)
	}
}

// TestLabelsBounds: a labels.csv header of 60 MiB on one line (under the
// file bound, so the line bound must act) is refused after reading 64 KiB of
// it; allocation stays far below the file's size (a bound that detects the
// whole line being buffered, not a measure of speed).
func TestLabelsBounds(t *testing.T) {
	in := t.TempDir()
	plainSourceFiles(t, in, "a", 8, 8)
	big := bytes.Repeat([]byte("x,"), 30<<20)
	writeFile(t, filepath.Join(in, "labels.csv"), append([]byte("id,"), big...))
	big = nil
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	_, err := ReadFolder(in, 1<<20)
	runtime.ReadMemStats(&after)
	if err == nil || !strings.Contains(err.Error(), "labels.csv:1: a line longer than 65536 bytes") {
		t.Errorf("error %v", err)
	}
	if grew := after.TotalAlloc - before.TotalAlloc; grew > 16<<20 {
		t.Errorf("reading the refused labels.csv allocated %d MiB", grew>>20)
	}
	writeFile(t, filepath.Join(in, "labels.csv"), bytes.Repeat([]byte("id\n"), 33<<20))
	if _, err := ReadFolder(in, 1<<20); err == nil || !strings.Contains(err.Error(), "at most 67108864") {
		t.Errorf("a 99 MiB labels.csv: %v", err)
	}
}

// TestRunMemoryBounded: eight sources that each fill the per-file pixel
// budget, with eight workers, are worked on within the run budget (two
// files' pixels) instead of all at once. The peak heap is sampled while the
// run works; the bound is generous and detects only a runaway (eight
// 2048×2048 RGB sources at once take well over 1 GiB).
func TestRunMemoryBounded(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "in")
	const side = 2048
	for i := 0; i < 8; i++ {
		plainSourceFiles(t, in, "s"+string(rune('0'+i)), side, side)
	}
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	base := ms.HeapAlloc
	stop := make(chan struct{})
	peak := make(chan uint64)
	go func() {
		var p uint64
		for {
			select {
			case <-stop:
				peak <- p
				return
			case <-time.After(2 * time.Millisecond):
				var m runtime.MemStats
				runtime.ReadMemStats(&m)
				p = max(p, m.HeapAlloc)
			}
		}
	}()
	o := RunOptions{In: in, Out: filepath.Join(root, "out"), Plan: mustPlan(t, hostilePlan), Copies: 1, SplitSpec: "train=1",
		Workers: 8, MaxPixels: side * side, Version: "test"}
	_, err := Run(context.Background(), o)
	close(stop)
	p := <-peak
	if err != nil {
		t.Fatal(err)
	}
	grew := int64(p) - int64(base)
	t.Logf("heap grew by %d MiB at most", grew>>20)
	if grew > 900<<20 {
		t.Errorf("the heap grew by %d MiB during the run; the run budget should keep it near two sources' worth", grew>>20)
	}
	verifyClean(t, o.Out)
}

// TestNegativeMaxPixels: a negative pixel budget is refused, not taken as
// the default.
func TestNegativeMaxPixels(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "in")
	diskWriteInput(t, in, 2)
	err := hostileRun(t, root, in, RunOptions{MaxPixels: -1})
	if err == nil || !strings.Contains(err.Error(), "max-pixels -1") {
		t.Errorf("error %v", err)
	}
}

// TestResumeChecksFinishedFolder: --resume calls a folder with dataset.json
// complete only when it is this run's finished output (manifest.Resume
// checks dataset.json against its manifest; augment checks that it was made
// with this plan, seed, options and input).
func TestResumeChecksFinishedFolder(t *testing.T) {
	root := t.TempDir()
	in := filepath.Join(root, "in")
	diskWriteInput(t, in, 6)
	plan := mustPlan(t, hostilePlan)
	run := func(out string, seed uint64, resume bool) error {
		_, err := Run(context.Background(), RunOptions{In: in, Out: out, Plan: plan, Copies: 1, Seed: seed, Workers: 2, Version: "test", Resume: resume})
		return err
	}
	done := filepath.Join(root, "done")
	if err := run(done, 1, false); err != nil {
		t.Fatal(err)
	}
	if err := run(done, 1, true); !errors.Is(err, manifest.ErrComplete) {
		t.Errorf("resuming a finished run: %v, want ErrComplete", err)
	}
	for _, c := range []struct {
		name string
		edit func(t *testing.T, dir string)
		want string
	}{
		{"another run's finished output (seed 2)", func(t *testing.T, dir string) {
			os.RemoveAll(dir)
			if err := run(dir, 2, false); err != nil {
				t.Fatal(err)
			}
		}, "made with other options (seed 2"},
		{"a manifest cut short", func(t *testing.T, dir string) {
			p := filepath.Join(dir, manifest.ManifestFile)
			b, _ := os.ReadFile(p)
			writeFile(t, p, b[:bytes.IndexByte(b, '\n')+1])
		}, "manifest"},
		{"a dataset.json that is not JSON", func(t *testing.T, dir string) {
			writeFile(t, filepath.Join(dir, manifest.DatasetFile), []byte("{"))
		}, "dataset.json"},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "out")
			if err := run(dir, 1, false); err != nil {
				t.Fatal(err)
			}
			c.edit(t, dir)
			err := run(dir, 1, true)
			if err == nil || errors.Is(err, manifest.ErrComplete) || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "start again with --force") {
				t.Errorf("error %v, want a refusal saying %q", err, c.want)
			}
		})
	}
}
