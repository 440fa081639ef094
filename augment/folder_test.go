package augment

import (
	"bytes"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"io/fs"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"strings"
	"testing"

	"golang.org/x/image/bmp"
	"golang.org/x/image/tiff"

	"github.com/trueset/trueset/manifest"
)

const fixtureDir = "../testdata/plain"

// copyFixture copies testdata/plain into a fresh temporary folder.
func copyFixture(t *testing.T) string {
	t.Helper()
	dst := t.TempDir()
	err := filepath.WalkDir(fixtureDir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(fixtureDir, p)
		if d.IsDir() {
			return os.MkdirAll(filepath.Join(dst, rel), 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dst, rel), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
	return dst
}

func writeFile(t *testing.T, p string, b []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

func pngBytes(t *testing.T, m image.Image) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := png.Encode(&buf, m); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func readPNG(t *testing.T, p string) image.Image {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: %v", p, err)
	}
	return m
}

// rawValue is a mask or instance value as the standard library's PNG
// decoder reads it (the reference for what the files say).
func rawValue(m image.Image, x, y int) int {
	switch m := m.(type) {
	case *image.Paletted:
		return int(m.ColorIndexAt(x, y))
	case *image.Gray:
		return int(m.GrayAt(x, y).Y)
	case *image.Gray16:
		return int(m.Gray16At(x, y).Y)
	}
	panic("unexpected image type")
}

// TestReadFolderFixture reads testdata/plain and recounts what its masks say
// with the standard library's PNG decoder (the reference for the file
// contents); the expected classes and targets are those written in the
// fixture's classes.json and labels.csv (invented data).
func TestReadFolderFixture(t *testing.T) {
	f, err := ReadFolder(fixtureDir, 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	var ids []string
	for _, s := range f.Sources {
		ids = append(ids, s.ID)
	}
	if want := []string{"disc-01", "disc-02", "disc-03", "disc-04"}; !reflect.DeepEqual(ids, want) {
		t.Fatalf("sources %v, want %v", ids, want)
	}
	wantClasses := []manifest.Class{
		{ID: 0, Name: "background", Color: [3]uint8{0, 0, 0}},
		{ID: 1, Name: "leaf-disc", Color: [3]uint8{60, 170, 75}},
		{ID: 2, Name: "corner-tag", Color: [3]uint8{235, 140, 35}},
	}
	if !reflect.DeepEqual(f.Classes, wantClasses) {
		t.Errorf("classes %+v, want %+v", f.Classes, wantClasses)
	}
	if want := map[int]Invariance{2: {Flip: false, MaxRotate: 15}}; !reflect.DeepEqual(f.Invariance, want) {
		t.Errorf("invariance %+v, want %+v", f.Invariance, want)
	}
	if want := []string{"leaves", "lighting"}; !reflect.DeepEqual(f.TargetNames, want) {
		t.Errorf("target names %v, want %v", f.TargetNames, want)
	}
	wantTargets := map[string]map[string]manifest.Value{
		"disc-01": {"leaves": manifest.Number(3), "lighting": manifest.Text("even")},
		"disc-02": {"leaves": manifest.Number(2), "lighting": manifest.Text("side")},
		"disc-03": {"leaves": manifest.Number(2), "lighting": manifest.Text("even")},
		"disc-04": {"leaves": manifest.Number(4), "lighting": manifest.Text("side")},
	}
	// Instance ids as written in the fixture's instance files (README.md);
	// components are numbered 1, 2, … (checked in raster order below).
	wantIDs := map[string][]int{"disc-01": {10, 11, 12, 300}, "disc-02": {1, 2, 7}, "disc-03": {1, 2, 3}, "disc-04": {1, 2, 3, 4}}
	wantChannels := map[string]int{"disc-01": 3, "disc-02": 1, "disc-03": 3, "disc-04": 3}
	pal := manifest.Palette(wantClasses)

	for _, s := range f.Sources {
		t.Run(s.ID, func(t *testing.T) {
			if !reflect.DeepEqual(s.Targets, wantTargets[s.ID]) {
				t.Errorf("targets %v, want %v", s.Targets, wantTargets[s.ID])
			}
			if s.Image.W != 48 || s.Image.H != 40 || s.Image.C != wantChannels[s.ID] {
				t.Errorf("image %d×%d×%d, want 48×40×%d", s.Image.W, s.Image.H, s.Image.C, wantChannels[s.ID])
			}
			if !reflect.DeepEqual(s.Mask.Palette, pal) {
				t.Error("mask palette is not manifest.Palette(classes)")
			}
			// Image pixels agree with the standard library's decoders
			// (JPEG within 1 level: image/draw's YCbCr path and
			// color.YCbCr.RGBA round differently).
			imgPath := filepath.Join(fixtureDir, "images", s.ID+".png")
			tol := float32(0)
			var ref image.Image
			if s.ID == "disc-03" {
				b, _ := os.ReadFile(filepath.Join(fixtureDir, "images", s.ID+".jpg"))
				if ref, err = jpeg.Decode(bytes.NewReader(b)); err != nil {
					t.Fatal(err)
				}
				tol = 1
			} else {
				ref = readPNG(t, imgPath)
			}
			for y := 0; y < 40; y++ {
				for x := 0; x < 48; x++ {
					r, g, b, _ := ref.At(x, y).RGBA()
					want := []float32{float32(r >> 8), float32(g >> 8), float32(b >> 8)}[:s.Image.C]
					for c := range want {
						if d := s.Image.Pix[(y*48+x)*s.Image.C+c] - want[c]; d > tol || d < -tol {
							t.Fatalf("image pixel (%d,%d) channel %d = %v, want %v", x, y, c, s.Image.Pix[(y*48+x)*s.Image.C+c], want[c])
						}
					}
				}
			}

			raw := readPNG(t, filepath.Join(fixtureDir, "masks", s.ID+".png"))
			classPixels := map[int]int{}
			for y := 0; y < 40; y++ {
				for x := 0; x < 48; x++ {
					v := rawValue(raw, x, y)
					if got := int(s.Mask.ColorIndexAt(x, y)); got != v {
						t.Fatalf("mask (%d,%d) = %d, file says %d", x, y, got, v)
					}
					classPixels[v]++
					if v == manifest.IgnoreID && s.Instances.Gray16At(x, y).Y != 0 {
						t.Errorf("ignore pixel (%d,%d) has instance %d", x, y, s.Instances.Gray16At(x, y).Y)
					}
				}
			}

			// Recount every object: area and box from the instance ids, class
			// from the mask under them.
			type count struct {
				area  int
				box   [4]int
				class map[int]bool
			}
			counts := map[int]*count{}
			var firstSeen []int // ids in raster order of their first pixel
			instRef := image.Image(s.Instances)
			if _, err := os.Stat(filepath.Join(fixtureDir, "instances", s.ID+".png")); err == nil {
				instRef = readPNG(t, filepath.Join(fixtureDir, "instances", s.ID+".png"))
			}
			for y := 0; y < 40; y++ {
				for x := 0; x < 48; x++ {
					id := rawValue(instRef, x, y)
					if got := int(s.Instances.Gray16At(x, y).Y); got != id {
						t.Fatalf("instances (%d,%d) = %d, file says %d", x, y, got, id)
					}
					if id == 0 {
						continue
					}
					c := counts[id]
					if c == nil {
						c = &count{box: [4]int{x, y, x + 1, y + 1}, class: map[int]bool{}}
						counts[id] = c
						firstSeen = append(firstSeen, id)
					}
					c.area++
					c.box = [4]int{min(c.box[0], x), min(c.box[1], y), max(c.box[2], x+1), max(c.box[3], y+1)}
					c.class[rawValue(raw, x, y)] = true
				}
			}
			var gotIDs []int
			areaByClass := map[int]int{}
			discs := 0
			for _, o := range s.Objects {
				gotIDs = append(gotIDs, o.Instance)
				c := counts[o.Instance]
				if c == nil {
					t.Fatalf("object %d not in the instance mask", o.Instance)
				}
				if o.Area != c.area || o.Box != c.box {
					t.Errorf("object %d: area %d box %v, recount %d %v", o.Instance, o.Area, o.Box, c.area, c.box)
				}
				if len(c.class) != 1 || !c.class[o.Class] {
					t.Errorf("object %d: class %d, mask under it has %v", o.Instance, o.Class, c.class)
				}
				if o.ClassName != wantClasses[o.Class].Name || o.Shown != 1 || o.Shape != "labeled" {
					t.Errorf("object %d: name %q visible %v kind %q", o.Instance, o.ClassName, o.Shown, o.Shape)
				}
				areaByClass[o.Class] += o.Area
				if o.Class == 1 {
					discs++
				}
			}
			if !reflect.DeepEqual(gotIDs, wantIDs[s.ID]) {
				t.Errorf("object ids %v, want %v", gotIDs, wantIDs[s.ID])
			}
			// Every class pixel of the fixture belongs to an object (no
			// unlabeled regions), so class areas add up.
			for c := 1; c <= 2; c++ {
				if areaByClass[c] != classPixels[c] {
					t.Errorf("class %d: objects cover %d pixels, the mask has %d", c, areaByClass[c], classPixels[c])
				}
			}
			if float64(discs) != s.Targets["leaves"].Num {
				t.Errorf("%d leaf-disc objects, labels.csv says %v", discs, s.Targets["leaves"])
			}
			if s.ID == "disc-03" || s.ID == "disc-04" { // components: 1, 2, … in raster order
				for i, id := range firstSeen {
					if id != i+1 {
						t.Errorf("components in raster order %v, want 1, 2, …", firstSeen)
						break
					}
				}
			}
			if s.ID == "disc-03" && classPixels[manifest.IgnoreID] != 30 { // the 6×5 glare patch
				t.Errorf("disc-03 has %d ignore pixels, want 30", classPixels[manifest.IgnoreID])
			}
		})
	}
}

func TestIsPlainFolder(t *testing.T) {
	if !IsPlainFolder(fixtureDir) {
		t.Error("fixture is not a plain folder")
	}
	d := copyFixture(t)
	writeFile(t, filepath.Join(d, manifest.DatasetFile), []byte("{}"))
	if IsPlainFolder(d) {
		t.Error("a folder with dataset.json counts as plain")
	}
	d = copyFixture(t)
	os.RemoveAll(filepath.Join(d, "masks"))
	if IsPlainFolder(d) {
		t.Error("a folder without masks/ counts as plain")
	}
	if IsPlainFolder(filepath.Join(t.TempDir(), "nothing")) {
		t.Error("a missing folder counts as plain")
	}
}

// TestPlainFolderWithoutClasses: without classes.json every id found in the
// masks is a class "class-<id>" with the fixed palette, and no class has
// invariance rules.
func TestPlainFolderWithoutClasses(t *testing.T) {
	d := copyFixture(t)
	os.Remove(filepath.Join(d, "classes.json"))
	f, err := ReadFolder(d, 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	want := []manifest.Class{
		{ID: 0, Name: "background", Color: folderClassColor(0)},
		{ID: 1, Name: "class-1", Color: folderClassColor(1)},
		{ID: 2, Name: "class-2", Color: folderClassColor(2)},
	}
	if !reflect.DeepEqual(f.Classes, want) {
		t.Errorf("classes %+v, want %+v", f.Classes, want)
	}
	if len(f.Invariance) != 0 {
		t.Errorf("invariance %v, want none", f.Invariance)
	}
	if f.Sources[0].Objects[0].ClassName != "class-1" {
		t.Errorf("class name %q", f.Sources[0].Objects[0].ClassName)
	}

	// classes.json may list the background (by its one name) and leave out
	// colors and rules; another name for id 0 is refused (TestFolderErrors).
	writeFile(t, filepath.Join(d, "classes.json"), []byte(`[{"id": 0, "name": "background"}, {"id": 2, "flip": true}, {"id": 1, "max_rotate": 0}]`))
	f, err = ReadFolder(d, 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(f.Classes, want) {
		t.Errorf("classes %+v, want %+v", f.Classes, want)
	}
	if w := map[int]Invariance{1: {Flip: true, MaxRotate: 0}, 2: {Flip: true, MaxRotate: -1}}; !reflect.DeepEqual(f.Invariance, w) {
		t.Errorf("invariance %+v, want %+v", f.Invariance, w)
	}
}

// TestFolderClassColorsDistinct: the fixed palette gives 254 distinct
// colors, none black (background) or white (ignore, manifest.Palette).
func TestFolderClassColorsDistinct(t *testing.T) {
	seen := map[[3]uint8]int{}
	for id := 1; id <= 254; id++ {
		c := folderClassColor(id)
		if prev, ok := seen[c]; ok {
			t.Fatalf("ids %d and %d share color %v", prev, id, c)
		}
		if c == [3]uint8{} || c == [3]uint8{255, 255, 255} {
			t.Fatalf("id %d is %v", id, c)
		}
		seen[c] = id
	}
}

func literalMask(t *testing.T, rows []string) *image.Paletted {
	t.Helper()
	h, w := len(rows), len(strings.Fields(rows[0]))
	m := image.NewPaletted(image.Rect(0, 0, w, h), manifest.Palette(nil))
	for y, r := range rows {
		for x, f := range strings.Fields(r) {
			var v int
			for _, ch := range f {
				v = v*10 + int(ch-'0')
			}
			m.SetColorIndex(x, y, uint8(v))
		}
	}
	return m
}

// TestFolderComponents checks 4-connectivity (pixels sharing an edge; the
// usual definition in digital topology, e.g. Rosenfeld and Pfaltz 1966,
// cited from memory) on masks small enough to check by eye.
func TestFolderComponents(t *testing.T) {
	cases := []struct {
		name          string
		mask, want    []string
		classes       []int32
		mergedUnder8c string
	}{
		{
			name: "diagonal touches are separate, classes never merge, ignore is no object",
			mask: []string{
				"1 1 0 2 2",
				"1 0 1 0 2",
				"0 1 1 0 0",
				"2 2 0 255 1",
			},
			// (1,0)-(2,1) and (0,1)-(1,2) touch only at corners: separate
			// under 4-connectivity (one blob under 8-connectivity). (1,3) is
			// class 2 beside class-1 pixel (1,2): different classes.
			want: []string{
				"1 1 0 2 2",
				"1 0 3 0 2",
				"0 3 3 0 0",
				"4 4 0 0 5",
			},
			classes: []int32{0, 1, 2, 1, 2, 1},
		},
		{
			name: "a U joins at the bottom: one component although its arms start apart",
			mask: []string{
				"1 0 1",
				"1 0 1",
				"1 1 1",
			},
			want: []string{
				"1 0 1",
				"1 0 1",
				"1 1 1",
			},
			classes: []int32{0, 1},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ids, classes, err := folderComponents(literalMask(t, c.mask))
			if err != nil {
				t.Fatal(err)
			}
			want := literalMask(t, c.want)
			for y := range len(c.want) {
				for x := range want.Rect.Dx() {
					if got := int(ids.Gray16At(x, y).Y); got != int(want.ColorIndexAt(x, y)) {
						t.Fatalf("(%d,%d) = %d, want %d", x, y, got, want.ColorIndexAt(x, y))
					}
				}
			}
			if !reflect.DeepEqual(classes, c.classes) {
				t.Errorf("classes %v, want %v", classes, c.classes)
			}
		})
	}

	// A 512×512 checkerboard has 131072 isolated pixels: more than a 16-bit
	// instance mask can number.
	m := image.NewPaletted(image.Rect(0, 0, 512, 512), manifest.Palette(nil))
	for i := range m.Pix {
		if (i%512+i/512)%2 == 0 {
			m.Pix[i] = 1
		}
	}
	if _, _, err := folderComponents(m); err == nil || !strings.Contains(err.Error(), "65535") {
		t.Errorf("checkerboard: err %v, want more than 65535 regions", err)
	}
}

// grayImage returns a w×h 8-bit gray image with values f(x, y).
func grayImage(w, h int, f func(x, y int) uint8) *image.Gray {
	g := image.NewGray(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			g.Pix[y*g.Stride+x] = f(x, y)
		}
	}
	return g
}

func rewritePNG(t *testing.T, p string, edit func(m image.Image) image.Image) {
	t.Helper()
	writeFile(t, p, pngBytes(t, edit(readPNG(t, p))))
}

// TestFolderErrors builds broken copies of the fixture; each must be refused
// with an error naming the file and saying what is wrong.
func TestFolderErrors(t *testing.T) {
	type tc struct {
		name    string
		breakIt func(t *testing.T, d string)
		want    []string // substrings; "@x" is replaced by filepath.Join(d, "x"), "@" by d
	}
	rgbMask := func(t *testing.T, d string) {
		m := image.NewRGBA(image.Rect(0, 0, 48, 40))
		for i := range m.Pix {
			m.Pix[i] = 255
		}
		writeFile(t, filepath.Join(d, "masks/disc-04.png"), pngBytes(t, m))
	}
	setLabels := func(s string) func(t *testing.T, d string) {
		return func(t *testing.T, d string) { writeFile(t, filepath.Join(d, "labels.csv"), []byte(s)) }
	}
	setClasses := func(s string) func(t *testing.T, d string) {
		return func(t *testing.T, d string) { writeFile(t, filepath.Join(d, "classes.json"), []byte(s)) }
	}
	const labelsHead = "id,leaves,lighting\ndisc-03,2,even\ndisc-01,3,even\n"
	cases := []tc{
		{"image without mask", func(t *testing.T, d string) { os.Remove(filepath.Join(d, "masks/disc-04.png")) },
			[]string{"@images/disc-04.png", "without a mask", "@masks/disc-04.png"}},
		{"mask without image", func(t *testing.T, d string) {
			os.Rename(filepath.Join(d, "images/disc-04.png"), filepath.Join(d, "images/disc-05.png"))
			os.Rename(filepath.Join(d, "masks/disc-04.png"), filepath.Join(d, "masks/disc-05.png"))
			b, _ := os.ReadFile(filepath.Join(d, "masks/disc-05.png"))
			writeFile(t, filepath.Join(d, "masks/disc-04.png"), b)
		}, []string{"@masks/disc-04.png", "mask without an image"}},
		{"instances without image", func(t *testing.T, d string) {
			b, _ := os.ReadFile(filepath.Join(d, "instances/disc-01.png"))
			writeFile(t, filepath.Join(d, "instances/disc-09.png"), b)
		}, []string{"@instances/disc-09.png", "without an image"}},
		{"two images with one stem", func(t *testing.T, d string) {
			b, _ := os.ReadFile(filepath.Join(d, "images/disc-03.jpg"))
			writeFile(t, filepath.Join(d, "images/disc-01.jpg"), b)
		}, []string{"@images/disc-01.jpg", "@images/disc-01.png", "two files with the stem \"disc-01\""}},
		{"stems differing in case only", func(t *testing.T, d string) {
			b, _ := os.ReadFile(filepath.Join(d, "images/disc-01.png"))
			writeFile(t, filepath.Join(d, "images/DISC-01.png"), b)
		}, []string{"@images/DISC-01.png", "@images/disc-01.png", "letter case"}},
		{"not an image extension", func(t *testing.T, d string) {
			writeFile(t, filepath.Join(d, "images/notes.txt"), []byte("leaf discs, batch 7"))
		}, []string{"@images/notes.txt", "not an image"}},
		{"sub-folder in images", func(t *testing.T, d string) { os.Mkdir(filepath.Join(d, "images/old"), 0o755) },
			[]string{"@images/old", "not a regular file"}},
		{"unknown image format", func(t *testing.T, d string) {
			writeFile(t, filepath.Join(d, "images/disc-04.png"), []byte("these bytes are no image at all"))
		}, []string{"@images/disc-04.png", "unknown format"}},
		{"empty image file", func(t *testing.T, d string) { writeFile(t, filepath.Join(d, "images/disc-04.png"), nil) },
			[]string{"@images/disc-04.png", "empty file"}},
		{"RGB mask", rgbMask, []string{"@masks/disc-04.png", "8-bit RGB", "indexed (paletted) or 8-bit gray"}},
		{"16-bit gray mask", func(t *testing.T, d string) {
			writeFile(t, filepath.Join(d, "masks/disc-04.png"), pngBytes(t, image.NewGray16(image.Rect(0, 0, 48, 40))))
		}, []string{"@masks/disc-04.png", "16-bit gray", "instances/"}},
		{"1-bit gray mask", func(t *testing.T, d string) {
			writeFile(t, filepath.Join(d, "masks/disc-04.png"), pngHeaderOnly(48, 40, 1, 0))
		}, []string{"@masks/disc-04.png", "1-bit gray", "scaled"}},
		{"gray mask with a transparent color", func(t *testing.T, d string) {
			// Insert a tRNS chunk (ISO/IEC 15948 §11.3.2.1: for gray, one
			// 2-byte sample value) right after IHDR.
			b := pngBytes(t, grayImage(48, 40, func(x, y int) uint8 { return 0 }))
			at := 8 + 8 + 13 + 4
			b = append(append(append([]byte(nil), b[:at]...), pngChunk("tRNS", []byte{0, 0})...), b[at:]...)
			writeFile(t, filepath.Join(d, "masks/disc-04.png"), b)
		}, []string{"@masks/disc-04.png", "tRNS"}},
		{"JPEG mask", func(t *testing.T, d string) {
			var buf bytes.Buffer
			jpeg.Encode(&buf, image.NewGray(image.Rect(0, 0, 48, 40)), nil)
			writeFile(t, filepath.Join(d, "masks/disc-04.png"), buf.Bytes())
		}, []string{"@masks/disc-04.png", "JPEG", "must be PNG"}},
		{"mask value with no class", func(t *testing.T, d string) {
			rewritePNG(t, filepath.Join(d, "masks/disc-04.png"), func(m image.Image) image.Image {
				g := m.(*image.Gray)
				g.SetGray(5, 7, color.Gray{3})
				g.SetGray(40, 30, color.Gray{3})
				return g
			})
		}, []string{"@masks/disc-04.png", "value 3", "x=5, y=7", "classes.json"}},
		{"mask size differs", func(t *testing.T, d string) {
			writeFile(t, filepath.Join(d, "masks/disc-04.png"), pngBytes(t, image.NewGray(image.Rect(0, 0, 40, 30))))
		}, []string{"@masks/disc-04.png", "40×30", "@images/disc-04.png", "48×40"}},
		{"instances size differs", func(t *testing.T, d string) {
			writeFile(t, filepath.Join(d, "instances/disc-01.png"), pngBytes(t, image.NewGray16(image.Rect(0, 0, 47, 40))))
		}, []string{"@instances/disc-01.png", "47×40", "@masks/disc-01.png", "48×40"}},
		{"instances not gray", func(t *testing.T, d string) {
			p := image.NewPaletted(image.Rect(0, 0, 48, 40), manifest.Palette(nil))
			writeFile(t, filepath.Join(d, "instances/disc-02.png"), pngBytes(t, p))
		}, []string{"@instances/disc-02.png", "8-bit indexed", "16-bit (or 8-bit) gray"}},
		{"instance on two classes", func(t *testing.T, d string) {
			rewritePNG(t, filepath.Join(d, "instances/disc-01.png"), func(m image.Image) image.Image {
				g := m.(*image.Gray16)
				g.SetGray16(13, 14, color.Gray16{300}) // center of disc 10; 300 is the tag
				return g
			})
		}, []string{"@instances/disc-01.png", "instance 300", "two classes", "x=13, y=14"}},
		{"instance on background only", func(t *testing.T, d string) {
			rewritePNG(t, filepath.Join(d, "instances/disc-02.png"), func(m image.Image) image.Image {
				g := m.(*image.Gray)
				g.SetGray(1, 1, color.Gray{99})
				return g
			})
		}, []string{"@instances/disc-02.png", "instance 99", "background"}},
		{"instance on an ignore pixel", func(t *testing.T, d string) {
			rewritePNG(t, filepath.Join(d, "masks/disc-01.png"), func(m image.Image) image.Image {
				g := m.(*image.Gray)
				g.SetGray(13, 14, color.Gray{255})
				return g
			})
		}, []string{"@instances/disc-01.png", "instance 10", "255 (ignore)"}},
		{"dataset.json present", func(t *testing.T, d string) { writeFile(t, filepath.Join(d, "dataset.json"), []byte("{}")) },
			[]string{"@", "has dataset.json", "trueset dataset"}},
		{"no masks folder", func(t *testing.T, d string) { os.RemoveAll(filepath.Join(d, "masks")) },
			[]string{"@masks", "missing folder"}},

		{"labels: id matching no image", setLabels(labelsHead + "disc-05,4,side\ndisc-02,2,side\n"),
			[]string{"@labels.csv:4", `"disc-05"`, "matches no image"}},
		{"labels: duplicate id", setLabels(labelsHead + "disc-04,4,side\ndisc-01,2,side\n"),
			[]string{"@labels.csv:5", `"disc-01"`, "line 3"}},
		{"labels: missing row", setLabels(labelsHead + "disc-04,4,side\n"),
			[]string{"@labels.csv", `"disc-02"`, "no row"}},
		{"labels: extra column", setLabels(labelsHead + "disc-04,4,side,cloudy\ndisc-02,2,side\n"),
			[]string{"@labels.csv:4", "4 fields", "3 columns"}},
		{"labels: missing column", setLabels(labelsHead + "disc-04,4\ndisc-02,2,side\n"),
			[]string{"@labels.csv:4", "2 fields", "3 columns"}},
		{"labels: empty cell", setLabels(labelsHead + "disc-04,,side\ndisc-02,2,side\n"),
			[]string{"@labels.csv:4", `column "leaves" is empty`, `"disc-04"`}},
		{"labels: no id column", setLabels("stem,leaves,lighting\ndisc-01,3,even\n"),
			[]string{"@labels.csv:1", `no "id" column`}},
		{"labels: duplicate column", setLabels("id,leaves,leaves\ndisc-01,3,3\n"),
			[]string{"@labels.csv:1", `both named "leaves"`}},
		{"labels: empty file", setLabels(""), []string{"@labels.csv", "empty"}},
		{"labels: NaN in a numeric column", setLabels(labelsHead + "disc-04,NaN,side\ndisc-02,2,side\n"),
			[]string{"@labels.csv:4", `column "leaves"`, "not a finite number"}},
		{"labels: bad quoting", setLabels(labelsHead + "disc-04,4,\"side\ndisc-02,2,side\n"),
			[]string{"@labels.csv", "quote"}},

		{"classes: id 255", setClasses(`[{"id": 255, "name": "glare"}]`), []string{"@classes.json", "id 255", "ignore"}},
		{"classes: id out of range", setClasses(`[{"id": 300}]`), []string{"@classes.json", "0..254"}},
		{"classes: id 0 named other than background", setClasses(`[{"id": 0, "name": "floor"}, {"id": 1, "name": "leaf-disc"}]`), []string{"@classes.json", "id 0 is background", `"floor"`}},
		{"classes: duplicate id", setClasses(`[{"id": 1}, {"id": 1, "name": "x"}]`), []string{"@classes.json", "entry 2", "twice"}},
		{"classes: duplicate name", setClasses(`[{"id": 1, "name": "a"}, {"id": 2, "name": "a"}]`), []string{"@classes.json", `"a"`, "class 1"}},
		{"classes: misspelt field", setClasses(`[{"id": 1, "colour": [1, 2, 3]}]`), []string{"@classes.json", `"colour"`}},
		{"classes: bad color", setClasses(`[{"id": 1, "color": [1, 2, 300]}]`), []string{"@classes.json", "300", "0..255"}},
		{"classes: negative max_rotate", setClasses(`[{"id": 1, "max_rotate": -5}]`), []string{"@classes.json", "max_rotate", "leave it out"}},
		{"classes: no id", setClasses(`[{"name": "leaf"}]`), []string{"@classes.json", `no "id"`}},
		{"classes: not a list", setClasses(`{"1": "leaf"}`), []string{"@classes.json", "list"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := copyFixture(t)
			c.breakIt(t, d)
			_, err := ReadFolder(d, 1<<20)
			if err == nil {
				t.Fatal("no error")
			}
			t.Log(strings.ReplaceAll(err.Error(), d, "FOLDER"))
			for _, w := range c.want {
				if strings.HasPrefix(w, "@") {
					w = filepath.Join(d, w[1:])
				}
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q\ndoes not contain %q", err, w)
				}
			}
		})
	}
}

// pngChunk returns one PNG chunk: length, type, data, CRC-32 over type and
// data (ISO/IEC 15948 §5.3; the CRC is the ISO 3309 / ITU-T V.42 polynomial,
// which hash/crc32's IEEE table implements).
func pngChunk(typ string, data []byte) []byte {
	var b []byte
	b = binary.BigEndian.AppendUint32(b, uint32(len(data)))
	b = append(b, typ...)
	b = append(b, data...)
	return binary.BigEndian.AppendUint32(b, crc32.ChecksumIEEE(append([]byte(typ), data...)))
}

// bombPNG is a valid PNG signature and IHDR claiming w×h 8-bit pixels of
// the given color type (0 gray, 2 RGB), then a broken rest: a decoder that
// went past the header would try to allocate the image and then fail.
func bombPNG(w, h uint32, colorType byte) []byte { return pngHeaderOnly(w, h, 8, colorType) }

// pngHeaderOnly is a PNG signature and a valid IHDR chunk followed by junk.
func pngHeaderOnly(w, h uint32, depth, colorType byte) []byte {
	b := []byte("\x89PNG\r\n\x1a\n")
	ihdr := binary.BigEndian.AppendUint32(nil, w)
	ihdr = binary.BigEndian.AppendUint32(ihdr, h)
	ihdr = append(ihdr, depth, colorType, 0, 0, 0) // deflate, no filter, no interlace
	b = append(b, pngChunk("IHDR", ihdr)...)
	return append(b, "\x00\x00\x10\x00IDAT\x78\x9c garbage, not deflate"...)
}

func TestFolderPixelBudget(t *testing.T) {
	bomb, grayBomb := bombPNG(100000, 100000, 2), bombPNG(100000, 100000, 0)
	// The standard library's PNG decoder agrees the headers are valid. (Its
	// png.Decode on these bytes allocates the whole 10^10-pixel image before
	// it meets the broken data — that is the bomb — so the broken rest is
	// shown on a 64×64 header instead.)
	for _, b := range [][]byte{bomb, grayBomb} {
		cfg, err := png.DecodeConfig(bytes.NewReader(b))
		if err != nil || cfg.Width != 100000 || cfg.Height != 100000 {
			t.Fatalf("crafted header: %v %+v", err, cfg)
		}
	}
	if _, err := png.Decode(bytes.NewReader(bombPNG(64, 64, 0))); err == nil {
		t.Fatal("the crafted rest decodes")
	}
	small := pngBytes(t, image.NewGray(image.Rect(0, 0, 8, 8)))

	// "image": image and mask claim the same size and the mask is a valid
	// 8-bit gray header, so only the budget stands between ReadFolder and
	// decoding 10^10 pixels. "mask": the budget is checked before the size
	// comparison with the image.
	for _, c := range []struct{ name, image, mask, bad string }{
		{"image", "bomb", "grayBomb", "images/x.png"},
		{"mask", "small", "grayBomb", "masks/x.png"},
	} {
		t.Run(c.name, func(t *testing.T) {
			d := t.TempDir()
			pick := map[string][]byte{"bomb": bomb, "grayBomb": grayBomb, "small": small}
			writeFile(t, filepath.Join(d, "images/x.png"), pick[c.image])
			writeFile(t, filepath.Join(d, "masks/x.png"), pick[c.mask])
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			_, err := ReadFolder(d, 4096*4096)
			runtime.ReadMemStats(&after)
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range []string{filepath.Join(d, c.bad), "too large", "100000×100000", "10000000000 pixels", "16777216"} {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
			// Decoding 10^10 RGB pixels would need 30 GB; refusing from the
			// header needs next to nothing (scratch tables are ~0.5 MB).
			if n := after.TotalAlloc - before.TotalAlloc; n > 4<<20 {
				t.Errorf("refusing the bomb allocated %d bytes", n)
			}
		})
	}
}

func TestFolderCorruptPNG(t *testing.T) {
	orig, err := os.ReadFile(filepath.Join(fixtureDir, "images/disc-04.png"))
	if err != nil {
		t.Fatal(err)
	}
	// Find the IDAT chunk (ISO/IEC 15948 §5.3: length, type, data, CRC).
	idat := bytes.Index(orig, []byte("IDAT")) - 4
	n := int(binary.BigEndian.Uint32(orig[idat:]))
	crcAt := idat + 8 + n

	wrongCRC := append([]byte(nil), orig...)
	wrongCRC[crcAt] ^= 0xff
	wrongIHDRCRC := append([]byte(nil), orig...)
	wrongIHDRCRC[8+8+13] ^= 0xff // the IHDR CRC: signature, length+type, 13 data bytes
	for _, c := range []struct {
		name string
		b    []byte
		want []string
	}{
		{"truncated", orig[:len(orig)/2], []string{"truncated"}},
		{"truncated in the header", orig[:20], []string{"truncated"}},
		{"wrong IDAT CRC", wrongCRC, []string{"corrupt", "checksum"}},
		{"wrong IHDR CRC", wrongIHDRCRC, []string{"corrupt", "checksum"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			// The standard library's decoder refuses these bytes too.
			if _, err := png.Decode(bytes.NewReader(c.b)); err == nil {
				t.Fatal("image/png decodes the broken file")
			}
			d := copyFixture(t)
			p := filepath.Join(d, "images/disc-04.png")
			writeFile(t, p, c.b)
			_, err := ReadFolder(d, 1<<20)
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range append([]string{p}, c.want...) {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}

// vp8lBits writes the least-significant-bit-first bit stream of VP8L.
type vp8lBits struct {
	buf []byte
	acc uint64
	n   uint
}

func (w *vp8lBits) put(v uint32, n uint) {
	w.acc |= uint64(v) << w.n
	w.n += n
	for w.n >= 8 {
		w.buf = append(w.buf, byte(w.acc))
		w.acc >>= 8
		w.n -= 8
	}
}

func (w *vp8lBits) bytes() []byte {
	if w.n > 0 {
		w.buf = append(w.buf, byte(w.acc))
	}
	return w.buf
}

// twoColorWebP writes a lossless WebP (RIFF "WEBP" with one "VP8L" chunk)
// of an opaque w×h image whose pixels are color a or b. It uses only what
// the WebP lossless bitstream specification (RFC 9649, §3–§5; section
// numbers from memory) calls the simplest coding: no transforms, no color
// cache, no meta prefix codes, and five "simple" prefix codes of one or two
// symbols, so each pixel costs one bit per channel that differs.
func twoColorWebP(w, h int, a, b [3]uint8, isB func(x, y int) bool) []byte {
	var bw vp8lBits
	bw.put(0x2f, 8) // signature
	bw.put(uint32(w-1), 14)
	bw.put(uint32(h-1), 14)
	bw.put(0, 1) // alpha_is_used hint
	bw.put(0, 3) // version 0
	bw.put(0, 1) // no transform
	bw.put(0, 1) // no color cache
	bw.put(0, 1) // no meta prefix codes
	// Prefix codes in order green, red, blue, alpha, distance. A two-symbol
	// code sends the smaller symbol as 0 and the larger as 1 (listed in
	// ascending order so canonical and listed order agree).
	simple := func(s0, s1 uint8) {
		bw.put(1, 1) // simple code
		if s0 == s1 {
			bw.put(0, 1) // one symbol
			bw.put(1, 1) // 8-bit symbol
			bw.put(uint32(s0), 8)
			return
		}
		bw.put(1, 1)
		bw.put(1, 1)
		bw.put(uint32(min(s0, s1)), 8)
		bw.put(uint32(max(s0, s1)), 8)
	}
	order := [3]int{1, 0, 2} // channel index of green, red, blue in [r, g, b]
	for _, c := range order {
		simple(a[c], b[c])
	}
	simple(255, 255) // alpha
	bw.put(1, 1)     // distance: simple, one 1-bit symbol 0 (never used)
	bw.put(0, 1)
	bw.put(0, 1)
	bw.put(0, 1)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			col := a
			if isB(x, y) {
				col = b
			}
			for _, c := range order {
				if a[c] != b[c] {
					bit := uint32(0)
					if col[c] == max(a[c], b[c]) {
						bit = 1
					}
					bw.put(bit, 1)
				}
			}
		}
	}
	data := bw.bytes()
	var out []byte
	out = append(out, "RIFF"...)
	size := 4 + 8 + len(data) + len(data)%2
	out = binary.LittleEndian.AppendUint32(out, uint32(size))
	out = append(out, "WEBPVP8L"...)
	out = binary.LittleEndian.AppendUint32(out, uint32(len(data)))
	out = append(out, data...)
	if len(data)%2 == 1 {
		out = append(out, 0)
	}
	return out
}

// TestFolderOtherFormats: BMP and TIFF written by golang.org/x/image's own
// encoders, and a lossless WebP written by twoColorWebP, read back exactly.
func TestFolderOtherFormats(t *testing.T) {
	const w, h = 12, 9
	rgb := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			rgb.SetRGBA(x, y, color.RGBA{uint8(20 * x), uint8(25 * y), uint8(7*x + 11*y), 255})
		}
	}
	gray := grayImage(w, h, func(x, y int) uint8 { return uint8(3*x*y + 10) })
	leaf, table := [3]uint8{70, 140, 60}, [3]uint8{234, 238, 229}
	inDisc := func(x, y int) bool { return (2*x+1-w)*(2*x+1-w)+(2*y+1-h)*(2*y+1-h) <= 36 }

	d := t.TempDir()
	var bmpBuf, tifBuf, tifGray bytes.Buffer
	if err := bmp.Encode(&bmpBuf, rgb); err != nil {
		t.Fatal(err)
	}
	if err := tiff.Encode(&tifBuf, rgb, &tiff.Options{Compression: tiff.Deflate}); err != nil {
		t.Fatal(err)
	}
	if err := tiff.Encode(&tifGray, gray, nil); err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(d, "images/a.bmp"), bmpBuf.Bytes())
	writeFile(t, filepath.Join(d, "images/b.tif"), tifBuf.Bytes())
	writeFile(t, filepath.Join(d, "images/c.TIFF"), tifGray.Bytes())
	writeFile(t, filepath.Join(d, "images/d.webp"), twoColorWebP(w, h, table, leaf, inDisc))
	mask := pngBytes(t, grayImage(w, h, func(x, y int) uint8 {
		if inDisc(x, y) {
			return 1
		}
		return 0
	}))
	for _, s := range []string{"a", "b", "c", "d"} {
		writeFile(t, filepath.Join(d, "masks", s+".png"), mask)
	}
	f, err := ReadFolder(d, 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	if len(f.Sources) != 4 {
		t.Fatalf("%d sources", len(f.Sources))
	}
	for _, s := range f.Sources {
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				var want []float32
				switch s.ID {
				case "a", "b":
					c := rgb.RGBAAt(x, y)
					want = []float32{float32(c.R), float32(c.G), float32(c.B)}
				case "c":
					want = []float32{float32(gray.GrayAt(x, y).Y)}
				case "d":
					c := table
					if inDisc(x, y) {
						c = leaf
					}
					want = []float32{float32(c[0]), float32(c[1]), float32(c[2])}
				}
				if s.Image.C != len(want) {
					t.Fatalf("%s: %d channels, want %d", s.ID, s.Image.C, len(want))
				}
				for c := range want {
					if got := s.Image.Pix[(y*w+x)*s.Image.C+c]; got != want[c] {
						t.Fatalf("%s: pixel (%d,%d) channel %d = %v, want %v", s.ID, x, y, c, got, want[c])
					}
				}
			}
		}
		if len(s.Objects) != 1 || s.Objects[0].Class != 1 {
			t.Errorf("%s: objects %+v", s.ID, s.Objects)
		}
	}

	// A WebP cut short, or with a broken bitstream, is refused naming the file.
	good := twoColorWebP(w, h, table, leaf, inDisc)
	broken := append([]byte(nil), good...)
	broken[20] = 0x00 // the VP8L signature byte 0x2f
	for _, c := range []struct {
		name string
		b    []byte
		want string
	}{
		{"truncated", good[:len(good)-6], "truncated"},
		{"bad signature", broken, "corrupt"},
	} {
		t.Run("webp "+c.name, func(t *testing.T) {
			d := t.TempDir()
			writeFile(t, filepath.Join(d, "images/e.webp"), c.b)
			writeFile(t, filepath.Join(d, "masks/e.png"), mask)
			_, err := ReadFolder(d, 1<<20)
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range []string{filepath.Join(d, "images/e.webp"), c.want} {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}

// TestLabelsColumnTypes: a column is numeric when every cell parses as a
// float, else text (so "7" in a text column stays the string "7"); cells are
// trimmed and a UTF-8 byte-order mark before the header is dropped.
func TestLabelsColumnTypes(t *testing.T) {
	d := copyFixture(t)
	writeFile(t, filepath.Join(d, "labels.csv"), []byte("\ufeffarea_mm2, id ,batch\n"+
		"12.5,disc-01,7\n-3e2,disc-02, 7b\n0,disc-03,7\n\"4\",disc-04,\"b, 2\"\n"))
	f, err := ReadFolder(d, 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	if want := []string{"area_mm2", "batch"}; !reflect.DeepEqual(f.TargetNames, want) {
		t.Errorf("target names %v, want %v", f.TargetNames, want)
	}
	want := map[string]map[string]manifest.Value{
		"disc-01": {"area_mm2": manifest.Number(12.5), "batch": manifest.Text("7")},
		"disc-02": {"area_mm2": manifest.Number(-300), "batch": manifest.Text("7b")},
		"disc-03": {"area_mm2": manifest.Number(0), "batch": manifest.Text("7")},
		"disc-04": {"area_mm2": manifest.Number(4), "batch": manifest.Text("b, 2")},
	}
	for _, s := range f.Sources {
		if !reflect.DeepEqual(s.Targets, want[s.ID]) {
			t.Errorf("%s: targets %v, want %v", s.ID, s.Targets, want[s.ID])
		}
	}

	// Without labels.csv every source has empty targets.
	os.Remove(filepath.Join(d, "labels.csv"))
	if f, err = ReadFolder(d, 1<<20); err != nil {
		t.Fatal(err)
	}
	if f.TargetNames != nil || f.Sources[0].Targets == nil || len(f.Sources[0].Targets) != 0 {
		t.Errorf("without labels.csv: names %v, targets %v", f.TargetNames, f.Sources[0].Targets)
	}
}

func TestFolderBudgetMustBePositive(t *testing.T) {
	if _, err := ReadFolder(fixtureDir, 0); err == nil {
		t.Error("a zero pixel budget is accepted")
	}
	// The fixture's 48×40 = 1920 pixels fit a budget of exactly 1920.
	if _, err := ReadFolder(fixtureDir, 1920); err != nil {
		t.Error(err)
	}
	if _, err := ReadFolder(fixtureDir, 1919); err == nil || !strings.Contains(err.Error(), "too large") {
		t.Errorf("budget 1919: %v", err)
	}
}

func TestFolderClassesJSONMessages(t *testing.T) {
	for _, c := range []struct{ json, want string }{
		{"[\n{\"id\": 1},\n{\"id\": 1.5}\n]", `classes.json:3: "id" must be a whole number, not a JSON number 1.5`},
		{"[\n{\"id\": 1, \"flip\": \"no\"}\n]", `classes.json:2: "flip" must be true or false, not a JSON string`},
		{"[\n{\"id\": 1,}\n]", `classes.json:2: invalid character`},
		{`{"id": 1}`, `classes.json: not a JSON list`},
	} {
		d := copyFixture(t)
		writeFile(t, filepath.Join(d, "classes.json"), []byte(c.json))
		_, err := ReadFolder(d, 1<<20)
		if err == nil || !strings.Contains(err.Error(), filepath.Join(d, c.want)) {
			t.Errorf("%q: error %v, want %q", c.json, err, c.want)
		}
	}
}
