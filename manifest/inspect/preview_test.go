package inspect

import (
	"fmt"
	"image"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"golang.org/x/image/font"

	"github.com/trueset/trueset/manifest"
)

// captionSet writes a one-split dataset of n 16×16 gray samples whose
// records carry the given targets (invented fixture data).
func captionSet(t *testing.T, n int, targets map[string]manifest.Value) string {
	t.Helper()
	dir := t.TempDir()
	classes := []manifest.Class{{ID: 0, Name: "background"}, {ID: 1, Name: "thing", Color: [3]uint8{230, 25, 75}}}
	var names []string
	for k := range targets {
		names = append(names, k)
	}
	var lines []byte
	for i := 0; i < n; i++ {
		id := manifest.SampleID(i)
		img := image.NewGray(image.Rect(0, 0, 16, 16))
		for p := range img.Pix {
			img.Pix[p] = uint8(p * 3)
		}
		rec := &manifest.Record{ID: id, Index: i, Split: "train", Group: id, Stratum: "all", Width: 16, Height: 16,
			Image: "images/" + id + ".png", Mask: "masks/" + id + ".png", Instances: "instances/" + id + ".png", Targets: targets}
		writePNG(t, filepath.Join(dir, rec.Image), img)
		writePNG(t, filepath.Join(dir, rec.Mask), image.NewPaletted(img.Rect, manifest.Palette(classes)))
		writePNG(t, filepath.Join(dir, rec.Instances), image.NewGray16(img.Rect))
		b, err := manifest.MarshalRecord(rec)
		if err != nil {
			t.Fatal(err)
		}
		lines = append(append(lines, b...), '\n')
	}
	d := &manifest.Dataset{Format: manifest.Format, Count: n, Width: 16, Height: 16, Mode: "gray", Classes: classes,
		Targets: names, Splits: manifest.SplitTable{Names: []string{"train"}, Counts: map[string]int{"train": n}}}
	db, _ := manifest.MarshalDataset(d)
	if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), db, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.ManifestFile), lines, 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

// A caption longer than two lines wraps onto more, nothing cut off: every
// name=value appears whole in the wrapped lines (a value wider than the
// cell is broken between characters, and its pieces join back to it), no
// line is wider than the cell, no "…" is drawn, and the cells grow to hold
// the lines.
func TestPreviewCaptionsWrap(t *testing.T) {
	long := strings.Repeat("ABCDEFGHIJ", 6) // 60 capitals: wider than a 192-pixel cell
	targets := map[string]manifest.Value{"reading": manifest.Text(long)}
	for i := range 10 {
		targets[fmt.Sprintf("count_of_part_%02d", i)] = manifest.Number(float64(100 + i))
	}
	short := captionSet(t, 4, map[string]manifest.Value{"n": manifest.Number(1)})
	dir := captionSet(t, 4, targets)

	base, err := Preview(short, PreviewOptions{Split: "train", Count: 4})
	if err != nil {
		t.Fatal(err)
	}
	s, err := Preview(dir, PreviewOptions{Split: "train", Count: 4})
	if err != nil {
		t.Fatal(err)
	}
	if s.Cell.X != 192 {
		t.Fatalf("cell %v, want 192 wide (16 px × 12)", s.Cell)
	}
	face, err := previewFace()
	if err != nil {
		t.Fatal(err)
	}
	defer face.Close()
	if len(s.Captions) != 4 {
		t.Fatalf("%d captions, want 4", len(s.Captions))
	}
	for i, c := range s.Captions {
		if len(c) <= captionLines {
			t.Errorf("caption %d has %d lines; 11 long targets need more than %d: %q", i, len(c), captionLines, c)
		}
		joined := strings.Join(c, " ")
		for name, v := range targets {
			if name == "reading" {
				continue
			}
			if want := name + "=" + v.String(); !strings.Contains(joined, want) {
				t.Errorf("caption %d lacks %q whole: %q", i, want, c)
			}
		}
		if !strings.Contains(strings.Join(c, ""), "reading="+long) {
			t.Errorf("caption %d does not hold the long value in full: %q", i, c)
		}
		if !strings.HasPrefix(c[0], s.IDs[i]) {
			t.Errorf("caption %d starts %q, not with its id %s", i, c[0], s.IDs[i])
		}
		for _, l := range c {
			if w := font.MeasureString(face, l).Ceil(); w > s.Cell.X {
				t.Errorf("caption line %q is %d px, wider than the %d px cell", l, w, s.Cell.X)
			}
			if strings.Contains(l, "…") {
				t.Errorf("caption line %q is cut", l)
			}
		}
	}
	// Same grid for both sheets; the one with long captions is taller by
	// the extra caption lines of each row.
	extra := len(s.Captions[0]) - captionLines
	if s.Rows != base.Rows || s.Cols != base.Cols {
		t.Fatalf("grids %dx%d and %dx%d differ", s.Cols, s.Rows, base.Cols, base.Rows)
	}
	if got, want := s.Image.Bounds().Dy()-base.Image.Bounds().Dy(), s.Rows*extra*lineHeight; got != want {
		t.Errorf("sheet %d px taller, want %d: %d rows × %d extra lines × %d px", got, want, s.Rows, extra, lineHeight)
	}
}

// wrapWords on its own: words kept whole where they fit, two spaces after
// the id, one word wider than the width broken into pieces that fit.
func TestPreviewWrapWords(t *testing.T) {
	face, err := previewFace()
	if err != nil {
		t.Fatal(err)
	}
	defer face.Close()
	if got := wrapWords(face, []string{"000001", "a=1", "b=2"}, 400, "  "); len(got) != 1 || got[0] != "000001  a=1 b=2" {
		t.Errorf("short caption: %q", got)
	}
	word := strings.Repeat("W", 40)
	got := wrapWords(face, []string{"id", word}, 100, "  ")
	if strings.Join(got[1:], "") != word || len(got) < 3 {
		t.Errorf("long word: %q", got)
	}
	for _, l := range got {
		if font.MeasureString(face, l).Ceil() > 100 {
			t.Errorf("line %q wider than 100 px", l)
		}
	}
	if got := wrapWords(face, []string{"x"}, 1, "  "); len(got) != 1 || got[0] != "x" {
		t.Errorf("a glyph wider than the line: %q", got)
	}
}
