package main

import (
	"bufio"
	"encoding/json"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// exportFixture generates a small dice set and augments it with the light
// plan (its copies hold ignore pixels and may drop objects), so both kinds
// of record are exported.
func exportFixture(t *testing.T) string {
	t.Helper()
	base := t.TempDir()
	src := filepath.Join(base, "dice")
	wantCode(t, exitOK, "generate", "--preset", "tabletop-dice", "--count", "12", "--seed", "5", "--out", src, "--quiet")
	aug := filepath.Join(base, "dice-aug")
	wantCode(t, exitOK, "augment", "--in", src, "--out", aug, "--plan", filepath.Join("..", "..", "examples", "plans", "light.yaml"), "--copies", "1", "--quiet")
	return aug
}

// decodeInstances reads a record's instance mask with the standard
// library's PNG decoder.
func decodeInstances(t *testing.T, dir, rel string) *image.Gray16 {
	t.Helper()
	f, err := os.Open(filepath.Join(dir, rel))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	g, ok := m.(*image.Gray16)
	if !ok {
		t.Fatalf("%s is %T", rel, m)
	}
	return g
}

// The JSON interchange document, decoded here on its own terms: every
// annotation's run-length counts expanded column by column (the format's
// description: counts alternate outside/inside starting outside, pixels in
// column-major order, summing to height × width) must give exactly the
// object's pixels of the instance mask, pixel for pixel; bbox is [x, y,
// width, height] of those pixels; area their count; iscrowd 0; every
// instance of every mask has exactly one annotation.
func TestExportObjectsJSON(t *testing.T) {
	dir := exportFixture(t)
	out := filepath.Join(t.TempDir(), "objects.json")
	stdout, _ := wantCode(t, exitOK, "export", dir, "--format", "objects-json", "--out", out, "--json")
	var sum struct {
		Command string `json:"command"`
		Images  int    `json:"images"`
		Objects int    `json:"objects"`
	}
	if err := json.Unmarshal([]byte(stdout), &sum); err != nil || sum.Command != "export" {
		t.Fatalf("--json: %v %q", err, stdout)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Images []struct {
			ID       int    `json:"id"`
			FileName string `json:"file_name"`
			Width    int    `json:"width"`
			Height   int    `json:"height"`
			SampleID string `json:"sample_id"`
		} `json:"images"`
		Annotations []struct {
			ID           int   `json:"id"`
			ImageID      int   `json:"image_id"`
			CategoryID   int   `json:"category_id"`
			BBox         []int `json:"bbox"`
			Area         int   `json:"area"`
			IsCrowd      *int  `json:"iscrowd"`
			InstanceID   int   `json:"instance_id"`
			Segmentation struct {
				Size   []int `json:"size"`
				Counts []int `json:"counts"`
			} `json:"segmentation"`
		} `json:"annotations"`
		Categories []struct {
			ID   int    `json:"id"`
			Name string `json:"name"`
		} `json:"categories"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	recs := readRecords(t, dir)
	if len(doc.Images) != len(recs) || sum.Images != len(recs) || sum.Objects != len(doc.Annotations) {
		t.Fatalf("%d images (summary %d, %d objects) for %d records", len(doc.Images), sum.Images, sum.Objects, len(recs))
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	names := map[int]string{}
	for _, c := range d.Classes {
		names[c.ID] = c.Name
	}
	cats := map[int]bool{}
	for _, c := range doc.Categories {
		if c.ID == 0 || c.ID == manifest.IgnoreID || names[c.ID] != c.Name {
			t.Errorf("category %+v", c)
		}
		cats[c.ID] = true
	}
	byImage := map[int][]int{}
	for i, a := range doc.Annotations {
		if a.ID != i+1 {
			t.Errorf("annotation %d has id %d", i, a.ID)
		}
		byImage[a.ImageID] = append(byImage[a.ImageID], i)
	}
	recovered := 0
	for i, im := range doc.Images {
		r := recs[i]
		if im.ID != i+1 || im.FileName != r.Image || im.Width != r.Width || im.Height != r.Height || im.SampleID != r.ID {
			t.Fatalf("image %d: %+v for record %s", i, im, r.ID)
		}
		inst := decodeInstances(t, dir, r.Instances)
		w, h := r.Width, r.Height
		covered := map[int]bool{}
		for _, ai := range byImage[im.ID] {
			a := doc.Annotations[ai]
			if a.IsCrowd == nil || *a.IsCrowd != 0 || !cats[a.CategoryID] {
				t.Errorf("annotation %d: iscrowd %v, category %d", a.ID, a.IsCrowd, a.CategoryID)
			}
			if len(a.Segmentation.Size) != 2 || a.Segmentation.Size[0] != h || a.Segmentation.Size[1] != w {
				t.Fatalf("annotation %d: size %v, want [%d %d]", a.ID, a.Segmentation.Size, h, w)
			}
			// Expand the counts: position p is pixel (p / h, p % h).
			on := make([]bool, w*h)
			p := 0
			for k, n := range a.Segmentation.Counts {
				if n < 0 || p+n > w*h {
					t.Fatalf("annotation %d: counts %v overrun %d pixels", a.ID, a.Segmentation.Counts, w*h)
				}
				for j := p; j < p+n; j++ {
					on[j] = k%2 == 1
				}
				p += n
			}
			if p != w*h {
				t.Fatalf("annotation %d: counts sum to %d, want %d", a.ID, p, w*h)
			}
			area, x0, y0, x1, y1 := 0, w, h, 0, 0
			for x := 0; x < w; x++ {
				for y := 0; y < h; y++ {
					mine := int(inst.Gray16At(x, y).Y) == a.InstanceID
					if on[x*h+y] != mine {
						t.Fatalf("record %s instance %d: pixel (%d,%d) decodes %v, the mask says %v", r.ID, a.InstanceID, x, y, on[x*h+y], mine)
					}
					if mine {
						area++
						x0, y0, x1, y1 = min(x0, x), min(y0, y), max(x1, x+1), max(y1, y+1)
					}
				}
			}
			if a.Area != area || len(a.BBox) != 4 || a.BBox[0] != x0 || a.BBox[1] != y0 || a.BBox[2] != x1-x0 || a.BBox[3] != y1-y0 {
				t.Errorf("annotation %d: area %d bbox %v; the mask has %d pixels in x %d..%d, y %d..%d", a.ID, a.Area, a.BBox, area, x0, x1, y0, y1)
			}
			covered[a.InstanceID] = true
			recovered++
		}
		for id := range manifest.MeasureInstances(inst) {
			if !covered[id] {
				t.Errorf("record %s: instance %d has no annotation", r.ID, id)
			}
		}
	}
	if recovered == 0 {
		t.Fatal("no annotation checked")
	}
}

// The center-boxes folder, read on its own terms: one labels/<stem>.txt per
// image, one "class cx cy w h" line per object, class the line of
// classes.txt; center and size times the image size give back the object's
// box measured from the instance mask, and the class is the object's.
func TestExportCenterBoxes(t *testing.T) {
	dir := exportFixture(t)
	out := filepath.Join(t.TempDir(), "boxes")
	wantCode(t, exitOK, "export", dir, "--format", "center-boxes", "--split", "train", "--out", out, "--quiet")
	cb, err := os.ReadFile(filepath.Join(out, "classes.txt"))
	if err != nil {
		t.Fatal(err)
	}
	classNames := strings.Split(strings.TrimSuffix(string(cb), "\n"), "\n")
	if strings.Join(classNames, ",") != "die,pip" {
		t.Fatalf("classes.txt: %q", cb)
	}
	files, _ := os.ReadDir(filepath.Join(out, "labels"))
	n := 0
	for _, r := range readRecords(t, dir) {
		if r.Split != "train" {
			continue
		}
		n++
		inst := decodeInstances(t, dir, r.Instances)
		measured := manifest.MeasureInstances(inst)
		stem := strings.TrimSuffix(filepath.Base(r.Image), ".png")
		f, err := os.Open(filepath.Join(out, "labels", stem+".txt"))
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(f)
		var lines [][]string
		for sc.Scan() {
			lines = append(lines, strings.Split(sc.Text(), " "))
		}
		f.Close()
		// Objects with pixels, in record order, one line each.
		var objs []manifest.Object
		for _, o := range r.Objects {
			if measured[o.Instance] != nil {
				objs = append(objs, o)
			}
		}
		if len(lines) != len(objs) || len(objs) != len(measured) {
			t.Fatalf("%s: %d lines, %d objects with pixels, %d instances in the mask", stem, len(lines), len(objs), len(measured))
		}
		for i, l := range lines {
			if len(l) != 5 {
				t.Fatalf("%s line %d: %q", stem, i+1, l)
			}
			k, err := strconv.Atoi(l[0])
			if err != nil || k < 0 || k >= len(classNames) || classNames[k] != objs[i].ClassName {
				t.Errorf("%s line %d: class %q for a %s", stem, i+1, l[0], objs[i].ClassName)
			}
			var v [4]float64
			for j := range v {
				if v[j], err = strconv.ParseFloat(l[j+1], 64); err != nil || v[j] < 0 || v[j] > 1 {
					t.Fatalf("%s line %d: %q is not in [0, 1]", stem, i+1, l[j+1])
				}
			}
			W, H := float64(r.Width), float64(r.Height)
			got := [4]float64{(v[0] - v[2]/2) * W, (v[1] - v[3]/2) * H, (v[0] + v[2]/2) * W, (v[1] + v[3]/2) * H}
			want := measured[objs[i].Instance].BBox
			for j := range got {
				if d := got[j] - float64(want[j]); d > 1e-9 || d < -1e-9 {
					t.Errorf("%s line %d: box %v, the mask's is %v", stem, i+1, got, want)
					break
				}
			}
		}
	}
	if n == 0 || len(files) != n {
		t.Fatalf("%d label files for %d train records", len(files), n)
	}
}

// Refusals: usage and bad input exit 2 naming what is wrong; nothing is
// written; the JSON file and the labels folder never appear half-written.
func TestExportRefusals(t *testing.T) {
	dir := exportFixture(t)
	tmp := t.TempDir()
	full := filepath.Join(tmp, "nonempty")
	os.MkdirAll(full, 0o755)
	os.WriteFile(filepath.Join(full, "x"), []byte("x"), 0o644)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"export", dir, "--out", filepath.Join(tmp, "a.json")}, "--format is required"},
		{[]string{"export", dir, "--format", "objects-json"}, "--out PATH is required"},
		{[]string{"export", dir, "--format", "polygons", "--out", filepath.Join(tmp, "a.json")}, `format "polygons"`},
		{[]string{"export", dir, "--format", "objects-json", "--out", filepath.Join(dir, "a.json")}, "inside the input"},
		{[]string{"export", dir, "--format", "center-boxes", "--out", dir}, "is the input"},
		{[]string{"export", dir, "--format", "objects-json", "--split", "nope", "--out", filepath.Join(tmp, "a.json")}, `no split "nope"`},
		{[]string{"export", dir, "--format", "center-boxes", "--out", full}, "is not empty"},
		{[]string{"export", dir, "--format", "objects-json", "--out", full}, "is a folder"},
		{[]string{"export", filepath.Join(tmp, "missing"), "--format", "objects-json", "--out", filepath.Join(tmp, "a.json")}, "missing does not exist"},
	} {
		_, stderr := wantCode(t, exitUsage, c.args...)
		if !strings.Contains(stderr, c.want) {
			t.Errorf("%v: stderr %q lacks %q", c.args, stderr, c.want)
		}
	}
	if _, err := os.Stat(filepath.Join(tmp, "a.json")); err == nil {
		t.Error("a refused export wrote a.json")
	}

	// A folder another run holds.
	held := filepath.Join(tmp, "held")
	lock, err := manifest.LockDir(held)
	if err != nil {
		t.Fatal(err)
	}
	_, stderr := wantCode(t, exitUsage, "export", dir, "--format", "center-boxes", "--out", held)
	lock.Unlock()
	if !strings.Contains(stderr, "being written by another trueset run") {
		t.Errorf("locked folder: %q", stderr)
	}

	// An instance mask changed after the dataset was written (the last
	// record's, so most of the output is done when it is found): refused,
	// naming the record, and nothing is left that looks complete.
	recs := readRecords(t, dir)
	last := recs[len(recs)-1]
	m := decodeInstances(t, dir, last.Instances)
	m.Pix[len(m.Pix)-1] ^= 1
	f, err := os.Create(filepath.Join(dir, last.Instances))
	if err != nil {
		t.Fatal(err)
	}
	png.Encode(f, m)
	f.Close()
	jsonOut := filepath.Join(tmp, "b.json")
	_, stderr = wantCode(t, exitUsage, "export", dir, "--format", "objects-json", "--out", jsonOut)
	if !strings.Contains(stderr, "record "+last.ID) || !strings.Contains(stderr, "SHA-256") {
		t.Errorf("tampered mask: %q", stderr)
	}
	boxesOut := filepath.Join(tmp, "boxes")
	_, stderr = wantCode(t, exitUsage, "export", dir, "--format", "center-boxes", "--out", boxesOut)
	if !strings.Contains(stderr, "record "+last.ID) {
		t.Errorf("tampered mask (center boxes): %q", stderr)
	}
	if ents, _ := os.ReadDir(tmp); true {
		for _, e := range ents {
			if strings.HasPrefix(e.Name(), ".b.json") || e.Name() == "b.json" {
				t.Errorf("a failed export left %s", e.Name())
			}
		}
	}
	if ents, _ := os.ReadDir(boxesOut); len(ents) != 0 {
		var names []string
		for _, e := range ents {
			names = append(names, e.Name())
		}
		t.Errorf("a failed center-boxes export left %v", names)
	}
}
