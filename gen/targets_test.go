package gen

import (
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"golang.org/x/image/font/gofont/goregular"
)

// The bin-label reading is the label's characters left to right: checked here
// against the objects' own centers, not through the planner's reading order.
func TestReadingIsLeftToRight(t *testing.T) {
	r, err := Preset("bin-labels")
	if err != nil {
		t.Fatal(err)
	}
	rd := NewRenderer(r)
	for i := 0; i < 200; i++ {
		s, err := rd.Generate(3, i)
		if err != nil {
			t.Fatal(err)
		}
		type g struct {
			x float64
			c string
		}
		var gs []g
		for _, o := range s.Record.Objects {
			if o.ClassName == "character" {
				gs = append(gs, g{o.Center[0], o.Glyph})
			}
		}
		sort.Slice(gs, func(a, b int) bool { return gs[a].x < gs[b].x })
		var want strings.Builder
		for _, x := range gs {
			want.WriteString(x.c)
		}
		got := s.Record.Targets["code"]
		if !got.IsStr || got.Str != want.String() {
			t.Fatalf("sample %d: code %v, characters left to right %q", i, got, want.String())
		}
		if n := s.Record.Targets["length"].Num; int(n) != len(gs) || n < 3 || n > 6 {
			t.Fatalf("sample %d: length %v for %d characters (preset asks 3-6)", i, n, len(gs))
		}
	}
}

// A die's value is its number of pips, and pip_total their sum: checked from
// the parent relation of the pip instances.
func TestPipTotalFromParents(t *testing.T) {
	r, err := Preset("tabletop-dice")
	if err != nil {
		t.Fatal(err)
	}
	rd := NewRenderer(r)
	for i := 0; i < 200; i++ {
		s, err := rd.Generate(3, i)
		if err != nil {
			t.Fatal(err)
		}
		pips := map[int]int{}
		total := 0
		for _, o := range s.Record.Objects {
			if o.ClassName == "pip" {
				if o.Parent == 0 {
					t.Fatalf("sample %d: pip %d has no parent", i, o.Instance)
				}
				pips[o.Parent]++
				total++
			}
		}
		for _, o := range s.Record.Objects {
			if o.ClassName == "die" {
				if o.Value == nil || int(*o.Value) != pips[o.Instance] || pips[o.Instance] < 1 || pips[o.Instance] > 6 {
					t.Fatalf("sample %d: die %d value %v, pips %d", i, o.Instance, o.Value, pips[o.Instance])
				}
			}
		}
		if int(s.Record.Targets["pip_total"].Num) != total {
			t.Fatalf("sample %d: pip_total %v, pips %d", i, s.Record.Targets["pip_total"], total)
		}
	}
}

// Glyphs from a user's font file, resolved relative to the recipe, and a
// number target reading digits.
func TestUserFontFileAndNumberTarget(t *testing.T) {
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "my.ttf"), goregular.TTF, 0o644); err != nil {
		t.Fatal(err)
	}
	recipe := `name: meter
canvas: {width: 96, height: 32}
background: {kind: solid, intensity: 0}
classes:
  - {name: digit, color: [255, 0, 0]}
layers:
  - layout: {kind: row, spacing: [1, 2]}
    objects:
      - class: digit
        glyph: {file: my.ttf, chars: "0123456789"}
        count: 4
        size: 20
        value: digit
targets:
  - {name: reading, kind: number}
  - {name: digits, kind: sum, of: value}
`
	p := filepath.Join(dir, "meter.yaml")
	if err := os.WriteFile(p, []byte(recipe), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := LoadRecipe(p)
	if err != nil {
		t.Fatal(err)
	}
	rd := NewRenderer(r)
	for i := 0; i < 50; i++ {
		s, err := rd.Generate(1, i)
		if err != nil {
			t.Fatal(err)
		}
		n, sum := 0, 0
		for _, o := range s.Record.Objects {
			d := int(o.Glyph[0] - '0')
			n = n*10 + d
			sum += d
			if o.Font != "my.ttf" || int(*o.Value) != d {
				t.Fatalf("sample %d: object %+v", i, o)
			}
		}
		if int(s.Record.Targets["reading"].Num) != n || int(s.Record.Targets["digits"].Num) != sum {
			t.Fatalf("sample %d: targets %v, digits read %d sum %d", i, s.Record.Targets, n, sum)
		}
	}
}
