package augment

import (
	"bytes"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"golang.org/x/image/bmp"
	"golang.org/x/image/tiff"

	"github.com/trueset/trueset/manifest"
)

// fuzzFolderBudget is the pixel budget the folder fuzz targets read with:
// 256×256, small enough that anything allocated beyond it stands out.
const fuzzFolderBudget = 1 << 16

// fuzzFolderAllocLimit bounds what one ReadFolder call may allocate: 64
// bytes per budget pixel (a 16-bit RGBA decode is 8, the float working image
// 12, masks, instances and component labels a few more) plus a fixed 40 MiB.
// The fixed part covers the 0.5 MiB instance scratch tables and the 10 MiB
// read chunks golang.org/x/image/tiff allocates for lengths it takes from
// the file (its safeReadAt and buffer.fill, up to two at once). A decoder
// that believed a header and allocated the image it claims, a 100000×100000
// bomb say, is far above it.
const fuzzFolderAllocLimit = 40<<20 + 64*fuzzFolderBudget

// fuzzW, fuzzH are the size of the testdata/plain images, and so of the
// made masks and images the fuzz inputs are paired with.
const fuzzW, fuzzH = 48, 40

// fuzzFolderMask is a valid 8-bit gray mask: two discs of class 1, a
// rectangle of class 2 and a 255 (ignore) patch.
func fuzzFolderMask(w, h int) *image.Gray {
	m := image.NewGray(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			fx, fy := float64(x)+0.5, float64(y)+0.5
			switch {
			case math.Hypot(fx-float64(w)/4, fy-float64(h)/2) < float64(h)/5,
				math.Hypot(fx-float64(w)/2, fy-float64(h)/4) < float64(h)/8:
				m.Pix[y*m.Stride+x] = 1
			case x >= 3*w/4 && y >= h/2:
				m.Pix[y*m.Stride+x] = 2
			case x < 3 && y < 3:
				m.Pix[y*m.Stride+x] = manifest.IgnoreID
			}
		}
	}
	return m
}

// fuzzFolderImage is a valid RGB image with some texture.
func fuzzFolderImage(w, h int) *image.RGBA {
	m := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			m.Set(x, y, color.RGBA{uint8(5 * x), uint8(6 * y), uint8(x * y), 255})
		}
	}
	return m
}

func fuzzEncode(tb testing.TB, m image.Image, format string) []byte {
	tb.Helper()
	var buf bytes.Buffer
	var err error
	switch format {
	case "png":
		err = png.Encode(&buf, m)
	case "jpeg":
		err = jpeg.Encode(&buf, m, &jpeg.Options{Quality: 80})
	case "bmp":
		err = bmp.Encode(&buf, m)
	case "tiff":
		err = tiff.Encode(&buf, m, nil)
	case "tiff-deflate":
		err = tiff.Encode(&buf, m, &tiff.Options{Compression: tiff.Deflate, Predictor: true})
	}
	if err != nil {
		tb.Fatal(err)
	}
	return buf.Bytes()
}

// fuzzAddBroken adds b and broken variants of it: truncated halfway, cut
// after the first 33 bytes (a PNG signature and header chunk), and one bit
// flipped in the middle.
func fuzzAddBroken(f *testing.F, b []byte, extra ...any) {
	add := func(v []byte) { f.Add(append([]any{v}, extra...)...) }
	add(b)
	add(b[:len(b)/2])
	if len(b) > 33 {
		add(b[:33])
	}
	flipped := bytes.Clone(b)
	flipped[len(flipped)/2] ^= 0x10
	add(flipped)
}

func fuzzFixtureFiles(tb testing.TB, sub string) [][]byte {
	tb.Helper()
	files, err := filepath.Glob(filepath.Join("../testdata/plain", sub, "*"))
	if err != nil || len(files) == 0 {
		tb.Fatalf("no files under testdata/plain/%s: %v", sub, err)
	}
	var out [][]byte
	for _, p := range files {
		b, err := os.ReadFile(p)
		if err != nil {
			tb.Fatal(err)
		}
		out = append(out, b)
	}
	return out
}

// fuzzFolder is a plain folder in a temporary directory made once per fuzz
// worker (a worker runs its inputs one after another); each input rewrites
// only the files it changes, which keeps an execution at a few milliseconds.
type fuzzFolder struct{ dir string }

func newFuzzFolder(f *testing.F, files map[string][]byte) fuzzFolder {
	ff := fuzzFolder{dir: f.TempDir()}
	for rel, b := range files {
		ff.put(f, rel, b)
	}
	return ff
}

// remove deletes rel if it is there.
func (ff fuzzFolder) remove(tb testing.TB, rel string) {
	tb.Helper()
	if err := os.Remove(filepath.Join(ff.dir, rel)); err != nil && !os.IsNotExist(err) {
		tb.Fatal(err)
	}
}

// put writes b to rel.
func (ff fuzzFolder) put(tb testing.TB, rel string, b []byte) {
	tb.Helper()
	p := filepath.Join(ff.dir, rel)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		tb.Fatal(err)
	}
	if err := os.WriteFile(p, b, 0o644); err != nil {
		tb.Fatal(err)
	}
}

// read reads the folder with ReadFolder, failing when the call allocates
// more than fuzzFolderAllocLimit, when an error does not name bad (the file
// the fuzz input went to), or when an accepted folder does not hold sources
// samples or breaks a promise.
func (ff fuzzFolder) read(t *testing.T, bad string, sources int) {
	t.Helper()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	fo, err := ReadFolder(ff.dir, fuzzFolderBudget)
	runtime.ReadMemStats(&after)
	if n := after.TotalAlloc - before.TotalAlloc; n > fuzzFolderAllocLimit {
		t.Fatalf("ReadFolder allocated %d bytes with a budget of %d pixels (limit %d bytes); error: %v", n, fuzzFolderBudget, fuzzFolderAllocLimit, err)
	}
	if err != nil {
		if fo != nil {
			t.Fatalf("ReadFolder returned a folder and an error: %v", err)
		}
		if p := filepath.Join(ff.dir, bad); !strings.Contains(err.Error(), p) {
			t.Fatalf("error does not name %s: %v", p, err)
		}
		return
	}
	if len(fo.Sources) != sources {
		t.Fatalf("%d sources read, %d in the folder", len(fo.Sources), sources)
	}
	checkFuzzFolder(t, fo)
}

// checkFuzzFolder checks what an accepted folder promises: rasters of one size within the budget, objects inside the frame on
// classes of the table, and targets for every labels.csv column.
func checkFuzzFolder(t *testing.T, fo *Folder) {
	t.Helper()
	classes := map[int]bool{}
	for _, c := range fo.Classes {
		classes[c.ID] = true
	}
	if len(fo.Classes) == 0 || fo.Classes[0].ID != 0 {
		t.Fatalf("class table does not start with background: %+v", fo.Classes)
	}
	for _, s := range fo.Sources {
		w, h := s.Image.W, s.Image.H
		if w < 1 || h < 1 || w*h > fuzzFolderBudget {
			t.Fatalf("%s: image %d×%d outside the budget of %d pixels", s.ID, w, h, fuzzFolderBudget)
		}
		frame := image.Rect(0, 0, w, h)
		if s.Mask.Rect != frame || s.Instances.Rect != frame {
			t.Fatalf("%s: image %v, mask %v, instances %v", s.ID, frame, s.Mask.Rect, s.Instances.Rect)
		}
		if len(s.Image.Pix) != w*h*s.Image.C {
			t.Fatalf("%s: %d floats for %d×%d×%d", s.ID, len(s.Image.Pix), w, h, s.Image.C)
		}
		for _, v := range s.Mask.Pix {
			if v != manifest.IgnoreID && !classes[int(v)] {
				t.Fatalf("%s: mask value %d is not in the class table", s.ID, v)
			}
		}
		stats := manifest.MeasureInstances(s.Instances)
		if len(stats) != len(s.Objects) {
			t.Fatalf("%s: %d instance ids, %d objects", s.ID, len(stats), len(s.Objects))
		}
		for _, o := range s.Objects {
			b := o.Box
			if b[0] < 0 || b[1] < 0 || b[2] > w || b[3] > h || b[0] >= b[2] || b[1] >= b[3] {
				t.Fatalf("%s: object %d: bbox %v outside %d×%d", s.ID, o.Instance, b, w, h)
			}
			if o.Area < 1 || o.Area > (b[2]-b[0])*(b[3]-b[1]) {
				t.Fatalf("%s: object %d: area %d does not fit bbox %v", s.ID, o.Instance, o.Area, b)
			}
			if o.Class == 0 || o.Class == manifest.IgnoreID || !classes[o.Class] {
				t.Fatalf("%s: object %d on class %d", s.ID, o.Instance, o.Class)
			}
		}
		if len(s.Targets) != len(fo.TargetNames) {
			t.Fatalf("%s: %d targets for %d labels.csv columns", s.ID, len(s.Targets), len(fo.TargetNames))
		}
		for _, n := range fo.TargetNames {
			v, ok := s.Targets[n]
			if !ok {
				t.Fatalf("%s: no target %q", s.ID, n)
			}
			if !v.IsStr && (math.IsNaN(v.Num) || math.IsInf(v.Num, 0)) {
				t.Fatalf("%s: target %q is %v", s.ID, n, v.Num)
			}
			if _, err := v.MarshalJSON(); err != nil {
				t.Fatalf("%s: target %q does not encode: %v", s.ID, n, err)
			}
		}
	}
}

// FuzzFolderImage reads any bytes as images/a.png next to a valid mask.
func FuzzFolderImage(f *testing.F) {
	for _, b := range fuzzFixtureFiles(f, "images") {
		fuzzAddBroken(f, b)
	}
	rgb := fuzzFolderImage(fuzzW, fuzzH)
	gray := image.NewGray(rgb.Rect)
	g16 := image.NewGray16(rgb.Rect)
	for i := range gray.Pix {
		gray.Pix[i] = rgb.Pix[4*i]
		g16.Pix[2*i] = rgb.Pix[4*i+1]
	}
	for _, b := range [][]byte{
		fuzzEncode(f, rgb, "png"), fuzzEncode(f, gray, "png"), fuzzEncode(f, g16, "png"),
		fuzzEncode(f, rgb, "jpeg"), fuzzEncode(f, gray, "jpeg"),
		fuzzEncode(f, rgb, "bmp"), fuzzEncode(f, gray, "bmp"),
		fuzzEncode(f, rgb, "tiff"), fuzzEncode(f, gray, "tiff-deflate"),
	} {
		fuzzAddBroken(f, b)
	}
	f.Add([]byte("GIF89a"))
	mask := fuzzEncode(f, fuzzFolderMask(fuzzW, fuzzH), "png")
	ff := newFuzzFolder(f, map[string][]byte{"masks/a.png": mask})
	f.Fuzz(func(t *testing.T, b []byte) {
		ff.put(t, "images/a.png", b)
		ff.read(t, "images/a.png", 1)
	})
}

// FuzzFolderMask reads any bytes as masks/a.png next to a valid image, with
// or without the fixture's classes.json.
func FuzzFolderMask(f *testing.F) {
	for _, b := range fuzzFixtureFiles(f, "masks") {
		fuzzAddBroken(f, b, false)
		f.Add(b, true)
	}
	for _, b := range fuzzFixtureFiles(f, "instances") {
		f.Add(b, false) // 16-bit instance masks are no semantic masks
	}
	gm := fuzzFolderMask(fuzzW, fuzzH)
	pal := &image.Paletted{Pix: gm.Pix, Stride: gm.Stride, Rect: gm.Rect, Palette: manifest.Palette([]manifest.Class{
		{ID: 0}, {ID: 1, Color: [3]uint8{60, 170, 75}}, {ID: 2, Color: [3]uint8{235, 140, 35}}})}
	for _, b := range [][]byte{fuzzEncode(f, gm, "png"), fuzzEncode(f, pal, "png")} {
		fuzzAddBroken(f, b, false)
		f.Add(b, true)
	}
	f.Add(fuzzEncode(f, fuzzFolderImage(fuzzW, fuzzH), "png"), false)
	f.Add(fuzzEncode(f, gm, "tiff"), false)
	img := fuzzEncode(f, fuzzFolderImage(fuzzW, fuzzH), "png")
	classes, err := os.ReadFile("../testdata/plain/classes.json")
	if err != nil {
		f.Fatal(err)
	}
	ff := newFuzzFolder(f, map[string][]byte{"images/a.png": img})
	f.Fuzz(func(t *testing.T, b []byte, withClasses bool) {
		ff.put(t, "masks/a.png", b)
		if withClasses {
			ff.put(t, "classes.json", classes)
		} else {
			ff.remove(t, "classes.json")
		}
		ff.read(t, "masks/a.png", 1)
	})
}

// FuzzLabelsCSV reads any bytes as labels.csv next to two valid samples, a
// and b.
func FuzzLabelsCSV(f *testing.F) {
	real, err := os.ReadFile("../testdata/plain/labels.csv")
	if err != nil {
		f.Fatal(err)
	}
	f.Add(real) // ids of the fixture: refused, they match no image here
	// The fixture's table with its ids renamed to this folder's stems.
	var renamed []string
	for _, line := range strings.SplitAfter(string(real), "\n") {
		switch {
		case strings.HasPrefix(line, "disc-01,"):
			renamed = append(renamed, "a,"+strings.TrimPrefix(line, "disc-01,"))
		case strings.HasPrefix(line, "disc-02,"):
			renamed = append(renamed, "b,"+strings.TrimPrefix(line, "disc-02,"))
		case strings.HasPrefix(line, "disc-"):
		default:
			renamed = append(renamed, line)
		}
	}
	good := strings.Join(renamed, "")
	fuzzAddBroken(f, []byte(good))
	for _, s := range []string{
		"\ufeff" + good,
		strings.ReplaceAll(good, "\n", "\r\n"),
		"id\na\nb\n",
		"n, id ,label\n1.5, a ,\"x, y\"\n-2e3,b,\"q\"\"uote\"\n",
		"id,n\na,NaN\nb,1\n",
		"id,n\na,1\na,2\n",
		"id,id\na,a\n",
		"id,n\na,1\nb\n",
		"x\n",
		"",
	} {
		f.Add([]byte(s))
	}
	img := fuzzEncode(f, fuzzFolderImage(8, 8), "png")
	mask := fuzzEncode(f, fuzzFolderMask(8, 8), "png")
	ff := newFuzzFolder(f, map[string][]byte{
		"images/a.png": img, "masks/a.png": mask,
		"images/b.png": img, "masks/b.png": mask,
	})
	f.Fuzz(func(t *testing.T, b []byte) {
		ff.put(t, "labels.csv", b)
		ff.read(t, "labels.csv", 2)
	})
}
