package main

import (
	"bytes"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"

	"github.com/trueset/trueset/gen"
)

// A contact sheet per preset: a PNG (decoded with the standard library's
// image/png) of the size the layout gives, whose legend row shows each
// class color as a solid swatch; the same seed gives the same bytes,
// another seed other samples; nothing but the sheet is left in the folder
// (the write is atomic).
func TestPreviewSheets(t *testing.T) {
	// Layout: margin 10, gap 10, title 23, caption 4 + 2×15, legend rows 19.
	// Set TRUESET_KEEP_SHEETS=DIR to keep the sheets for a look.
	// 64×64 images: scale 3 → 192×192 cells, 4 columns × 4 rows:
	//   width 10 + 4·192 + 3·10 + 10 = 818,
	//   height 10 + 23 + 4·(192 + 34) + 3·10 + 10 + 19 + 10 = 1006.
	// bin-labels 128×48: scale round(192/128) = 2 → 256×96 cells; the square
	// grid would have 2.9 columns, 4 leave no empty cell, so 4 × 4:
	//   width 10 + 4·256 + 3·10 + 10 = 1074,
	//   height 10 + 23 + 4·(96 + 34) + 3·10 + 10 + 19 + 10 = 622.
	for _, c := range []struct {
		preset string
		w, h   int
	}{{gen.DefaultPreset, 818, 1006}, {"tabletop-dice", 818, 1006}, {"bin-labels", 1074, 622}} {
		t.Run(c.preset, func(t *testing.T) {
			dir := statsGenerate(t, c.preset, 60)
			outDir := t.TempDir()
			sheet := filepath.Join(outDir, "sheet.png")
			stdout, _ := wantCode(t, exitOK, "preview", dir, "--out", sheet)
			t.Log(stdout)
			b, err := os.ReadFile(sheet)
			if err != nil {
				t.Fatal(err)
			}
			m, err := png.Decode(bytes.NewReader(b))
			if err != nil {
				t.Fatal(err)
			}
			if got := m.Bounds().Size(); got != image.Pt(c.w, c.h) {
				t.Errorf("sheet is %v, want %dx%d", got, c.w, c.h)
			}
			// The legend is the last row band above the bottom margin.
			legend := image.Rect(0, c.h-10-19, c.w, c.h-10)
			d := readDataset(t, dir)
			for _, cl := range d.Classes {
				if cl.ID == 0 {
					continue // background is not tinted and has no swatch
				}
				want := color.RGBA{cl.Color[0], cl.Color[1], cl.Color[2], 255}
				if n := countColor(m, legend, want); n < 12*12 {
					t.Errorf("legend has %d pixels of class %s's color %v, want a 12×12 swatch", n, cl.Name, want)
				}
			}
			if es, _ := os.ReadDir(outDir); len(es) != 1 {
				t.Errorf("the output folder holds %d entries, want only the sheet", len(es))
			}
			again := filepath.Join(outDir, "again.png")
			wantCode(t, exitOK, "preview", dir, "--out", again, "-q")
			if b2, _ := os.ReadFile(again); !bytes.Equal(b, b2) {
				t.Errorf("the same flags drew a different sheet")
			}
			other := filepath.Join(outDir, "other.png")
			wantCode(t, exitOK, "preview", dir, "--out", other, "--seed", "2", "-q")
			if b3, _ := os.ReadFile(other); bytes.Equal(b, b3) {
				t.Errorf("--seed 2 drew the same sheet as --seed 1")
			}
			if os.Getenv("TRUESET_KEEP_SHEETS") != "" {
				_ = os.WriteFile(filepath.Join(os.Getenv("TRUESET_KEEP_SHEETS"), c.preset+".png"), b, 0o644)
			}
		})
	}
}

func countColor(m image.Image, r image.Rectangle, want color.RGBA) int {
	n := 0
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			if color.RGBAModel.Convert(m.At(x, y)).(color.RGBA) == want {
				n++
			}
		}
	}
	return n
}

// Bad flags are usage errors; a split with fewer samples than --count shows
// them all; --split all draws from every split.
func TestPreviewUsageAndSmallSplits(t *testing.T) {
	dir := statsGenerate(t, gen.DefaultPreset, 30)
	out := filepath.Join(t.TempDir(), "s.png")
	wantCode(t, exitUsage, "preview", dir)
	wantCode(t, exitUsage, "preview", dir, "--out", out, "--count", "0")
	wantCode(t, exitUsage, "preview", dir, "--out", out, "--split", "nope")
	wantCode(t, exitUsage, "preview", "--out", out)
	wantCode(t, exitFailure, "preview", t.TempDir(), "--out", out)
	stdout, _ := wantCode(t, exitOK, "preview", dir, "--out", out, "--split", "test")
	if !bytes.Contains([]byte(stdout), []byte("3 of 3 samples")) {
		t.Errorf("test split of 30 samples: %q", stdout)
	}
	stdout, _ = wantCode(t, exitOK, "preview", dir, "--out", out, "--split", "all", "--count", "9")
	if !bytes.Contains([]byte(stdout), []byte("9 of 30 samples (3×3 grid")) {
		t.Errorf("all splits: %q", stdout)
	}
}

// The sheet's format follows --out: a JPEG for .jpg and .jpeg (any case;
// decoded with the standard library's image/jpeg, and starting with the
// JPEG SOI marker FF D8), a PNG for .png (PNG signature, ISO/IEC 15948);
// any other extension, or none, is a usage error (exit 2) naming it, and
// nothing is written.
func TestPreviewFormatByExtension(t *testing.T) {
	dir := statsGenerate(t, gen.DefaultPreset, 20)
	out := t.TempDir()
	for _, name := range []string{"s.jpg", "s.jpeg", "S.JPG"} {
		p := filepath.Join(out, name)
		wantCode(t, exitOK, "preview", dir, "--out", p, "-q")
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.HasPrefix(b, []byte{0xFF, 0xD8}) {
			t.Errorf("%s starts % x, not a JPEG", name, b[:8])
		}
		if _, err := jpeg.Decode(bytes.NewReader(b)); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	}
	p := filepath.Join(out, "s.png")
	wantCode(t, exitOK, "preview", dir, "--out", p, "-q")
	if b, _ := os.ReadFile(p); !bytes.HasPrefix(b, []byte("\x89PNG\r\n\x1a\n")) {
		t.Errorf("s.png is not a PNG")
	}
	for _, c := range []struct{ name, named string }{{"s.gif", ".gif"}, {"s.webp", ".webp"}, {"sheet", "no extension"}} {
		p := filepath.Join(out, c.name)
		_, stderr := wantCode(t, exitUsage, "preview", dir, "--out", p)
		if !strings.Contains(stderr, c.named) {
			t.Errorf("--out %s: stderr %q does not name %s", c.name, stderr, c.named)
		}
		if _, err := os.Stat(p); err == nil {
			t.Errorf("--out %s was written", c.name)
		}
	}
}

// trubetskoy2017 is Sasha Trubetskoy's "List of 20 Simple, Distinct Colors"
// (2017 version), from memory: red, green, yellow, blue, orange, purple,
// cyan, magenta, lime, pink, teal, lavender, brown, beige, maroon, mint,
// olive, apricot (coral in some copies), navy, gray (white and black end
// the list).
var trubetskoy2017 = [][3]int{{230, 25, 75}, {60, 180, 75}, {255, 225, 25}, {0, 130, 200}, {245, 130, 48},
	{145, 30, 180}, {70, 240, 240}, {240, 50, 230}, {210, 245, 60}, {250, 190, 190}, {0, 128, 128},
	{230, 190, 255}, {170, 110, 40}, {255, 250, 200}, {128, 0, 0}, {170, 255, 195}, {128, 128, 0},
	{255, 215, 180}, {0, 0, 128}, {128, 128, 128}, {255, 255, 255}, {0, 0, 0}}

// The preset class colors the sheets' legends show: a preset whose colors
// all come from the 20-color list credits it beside them (author, title,
// year, and that the values are from memory); one with colors of its own
// says so.
func TestPreviewPresetColorsCredited(t *testing.T) {
	files, _ := filepath.Glob(filepath.Join("..", "..", "gen", "presets", "*.yaml"))
	if len(files) == 0 {
		t.Fatal("no preset files")
	}
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		var r struct {
			Classes []struct {
				Name  string `yaml:"name"`
				Color [3]int `yaml:"color"`
			} `yaml:"classes"`
		}
		if err := yaml.Unmarshal(b, &r); err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		fromList := len(r.Classes) > 0
		for _, c := range r.Classes {
			if !slices.Contains(trubetskoy2017, c.Color) {
				fromList = false
			}
		}
		// The comment lines right above "classes:".
		lines := strings.Split(string(b), "\n")
		at := slices.Index(lines, "classes:")
		top := at
		for top > 0 && strings.HasPrefix(lines[top-1], "#") {
			top--
		}
		comment := strings.Join(lines[max(top, 0):max(at, 0)], "\n")
		if fromList {
			for _, want := range []string{"Sasha Trubetskoy", `"List of 20 Simple, Distinct Colors"`, "2017", "from memory"} {
				if !strings.Contains(strings.Join(strings.Fields(comment), " "), want) {
					t.Errorf("%s: colors from the 20-color list, but the comment before classes lacks %q", filepath.Base(f), want)
				}
			}
		} else if !strings.Contains(comment, "our own") {
			t.Errorf("%s: colors not from the list, and the comment does not say they are our own", filepath.Base(f))
		}
	}
}
