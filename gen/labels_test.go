package gen

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"image"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// The checks in this file hold the generator's labels against an outside
// reference: every PNG is decoded by the standard library's image/png (an
// implementation of ISO/IEC 15948, not written by this project), every
// checksum is recomputed by crypto/sha256 (FIPS 180-4), and every box, area
// and count is recomputed here from the decoded pixels, without calling the
// project's own manifest.MeasureInstances.

// labelsCount is the number of samples per preset the issue asks for.
const labelsCount = 1000

// aliasedCount is the number of samples per preset for the antialias-off
// tone check.
const aliasedCount = 300

// instStat is one instance's box ([x0, y0, x1, y1], x1/y1 exclusive, the
// DESIGN.md pixel convention) and pixel count, recomputed by the test.
type instStat struct {
	bbox  [4]int
	area  int
	class int // semantic class under the instance's first pixel (-1 = none yet)
}

// measureGray16 recomputes, from a decoded 16-bit instance mask, the area and
// box of every instance id present (id 0 = none). Pixel (x, y) covers
// [x, x+1) × [y, y+1), so a single pixel has box [x, y, x+1, y+1].
func measureGray16(m *image.Gray16) map[int]*instStat {
	out := map[int]*instStat{}
	b := m.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			id := int(m.Gray16At(x, y).Y)
			if id == 0 {
				continue
			}
			s, ok := out[id]
			if !ok {
				s = &instStat{bbox: [4]int{x, y, x + 1, y + 1}, class: -1}
				out[id] = s
			}
			s.area++
			s.bbox[0] = min(s.bbox[0], x)
			s.bbox[1] = min(s.bbox[1], y)
			s.bbox[2] = max(s.bbox[2], x+1)
			s.bbox[3] = max(s.bbox[3], y+1)
		}
	}
	return out
}

// labelsReadPNG reads a dataset file and decodes it with the standard library's
// image/png (ISO/IEC 15948).
func labelsReadPNG(t *testing.T, dir, rel string) ([]byte, image.Image) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, rel))
	if err != nil {
		t.Fatal(err)
	}
	m, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: image/png cannot decode it: %v", rel, err)
	}
	return b, m
}

// labelsClassIDs maps class names to ids as the recipe declares them: list
// order from 1, id 0 being background (ClassSpec's documented rule).
func labelsClassIDs(r *Recipe) map[string]int {
	ids := map[string]int{}
	for i, c := range r.Classes {
		ids[c.Name] = i + 1
	}
	return ids
}

// labelsGenerate runs gen.Run with two workers into a fresh folder.
func labelsGenerate(t *testing.T, r *Recipe, n int) string {
	t.Helper()
	dir := t.TempDir()
	if _, err := Run(context.Background(), RunOptions{Recipe: r, Out: dir, Count: n, Seed: 20240611, Workers: 2, Version: "test"}); err != nil {
		t.Fatal(err)
	}
	return dir
}

// labelsFiles is one record's decoded files.
type labelsFiles struct {
	img  image.Image
	mask *image.Paletted
	inst *image.Gray16
}

// labelsDecodeSample decodes a record's three PNGs and checks their checksums and
// pixel formats.
func labelsDecodeSample(t *testing.T, dir string, rec *manifest.Record, mode string) labelsFiles {
	t.Helper()
	var sf labelsFiles
	for _, f := range []struct{ key, rel string }{{"image", rec.Image}, {"mask", rec.Mask}, {"instances", rec.Instances}} {
		b, m := labelsReadPNG(t, dir, f.rel)
		// (f) Checksum: SHA-256 of the file bytes by crypto/sha256 (FIPS 180-4).
		sum := sha256.Sum256(b)
		if got := hex.EncodeToString(sum[:]); rec.SHA256[f.key] != got {
			t.Errorf("%s %s: record sha256 %q, crypto/sha256 of the file gives %q", rec.ID, f.key, rec.SHA256[f.key], got)
		}
		if m.Bounds() != image.Rect(0, 0, rec.Width, rec.Height) {
			t.Fatalf("%s %s: decoded bounds %v, record says %dx%d", rec.ID, f.key, m.Bounds(), rec.Width, rec.Height)
		}
		switch f.key {
		case "image":
			// DESIGN.md: images are 8-bit gray or RGB; image/png decodes
			// color type 0 depth 8 as *image.Gray and color type 2 depth 8
			// as *image.RGBA.
			switch m.(type) {
			case *image.Gray:
				if mode != "gray" {
					t.Fatalf("%s: gray image in a %s recipe", rec.ID, mode)
				}
			case *image.RGBA:
				if mode != "rgb" {
					t.Fatalf("%s: RGB image in a %s recipe", rec.ID, mode)
				}
			default:
				t.Fatalf("%s: image decodes as %T, want 8-bit gray or RGB", rec.ID, m)
			}
			sf.img = m
		case "mask":
			// (e) PNG color type 3 (indexed) decodes as *image.Paletted.
			p, ok := m.(*image.Paletted)
			if !ok {
				t.Fatalf("%s: mask decodes as %T, want an indexed (paletted) PNG", rec.ID, m)
			}
			sf.mask = p
		case "instances":
			// PNG color type 0 depth 16 decodes as *image.Gray16.
			g, ok := m.(*image.Gray16)
			if !ok {
				t.Fatalf("%s: instance mask decodes as %T, want 16-bit gray", rec.ID, m)
			}
			sf.inst = g
		}
	}
	return sf
}

// labelsCheckPalette is check (e): the decoded PLTE chunk (ISO/IEC 15948 §11.2.3,
// decoded by image/png) holds the class table colors, entry i being class
// i's color (background black), as given by the recipe and by dataset.json.
func labelsCheckPalette(t *testing.T, id string, pal color.Palette, r *Recipe, ds *manifest.Dataset) {
	t.Helper()
	want := []color.RGBA{{0, 0, 0, 255}}
	for _, c := range r.Classes {
		want = append(want, color.RGBA{uint8(c.Color[0]), uint8(c.Color[1]), uint8(c.Color[2]), 255})
	}
	// Entry i is class i's color for every class in the table; a palette
	// may be padded beyond the table (e.g. to 256 entries so the PNG is
	// 8-bit), and (d) shows no mask pixel uses a padding entry.
	if len(pal) < len(want) {
		t.Fatalf("%s: mask palette has %d entries, the class table %d", id, len(pal), len(want))
	}
	for i, c := range pal[:len(want)] {
		r1, g1, b1, a1 := c.RGBA()
		r2, g2, b2, a2 := want[i].RGBA()
		if r1 != r2 || g1 != g2 || b1 != b2 || a1 != a2 {
			t.Fatalf("%s: palette entry %d is %v, class color is %v", id, i, c, want[i])
		}
	}
	if len(ds.Classes) != len(want) {
		t.Fatalf("dataset.json lists %d classes, the recipe %d (with background)", len(ds.Classes), len(want))
	}
	for i, c := range ds.Classes {
		w := want[i]
		if c.ID != i || c.Color != [3]uint8{w.R, w.G, w.B} {
			t.Fatalf("dataset.json class %d = %+v, want id %d color %v", i, c, i, w)
		}
	}
}

// labelsCheck runs checks (a)–(f) on every record of a generated dataset.
func labelsCheck(t *testing.T, r *Recipe, dir string, n int) {
	ds, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	classIDs := labelsClassIDs(r)
	seen := 0
	err = manifest.ReadManifest(dir, func(rec *manifest.Record) error {
		if rec.Index != seen {
			t.Fatalf("record %d has index %d", seen, rec.Index)
		}
		seen++
		sf := labelsDecodeSample(t, dir, rec, r.Canvas.Mode)
		labelsCheckPalette(t, rec.ID, sf.mask.Palette, r, ds)

		stats := measureGray16(sf.inst)
		objs := map[int]*manifest.Object{}
		for i := range rec.Objects {
			o := &rec.Objects[i]
			if objs[o.Instance] != nil {
				t.Errorf("%s: instance %d listed twice", rec.ID, o.Instance)
			}
			objs[o.Instance] = o
			if classIDs[o.ClassName] != o.Class {
				t.Errorf("%s: instance %d: class %d named %q, the recipe gives %q id %d", rec.ID, o.Instance, o.Class, o.ClassName, o.ClassName, classIDs[o.ClassName])
			}
		}

		// (d) Every pixel's class in the mask equals its instance's class in
		// the record; instance 0 pixels are background (class 0). Source:
		// both PNGs decoded by the standard library's image/png (ISO/IEC
		// 15948); the palette index is the class id (DESIGN.md).
		W, H := rec.Width, rec.Height
		bad := 0
		for y := 0; y < H; y++ {
			for x := 0; x < W; x++ {
				id := int(sf.inst.Gray16At(x, y).Y)
				cls := int(sf.mask.ColorIndexAt(x, y))
				want := 0
				if id != 0 {
					if o := objs[id]; o != nil {
						want = o.Class
					}
					if s := stats[id]; s.class < 0 {
						s.class = cls
					}
				}
				if cls > len(r.Classes) && bad < 5 {
					bad++
					t.Errorf("%s: pixel (%d,%d) has mask value %d, beyond the %d classes", rec.ID, x, y, cls, len(r.Classes))
				}
				if cls != want && bad < 5 {
					bad++
					t.Errorf("%s: pixel (%d,%d) has class %d in the mask but instance %d has class %d", rec.ID, x, y, cls, id, want)
				}
			}
		}

		// (a) The instance ids present in the instance PNG are exactly the
		// record's objects' instance ids. Source: the 16-bit gray PNG
		// decoded by the standard library's image/png (ISO/IEC 15948).
		var present, listed []int
		for id := range stats {
			present = append(present, id)
		}
		for id := range objs {
			listed = append(listed, id)
		}
		sort.Ints(present)
		sort.Ints(listed)
		if !labelsEqualInts(present, listed) {
			t.Errorf("%s: instance ids in the PNG %v, in the record %v", rec.ID, present, listed)
		}

		// (b) Each object's bbox and area, recomputed here (measureGray16)
		// from the instance PNG decoded by the standard library's image/png
		// (ISO/IEC 15948), equal the record's; boxes follow DESIGN.md's
		// [x0, y0, x1, y1] with x1/y1 exclusive.
		for id, o := range objs {
			s := stats[id]
			if s == nil {
				continue // reported by (a)
			}
			if o.Box != s.bbox || o.Area != s.area {
				t.Errorf("%s: instance %d: record bbox %v area %d, decoded PNG gives bbox %v area %d", rec.ID, id, o.Box, o.Area, s.bbox, s.area)
			}
		}

		// (c) Every count target equals the number of distinct instance ids
		// of its classes (all classes when none are named) present in the
		// instance PNG, each id's class read from the mask PNG; both decoded
		// by the standard library's image/png (ISO/IEC 15948).
		for _, tg := range r.Targets {
			if tg.Kind != "count" {
				continue
			}
			want := map[int]bool{}
			for _, c := range tg.Classes {
				want[classIDs[c]] = true
			}
			cnt := 0
			for _, s := range stats {
				if len(tg.Classes) == 0 || want[s.class] {
					cnt++
				}
			}
			v, ok := rec.Targets[tg.Name]
			if !ok || v.IsStr || v.Num != float64(cnt) {
				t.Errorf("%s: count target %s = %v, the decoded PNGs hold %d instances of classes %v", rec.ID, tg.Name, v, cnt, tg.Classes)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if seen != n {
		t.Fatalf("manifest holds %d records, want %d", seen, n)
	}
}

func labelsEqualInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// TestLabelsPresets generates 1000 samples of every preset and checks every
// label against the decoded files.
func TestLabelsPresets(t *testing.T) {
	n := labelsCount
	if testing.Short() {
		n = 100
	}
	for _, name := range PresetNames() {
		t.Run(name, func(t *testing.T) {
			r, err := Preset(name)
			if err != nil {
				t.Fatal(err)
			}
			dir := labelsGenerate(t, r, n)
			labelsCheck(t, r, dir, n)
		})
	}
}

// TestLabelsAliasedTones turns antialiasing off in every preset and checks
// that every pixel of every instance carries exactly its object's recorded
// intensity (gray) or color (rgb): with antialiasing off an object is
// painted with its full tone wherever its mask is (coverage ≥ 0.5) and
// nowhere else, so the image and the masks must agree pixel for pixel.
func TestLabelsAliasedTones(t *testing.T) {
	n := aliasedCount
	if testing.Short() {
		n = 50
	}
	for _, name := range PresetNames() {
		t.Run(name, func(t *testing.T) {
			src, err := PresetYAML(name)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Contains(src, []byte("antialias: true")) {
				t.Fatalf("preset %s does not say \"antialias: true\"", name)
			}
			text := strings.Replace(string(src), "antialias: true", "antialias: false", 1)
			r, err := ParseRecipe("aliased:"+name, []byte(text))
			if err != nil {
				t.Fatal(err)
			}
			if *r.Canvas.Antialias {
				t.Fatal("antialias is still on")
			}
			dir := labelsGenerate(t, r, n)
			checked := 0
			err = manifest.ReadManifest(dir, func(rec *manifest.Record) error {
				sf := labelsDecodeSample(t, dir, rec, r.Canvas.Mode)
				tone := map[int][3]uint8{}
				for _, o := range rec.Objects {
					switch {
					case o.Color != nil:
						tone[o.Instance] = *o.Color
					case o.Intensity != nil:
						v := uint8(*o.Intensity)
						if float64(v) != *o.Intensity {
							t.Fatalf("%s: instance %d: intensity %v is not a whole 8-bit value", rec.ID, o.Instance, *o.Intensity)
						}
						tone[o.Instance] = [3]uint8{v, v, v}
					default:
						t.Fatalf("%s: instance %d has neither intensity nor color", rec.ID, o.Instance)
					}
				}
				// Source: image and instance PNGs decoded by the standard
				// library's image/png (ISO/IEC 15948); tones from the record.
				bad := 0
				for y := 0; y < rec.Height; y++ {
					for x := 0; x < rec.Width; x++ {
						id := int(sf.inst.Gray16At(x, y).Y)
						if id == 0 {
							continue
						}
						want, ok := tone[id]
						if !ok {
							t.Fatalf("%s: instance %d in the PNG but not in the record", rec.ID, id)
						}
						var got [3]uint8
						switch m := sf.img.(type) {
						case *image.Gray:
							v := m.GrayAt(x, y).Y
							got = [3]uint8{v, v, v}
						case *image.RGBA:
							c := m.RGBAAt(x, y)
							got = [3]uint8{c.R, c.G, c.B}
						}
						if got != want && bad < 5 {
							bad++
							t.Errorf("%s: pixel (%d,%d) of instance %d is %v, the record's tone is %v", rec.ID, x, y, id, got, want)
						}
						checked++
					}
				}
				return nil
			})
			if err != nil {
				t.Fatal(err)
			}
			if checked == 0 {
				t.Fatal("no instance pixels checked")
			}
		})
	}
}
