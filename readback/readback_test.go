package readback

import (
	"archive/zip"
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"

	"github.com/disintegration/imaging"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// npyArray is one array for writeNPZ: C-order data of a shape.
type npyArray struct {
	descr string
	shape []int
	data  []byte
}

// npyHeader writes a version 1.0 .npy header as NumPy's format document
// (NEP 1, "A simple file format for NumPy arrays") specifies: magic, version,
// little-endian header length, a Python dict literal padded with spaces and
// ended by a newline so the data starts on a multiple of 64 bytes.
func npyHeader(descr string, fortran bool, shape []int) []byte {
	dims := make([]string, len(shape))
	for i, d := range shape {
		dims[i] = fmt.Sprint(d)
	}
	tuple := "(" + strings.Join(dims, ", ")
	if len(shape) == 1 {
		tuple += ","
	}
	tuple += ")"
	f := "False"
	if fortran {
		f = "True"
	}
	dict := fmt.Sprintf("{'descr': '%s', 'fortran_order': %s, 'shape': %s, }", descr, f, tuple)
	n := 10 + len(dict) + 1
	pad := (64 - n%64) % 64
	dict += strings.Repeat(" ", pad) + "\n"
	var b bytes.Buffer
	b.WriteString("\x93NUMPY\x01\x00")
	binary.Write(&b, binary.LittleEndian, uint16(len(dict)))
	b.WriteString(dict)
	return b.Bytes()
}

func writeNPZ(t testing.TB, path string, arrays map[string]npyArray) {
	t.Helper()
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for _, name := range sortedKeys(arrays) {
		a := arrays[name]
		// Stored, not deflated: what np.savez (dump_batch's default) writes.
		w, err := zw.CreateHeader(&zip.FileHeader{Name: name + ".npy", Method: zip.Store})
		if err != nil {
			t.Fatal(err)
		}
		w.Write(npyHeader(a.descr, false, a.shape))
		w.Write(a.data)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func f32s(v []float32) []byte {
	b := make([]byte, 4*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(x))
	}
	return b
}

func strArray(ids []string) npyArray {
	n := 0
	for _, s := range ids {
		n = max(n, len([]rune(s)))
	}
	b := make([]byte, 4*n*len(ids))
	for i, s := range ids {
		for j, r := range []rune(s) {
			binary.LittleEndian.PutUint32(b[4*(i*n+j):], uint32(r))
		}
	}
	return npyArray{descr: fmt.Sprintf("<U%d", n), shape: []int{len(ids)}, data: b}
}

var (
	setOnce sync.Map // recipe key -> dataset folder
	setDirs []string
)

// diceSet renders a tabletop-dice set (canvas size×size) once per test
// binary and returns its folder.
func diceSet(t testing.TB, size, count int) string {
	t.Helper()
	key := fmt.Sprint(size, count)
	if d, ok := setOnce.Load(key); ok {
		return d.(string)
	}
	y, err := gen.PresetYAML("tabletop-dice")
	if err != nil {
		t.Fatal(err)
	}
	s := strings.Replace(strings.Replace(string(y), "width: 64", fmt.Sprintf("width: %d", size), 1), "height: 64", fmt.Sprintf("height: %d", size), 1)
	r, err := gen.ParseRecipe("dice.yaml", []byte(s))
	if err != nil {
		t.Fatal(err)
	}
	dir, err := os.MkdirTemp("", "readback-test-")
	if err != nil {
		t.Fatal(err)
	}
	setDirs = append(setDirs, dir)
	out := filepath.Join(dir, "set")
	if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: out, Count: count, Seed: 5}); err != nil {
		t.Fatal(err)
	}
	setOnce.Store(key, out)
	return out
}

func TestMain(m *testing.M) {
	code := m.Run()
	for _, d := range setDirs {
		os.RemoveAll(d)
	}
	os.Exit(code)
}

// truth is n train records of a set with their decoded images and masks.
func truth(t testing.TB, dir string, n int) []*source {
	t.Helper()
	var out []*source
	err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		if r.Split == "train" && len(out) < n {
			s, err := loadSource(dir, r, false)
			if err != nil {
				return err
			}
			out = append(out, s)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// batchOf builds N×C×H×W float32 images (the source / 255 through edit)
// and N×H×W masks (uint8 ids through medit) of the sources.
func batchOf(src []*source, edit func(i, c, x, y int) (int, int, int), medit func(i int, v uint8) float32) map[string]npyArray {
	n, w, h := len(src), src[0].w, src[0].h
	img := make([]float32, n*3*w*h)
	msk := make([]float32, n*w*h)
	var ids []string
	for i, s := range src {
		ids = append(ids, s.rec.ID)
		for c := 0; c < 3; c++ {
			for y := 0; y < h; y++ {
				for x := 0; x < w; x++ {
					sc, sx, sy := c, x, y
					if edit != nil {
						sc, sx, sy = edit(i, c, x, y)
					}
					img[((i*3+c)*h+y)*w+x] = s.ch[sc][sy*w+sx] / 255
				}
			}
		}
		for j, v := range s.mask {
			msk[i*w*h+j] = float32(v)
			if medit != nil {
				msk[i*w*h+j] = medit(i, v)
			}
		}
	}
	return map[string]npyArray{
		"ids":    strArray(ids),
		"images": {descr: "<f4", shape: []int{n, 3, h, w}, data: f32s(img)},
		"masks":  {descr: "<f4", shape: []int{n, h, w}, data: f32s(msk)},
	}
}

func findKind(rep *Report, kind string) *Finding {
	for i := range rep.Findings {
		if rep.Findings[i].Kind == kind {
			return &rep.Findings[i]
		}
	}
	return nil
}

func errorKinds(rep *Report) []string {
	var out []string
	for _, f := range rep.Findings {
		if f.Severity == Error {
			out = append(out, f.Kind+": "+f.Message)
		}
	}
	return out
}

// Planted bugs written from Go (the Python corpus in .ci/python.sh plants
// the rest): each is named, on exactly the samples it was planted in, and
// the unchanged batch gives no error.
func TestPlantedBugs(t *testing.T) {
	dir := diceSet(t, 64, 40)
	src := truth(t, dir, 8)
	idsOf := func(pos ...int) []string {
		var out []string
		for _, p := range pos {
			out = append(out, src[p].rec.ID)
		}
		slices.Sort(out)
		return out
	}
	w := src[0].w
	cases := []struct {
		name   string
		edit   func(i, c, x, y int) (int, int, int)
		medit  func(i int, v uint8) float32
		kind   string
		onPos  []int
		noErrs bool
	}{
		{name: "correct", kind: KindValuesScaled, noErrs: true},
		{name: "image mirrored, mask not", edit: func(i, c, x, y int) (int, int, int) {
			if i%3 == 0 {
				return c, w - 1 - x, y
			}
			return c, x, y
		}, kind: KindGeometryMismatch, onPos: []int{0, 3, 6}},
		{name: "BGR", edit: func(i, c, x, y int) (int, int, int) { return 2 - c, x, y }, kind: KindChannelsSwapped, onPos: []int{0, 1, 2, 3, 4, 5, 6, 7}},
		{name: "mask ids +1", medit: func(i int, v uint8) float32 {
			if i >= 6 {
				return float32(v) + 1
			}
			return float32(v)
		}, kind: KindMaskIDsShifted, onPos: []int{6, 7}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := filepath.Join(t.TempDir(), "b.npz")
			writeNPZ(t, p, batchOf(src, c.edit, c.medit))
			rep, err := Run(dir, p, Options{Split: "train"})
			if err != nil {
				t.Fatal(err)
			}
			f := findKind(rep, c.kind)
			if f == nil {
				t.Fatalf("no %s finding: %+v", c.kind, rep.Findings)
			}
			if c.onPos != nil && !slices.Equal(slices.Sorted(slices.Values(f.Samples)), idsOf(c.onPos...)) {
				t.Errorf("%s on %v, want %v", c.kind, f.Samples, idsOf(c.onPos...))
			}
			if errs := errorKinds(rep); c.noErrs && len(errs) > 0 {
				t.Errorf("a correct batch gave errors: %v", errs)
			}
		})
	}
}

// The eight dihedral maps against github.com/disintegration/imaging's
// flips, turns and transposes (a general-purpose reference library):
// imaging.Rotate90 turns counter-clockwise, Rotate270 clockwise.
func TestDihedralAgainstImaging(t *testing.T) {
	const w0, h0 = 5, 3
	src := image.NewGray(image.Rect(0, 0, w0, h0))
	plane := make([]float32, w0*h0)
	for i := range src.Pix {
		src.Pix[i] = uint8(i * 13)
		plane[i] = float32(src.Pix[i])
	}
	refs := [8]func(image.Image) *image.NRGBA{
		imaging.Clone, imaging.FlipH, imaging.FlipV, imaging.Rotate180,
		imaging.Transpose, imaging.Rotate270, imaging.Rotate90, imaging.Transverse,
	}
	for d, ref := range refs {
		want := ref(src)
		w1, h1 := dSize(d, w0, h0)
		if want.Bounds().Dx() != w1 || want.Bounds().Dy() != h1 {
			t.Fatalf("%s: size %v, imaging gives %v", DihedralNames[d], [2]int{w1, h1}, want.Bounds().Size())
		}
		tr := Transform{D: d, W: w1, H: h1, W0: w0, H0: h0}
		got := make([]float32, w1*h1)
		tr.apply(plane, got)
		for y := 0; y < h1; y++ {
			for x := 0; x < w1; x++ {
				if r := want.NRGBAAt(x, y).R; got[y*w1+x] != float32(r) {
					t.Fatalf("%s at (%d,%d): %v, imaging %v", DihedralNames[d], x, y, got[y*w1+x], r)
				}
			}
		}
	}
}

// Bilinear resampling at pixel centers without antialiasing (PyTorch's
// interpolate with align_corners=False; from memory): [0, 100] to 4 pixels
// samples at −0.25 (clamped to 0), 0.25, 0.75 and 1.25 (clamped to 1):
// 0, 25, 75, 100. Nearest (legacy floor(x·w0/w)) gives 0, 0, 100, 100.
func TestResizeHandWorked(t *testing.T) {
	src := []float32{0, 100}
	for _, c := range []struct {
		interp string
		want   []float32
	}{{"bilinear", []float32{0, 25, 75, 100}}, {"nearest", []float32{0, 0, 100, 100}}, {"nearest-center", []float32{0, 0, 100, 100}}} {
		got := make([]float32, 4)
		Transform{Resize: true, Interp: c.interp, W: 4, H: 1, W0: 2, H0: 1}.apply(src, got)
		if !slices.Equal(got, c.want) {
			t.Errorf("%s: %v, want %v", c.interp, got, c.want)
		}
	}
}

// A shape that could be N×C×H×W or N×H×W×C, with neither matching the
// dataset's size, is refused rather than guessed.
func TestLayoutCannotTell(t *testing.T) {
	a := &Array{Kind: 'f', DType: "<f4", Shape: []int{2, 3, 5, 3}}
	_, err := inferLayout("b.npz", a, 2, map[[2]int]bool{{64, 64}: true})
	var ie *InputError
	if !errors.As(err, &ie) || !strings.Contains(err.Error(), "cannot tell") {
		t.Fatalf("err = %v, want an InputError saying it cannot tell", err)
	}
	l, err := inferLayout("b.npz", a, 2, map[[2]int]bool{{3, 5}: true})
	if err != nil || l.Order != "NCHW" {
		t.Fatalf("with the dataset's 3x5 size: %+v, %v; want NCHW", l, err)
	}
}

// Bounds and refusals of ReadBatch, each checked before memory is
// allocated for the array.
func TestReadBatchRefusals(t *testing.T) {
	dir := t.TempDir()
	write := func(name string, entries func(zw *zip.Writer)) string {
		var buf bytes.Buffer
		zw := zip.NewWriter(&buf)
		entries(zw)
		zw.Close()
		p := filepath.Join(dir, name)
		os.WriteFile(p, buf.Bytes(), 0o644)
		return p
	}
	for _, c := range []struct {
		name, want string
		entries    func(zw *zip.Writer)
	}{
		{"object", "object", func(zw *zip.Writer) {
			w, _ := zw.Create("ids.npy")
			w.Write(npyHeader("|O", false, []int{2}))
			w.Write([]byte("\x80\x02"))
		}},
		{"short", "needs 24 bytes", func(zw *zip.Writer) {
			w, _ := zw.Create("images.npy")
			w.Write(npyHeader("<f4", false, []int{2, 3}))
			w.Write(make([]byte, 8))
		}},
		{"huge-declared", "uncompressed", func(zw *zip.Writer) {
			// The central directory claims 8 GiB; nothing that large is
			// allocated or read.
			h := &zip.FileHeader{Name: "images.npy", Method: zip.Store, UncompressedSize64: 8 << 30, CompressedSize64: 16}
			w, _ := zw.CreateRaw(h)
			w.Write(make([]byte, 16))
		}},
		{"big-header", "header of", func(zw *zip.Writer) {
			w, _ := zw.Create("images.npy")
			b := []byte("\x93NUMPY\x02\x00")
			b = binary.LittleEndian.AppendUint32(b, 1<<30)
			w.Write(b)
		}},
		{"not-npy", "magic", func(zw *zip.Writer) {
			w, _ := zw.Create("images.npy")
			w.Write([]byte("hello, world"))
		}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := ReadBatch(write(c.name+".npz", c.entries))
			var ie *InputError
			if !errors.As(err, &ie) || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("err = %v, want an InputError mentioning %q", err, c.want)
			}
		})
	}
	if _, _, err := ReadBatch(filepath.Join(dir, "none.npz")); err == nil {
		t.Fatal("a missing file was read")
	}
}

// Fortran-order data (NumPy writes it for column-major arrays) is read in
// C order: [[1, 2, 3], [4, 5, 6]] stored column by column as 1 4 2 5 3 6.
func TestFortranOrder(t *testing.T) {
	b := append(npyHeader("<f4", true, []int{2, 3}), f32s([]float32{1, 4, 2, 5, 3, 6})...)
	a, err := parseNPY(b)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a.Num, []float32{1, 2, 3, 4, 5, 6}) {
		t.Fatalf("C order %v, want 1..6", a.Num)
	}
}

// BenchmarkReadback256 reads back a batch of 256 samples of 128×128 RGB
// (float32 N×3×H×W in 0..1, uint8 masks, the dice count) against a
// 320-sample set: reading, every sample's geometry, values, masks, targets
// and the batch checks.
func BenchmarkReadback256(b *testing.B) {
	dir := diceSet(b, 128, 320)
	src := truth(b, dir, 256)
	if len(src) < 256 {
		b.Fatalf("%d train samples", len(src))
	}
	arr := batchOf(src, nil, nil)
	m := arr["masks"]
	u8 := make([]byte, len(m.data)/4)
	for i := range u8 {
		u8[i] = byte(math.Float32frombits(binary.LittleEndian.Uint32(m.data[4*i:])))
	}
	arr["masks"] = npyArray{descr: "|u1", shape: m.shape, data: u8}
	dice := make([]float32, len(src))
	for i, s := range src {
		dice[i] = float32(s.rec.Targets["dice"].Num)
	}
	arr["dice"] = npyArray{descr: "<f4", shape: []int{len(src)}, data: f32s(dice)}
	p := filepath.Join(b.TempDir(), "batch.npz")
	writeNPZ(b, p, arr)
	b.ResetTimer()
	for b.Loop() {
		rep, err := Run(dir, p, Options{Split: "train"})
		if err != nil {
			b.Fatal(err)
		}
		if rep.Errors > 0 {
			b.Fatalf("errors: %v", errorKinds(rep))
		}
	}
}
