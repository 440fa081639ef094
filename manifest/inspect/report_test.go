package inspect

import (
	"bytes"
	"encoding/base64"
	"encoding/json"
	"encoding/xml"
	"fmt"
	stdhtml "html"
	"image"
	"image/color"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"

	"github.com/trueset/trueset/manifest"
)

// reportFixture is a small, invented set of statistics (demo values, not
// measured) with awkward text in it: markup in a class name and in the recipe.
func reportFixture() (*Stats, *manifest.Dataset) {
	d := &manifest.Dataset{
		Format: manifest.Format, ToolVersion: "0.1.0", Seed: 7, Count: 10, Width: 32, Height: 32, Mode: "rgb",
		Recipe:       json.RawMessage(`{"name":"demo <b>set</b>","description":"</pre><script>alert(1)</script> & more","canvas":{"width":32,"height":32}}`),
		RecipeSHA256: strings.Repeat("ab", 32), ManifestSHA256: strings.Repeat("cd", 32),
		Classes: []manifest.Class{{ID: 0, Name: "background"}, {ID: 1, Name: "disc", Color: [3]uint8{230, 25, 75}}, {ID: 2, Name: `<i>"tri"</i>`, Color: [3]uint8{0, 130, 200}}},
	}
	st := manifest.SplitTable{
		Names: []string{"train", "val", "test"}, Stratify: "n", Spec: "train=0.6,val=0.2,test=0.2",
		Strata: []manifest.Stratum{
			{Key: "n=0", Groups: 3, Splits: map[string]int{"train": 2, "val": 1, "test": 0}},
			{Key: "n=1", Groups: 4, Splits: map[string]int{"train": 2, "val": 1, "test": 1}},
			{Key: "n=2", Groups: 3, Splits: map[string]int{"train": 2, "val": 0, "test": 1}},
		},
		Thin: []string{"n=0"},
	}
	s := &Stats{
		Dir: "/data/demo", Samples: 10,
		PerSplit:      []SplitStats{{"train", 6, 6}, {"val", 2, 2}, {"test", 2, 2}},
		Splits:        st,
		LabeledPixels: 6144, IgnorePixels: 12,
		Pixels: PixelStats{Split: "train", Channels: 3, Names: []string{"R", "G", "B"}, Estimator: "population", Count: 6144, Mean: []float64{61.23456789, 0.1 + 0.2, 200}, Std: []float64{12.5, 1e-3, 33.333333333333336}},
		Classes: []ClassStats{
			{ID: 0, Name: "background", Pixels: 5000, Frequency: 5000.0 / 6144, WeightInverse: 0.1, WeightMedian: 0.2, PerSample: map[string]int{"0": 6}},
			{ID: 1, Name: "disc", Pixels: 1000, Frequency: 1000.0 / 6144, WeightInverse: 1.2, WeightMedian: 1, Objects: 9, ObjectsBySplit: map[string]int{"train": 5, "val": 4}, AreaMin: 12, AreaMedian: 40.5, AreaMax: 99, PerSample: map[string]int{"0": 1, "1": 3, "2": 2}},
			{ID: 2, Name: `<i>"tri"</i>`, Pixels: 144, Frequency: 144.0 / 6144, WeightInverse: 1.7, WeightMedian: 2.345, Objects: 3, ObjectsBySplit: map[string]int{"train": 1, "val": 1, "test": 1}, AreaMin: 20, AreaMedian: 48, AreaMax: 76, PerSample: map[string]int{"0": 3, "1": 3}},
		},
		Targets: []TargetStats{
			{Name: "discs", Split: "train", Numeric: true, Count: 10, Min: 0, Max: 2, Mean: 1.1666666666666667, Std: 0.6871842709362768},
			{Name: "word", Split: "train", Count: 10, Distinct: 4},
		},
		Leakage: Leakage{Method: "dhash-64", Threshold: 4, Index: "all pairs", Images: 10, PairsFound: 1, Candidates: 2, Confirm: "mean absolute gray difference <= 4",
			Pairs: []LeakPair{{A: "000001", SplitA: "train", B: "000008", SplitB: "test", Distance: 2, MeanAbsDiff: 1.25}}, GroupsSpanned: []string{}},
		Warnings: []string{"split test has no <tri> objects"},
	}
	return s, d
}

func renderReportFixture(t *testing.T, o ReportOptions) ([]byte, *Stats) {
	t.Helper()
	s, d := reportFixture()
	o.Dataset = d
	b, err := RenderReport(s, o)
	if err != nil {
		t.Fatal(err)
	}
	if dir := os.Getenv("TRUESET_REPORT_SAVE"); dir != "" { // for looking at it
		_ = os.WriteFile(filepath.Join(dir, t.Name()+".html"), b, 0o644)
	}
	return b, s
}

// repStatCell is one element with data-stat, as a parser sees it.
type repStatCell struct{ Value, Text string }

// parseReportCells walks the page with encoding/xml in its HTML-tolerant mode
// (non-strict, HTML void elements auto-closed, HTML entities) and returns
// every data-stat element's data-value and text; it fails on a duplicate
// data-stat or on unbalanced tags.
func parseReportCells(t *testing.T, page []byte) map[string]repStatCell {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(page))
	dec.Strict = false
	dec.AutoClose = xml.HTMLAutoClose
	dec.Entity = xml.HTMLEntity
	cells := map[string]repStatCell{}
	type open struct {
		name, stat, value string
		text              strings.Builder
	}
	var stack []*open
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("parsing the report: %v", err)
		}
		switch x := tok.(type) {
		case xml.StartElement:
			o := &open{name: strings.ToLower(x.Name.Local)}
			for _, a := range x.Attr {
				switch a.Name.Local {
				case "data-stat":
					o.stat = a.Value
				case "data-value":
					o.value = a.Value
				}
			}
			stack = append(stack, o)
		case xml.CharData:
			for _, o := range stack {
				o.text.Write(x)
			}
		case xml.EndElement:
			if len(stack) == 0 {
				t.Fatalf("stray </%s>", x.Name.Local)
			}
			o := stack[len(stack)-1]
			if o.name != strings.ToLower(x.Name.Local) {
				t.Fatalf("<%s> closed by </%s>", o.name, x.Name.Local)
			}
			stack = stack[:len(stack)-1]
			if o.stat != "" {
				if _, dup := cells[o.stat]; dup {
					t.Errorf("data-stat %q appears twice", o.stat)
				}
				cells[o.stat] = repStatCell{o.value, strings.TrimSpace(o.text.String())}
			}
		}
	}
	if len(stack) != 0 {
		t.Fatalf("%d elements left open, first <%s>", len(stack), stack[0].name)
	}
	return cells
}

// resolveReportStat finds path in the JSON value v (decoded with UseNumber): dots
// separate object keys and array indexes; a final "len" of an array is its
// length.
func resolveReportStat(v any, path string) (any, error) {
	for _, seg := range strings.Split(path, ".") {
		switch x := v.(type) {
		case map[string]any:
			var ok bool
			if v, ok = x[seg]; !ok {
				return nil, fmt.Errorf("%s: no key %q", path, seg)
			}
		case []any:
			if seg == "len" {
				v = json.Number(strconv.Itoa(len(x)))
				continue
			}
			i, err := strconv.Atoi(seg)
			if err != nil || i < 0 || i >= len(x) {
				return nil, fmt.Errorf("%s: bad index %q", path, seg)
			}
			v = x[i]
		default:
			return nil, fmt.Errorf("%s: %q below a scalar", path, seg)
		}
	}
	return v, nil
}

// checkReportStats compares every data-stat cell with the JSON of s: numbers
// exactly (both parsed as float64), strings and booleans as they are; and
// the cell text must be the value rounded, not some other number.
func checkReportStats(t *testing.T, cells map[string]repStatCell, s *Stats) {
	t.Helper()
	js, err := json.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	dec := json.NewDecoder(bytes.NewReader(js))
	dec.UseNumber()
	var root any
	if err := dec.Decode(&root); err != nil {
		t.Fatal(err)
	}
	for path, c := range cells {
		want, err := resolveReportStat(root, path)
		if err != nil {
			t.Errorf("data-stat %s: %v", path, err)
			continue
		}
		switch w := want.(type) {
		case json.Number:
			wf, _ := w.Float64()
			got, err := strconv.ParseFloat(c.Value, 64)
			if err != nil || got != wf {
				t.Errorf("%s: data-value %q, JSON %s", path, c.Value, w)
			}
			text := strings.NewReplacer(repGroupSep, "", ",", "").Replace(c.Text)
			tf, err := strconv.ParseFloat(text, 64)
			decimals := 0
			if _, f, ok := strings.Cut(text, "."); ok {
				decimals = len(f)
			}
			if err != nil || repAbs(tf-wf) > 0.5*repPow10(-decimals)*(1+1e-9) {
				t.Errorf("%s: text %q does not show %s", path, c.Text, w)
			}
		case string:
			if c.Value != w || c.Text != w {
				t.Errorf("%s: data-value %q text %q, JSON %q", path, c.Value, c.Text, w)
			}
		case bool:
			if c.Value != strconv.FormatBool(w) {
				t.Errorf("%s: data-value %q, JSON %v", path, c.Value, w)
			}
		default:
			t.Errorf("%s: JSON value %v is not a scalar", path, want)
		}
	}
}

func repAbs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

func repPow10(n int) float64 {
	p := 1.0
	for ; n < 0; n++ {
		p /= 10
	}
	return p
}

func TestReportStatCellsEqualStats(t *testing.T) {
	page, s := renderReportFixture(t, ReportOptions{})
	cells := parseReportCells(t, page)
	checkReportStats(t, cells, s)
	// The figures a training run needs are all there.
	want := []string{"dir", "samples", "pixels.mean.0", "pixels.mean.1", "pixels.mean.2", "pixels.std.0", "pixels.std.1", "pixels.std.2",
		"leakage.threshold", "leakage.method", "leakage.pairs.len", "leakage.pairs.0.distance", "leakage.groups_spanning_splits.len",
		"splits.strata.1.splits.val", "classes.1.per_sample.2", "classes.2.objects_by_split.test", "labeled_pixels", "ignore_pixels",
		"pixels.names.2", "leakage.pairs_found", "leakage.images", "leakage.pairs.0.identical", "leakage.pairs.0.mean_abs_diff", "leakage.candidates", "leakage.confirm"}
	for i := range s.PerSplit {
		want = append(want, fmt.Sprintf("per_split.%d.name", i), fmt.Sprintf("per_split.%d.samples", i), fmt.Sprintf("per_split.%d.groups", i))
	}
	for i := range s.Classes {
		for _, f := range []string{"name", "pixels", "frequency", "weight_inverse", "weight_median", "objects", "area_median"} {
			want = append(want, fmt.Sprintf("classes.%d.%s", i, f))
		}
	}
	for _, f := range []string{"name", "numeric", "count", "min", "max", "mean", "std"} {
		want = append(want, "targets.0."+f)
	}
	for _, p := range want {
		if _, ok := cells[p]; !ok {
			t.Errorf("no data-stat %q", p)
		}
	}
	if c := cells["pixels.mean.0"]; c.Text != "61.235" || c.Value != "61.23456789" {
		t.Errorf("pixels.mean.0 = %+v, want text 61.235, value 61.23456789", c)
	}
	if c := cells["pixels.count"]; c.Value != "" {
		t.Errorf("pixels.count should be in the note only, got %+v", c)
	}
}

func TestReportSelfContainedAndEscaped(t *testing.T) {
	sheet := image.NewRGBA(image.Rect(0, 0, 40, 20))
	for i := range sheet.Pix {
		sheet.Pix[i] = uint8(i * 7)
		if i%4 == 3 {
			sheet.Pix[i] = 255
		}
	}
	page, _ := renderReportFixture(t, ReportOptions{ContactSheet: sheet, ContactSheetCaption: "caption <x>"})
	html := string(page)
	for _, bad := range []string{"<script", "http://", "https://", "//fonts.", "@import", "url("} {
		if strings.Contains(strings.ToLower(html), bad) {
			t.Errorf("report contains %q", bad)
		}
	}
	if !strings.Contains(html, `<h1 id="dataset-name">demo &lt;b&gt;set&lt;/b&gt;</h1>`) {
		t.Error("dataset name missing or not escaped")
	}
	if !strings.Contains(html, `&lt;/pre&gt;&lt;script&gt;alert(1)&lt;/script&gt; &amp; more`) {
		t.Error("recipe not HTML-escaped in the <pre>")
	}
	// The recipe as YAML, block style, in the stored key order: not JSON.
	if !strings.Contains(html, `<pre id="recipe-yaml">name: demo &lt;b&gt;set&lt;/b&gt;`+"\n") ||
		!strings.Contains(html, "canvas:\n  width: 32\n  height: 32</pre>") {
		t.Error("recipe not shown as YAML")
	}
	if !strings.Contains(html, "caption &lt;x&gt;") || !strings.Contains(html, "no &lt;tri&gt; objects") {
		t.Error("caption or warning not escaped")
	}
	// Every image is an inline PNG that decodes: the sheet and three charts.
	srcs := regexp.MustCompile(`<img [^>]*src="([^"]*)"`).FindAllStringSubmatch(html, -1)
	if len(srcs) != 4 {
		t.Fatalf("%d images, want 4 (sheet, strata, frequency, objects)", len(srcs))
	}
	for i, m := range srcs {
		const prefix = "data:image/png;base64,"
		if !strings.HasPrefix(m[1], prefix) {
			t.Errorf("image %d: src %.40q is not an inline PNG", i, m[1])
			continue
		}
		b, err := base64.StdEncoding.DecodeString(stdhtml.UnescapeString(m[1][len(prefix):]))
		if err != nil {
			t.Fatalf("image %d: %v", i, err)
		}
		img, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatalf("image %d: %v", i, err)
		}
		if i == 0 {
			if img.Bounds() != sheet.Bounds() || color.RGBAModel.Convert(img.At(3, 2)) != sheet.At(3, 2) {
				t.Error("contact sheet not inlined as given")
			}
			continue
		}
		// Charts are drawn at 2× their CSS size and are not blank.
		if img.Bounds().Dx() < 960 || repColorCount(img) < 8 {
			t.Errorf("chart %d: %v, %d colors", i, img.Bounds(), repColorCount(img))
		}
	}
	// The class color swatch uses the class table's color.
	if !strings.Contains(html, `<span class="sw" style="background: #e6194b"></span>disc`) {
		t.Error("no color swatch for disc")
	}
}

func repColorCount(img image.Image) int {
	seen := map[color.RGBA]bool{}
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y += 3 {
		for x := b.Min.X; x < b.Max.X; x += 3 {
			seen[color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)] = true
		}
	}
	return len(seen)
}

func TestReportNoSheetLeavesSlotAndIsDeterministic(t *testing.T) {
	a, _ := renderReportFixture(t, ReportOptions{})
	b, _ := renderReportFixture(t, ReportOptions{})
	if !bytes.Equal(a, b) {
		t.Error("two renders of the same statistics differ")
	}
	if !strings.Contains(string(a), `<div class="slot">`) {
		t.Error("no contact-sheet slot")
	}
}

func TestReportEmptyStats(t *testing.T) {
	s := &Stats{Dir: "x"}
	b, err := RenderReport(s, ReportOptions{Dataset: &manifest.Dataset{}})
	if err != nil {
		t.Fatal(err)
	}
	parseReportCells(t, b)
	for _, want := range []string{"No splits.", "No classes.", "No targets.", "dataset.json records no recipe.", "One stratum"} {
		if !bytes.Contains(b, []byte(want)) {
			t.Errorf("empty report lacks %q", want)
		}
	}
}

func TestWriteReportAtomic(t *testing.T) {
	s, d := reportFixture()
	dir := t.TempDir()
	p := filepath.Join(dir, "report.html")
	if err := os.WriteFile(p, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := WriteReport(p, s, ReportOptions{Dataset: d}); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(p)
	if err != nil || !bytes.HasPrefix(b, []byte("<!DOCTYPE html>")) {
		t.Fatalf("report.html: %v %.20q", err, b)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("temporary files left: %v", ents)
	}
}

func TestReportNumberText(t *testing.T) {
	for _, c := range []struct {
		v    float64
		d    int
		want string
	}{{1234.5678, 2, "1234.57"}, {12345.5, 1, "12" + repGroupSep + "345.5"}, {-1234567, 0, "-1" + repGroupSep + "234" + repGroupSep + "567"}, {0.00049, 3, "0.000"}} {
		if got := repFixed(c.v, c.d); got != c.want {
			t.Errorf("fixed(%v, %d) = %q, want %q", c.v, c.d, got, c.want)
		}
	}
}

func TestReportManyStrataAndLongNames(t *testing.T) {
	s, d := reportFixture()
	s.Splits.Strata = nil
	for i := range 40 {
		s.Splits.Strata = append(s.Splits.Strata, manifest.Stratum{Key: fmt.Sprintf("n=%d", i), Groups: 10 + i,
			Splits: map[string]int{"train": 8 + i, "val": 1 + i/10, "test": 1 + i/7}})
	}
	for i := range 9 {
		id := len(s.Classes)
		name := fmt.Sprintf("long class name %d", i)
		d.Classes = append(d.Classes, manifest.Class{ID: id, Name: name, Color: [3]uint8{uint8(20 * i), 100, uint8(200 - 20*i)}})
		s.Classes = append(s.Classes, ClassStats{ID: id, Name: name, Pixels: int64(100 * i), Frequency: float64(i) / 100, Objects: 1000 * i})
	}
	page, err := RenderReport(s, ReportOptions{Dataset: d})
	if err != nil {
		t.Fatal(err)
	}
	if dir := os.Getenv("TRUESET_REPORT_SAVE"); dir != "" {
		_ = os.WriteFile(filepath.Join(dir, t.Name()+".html"), page, 0o644)
	}
	checkReportStats(t, parseReportCells(t, page), s)
	for _, m := range regexp.MustCompile(`<img src="data:[^"]*" width="(\d+)"`).FindAllStringSubmatch(string(page), -1) {
		if w, _ := strconv.Atoi(m[1]); w > 1100 {
			t.Errorf("chart %s CSS px wide, more than the page", m[1])
		}
	}
}

// chartImage decodes a chart's data: URI.
func chartImage(t *testing.T, c repChart) image.Image {
	t.Helper()
	b64, ok := strings.CutPrefix(string(c.URI), "data:image/png;base64,")
	if !ok {
		t.Fatalf("chart URI %.40q", c.URI)
	}
	raw, err := base64.StdEncoding.DecodeString(b64)
	if err != nil {
		t.Fatal(err)
	}
	m, err := png.Decode(bytes.NewReader(raw))
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// outlined reports whether a bar of color want in m has a dark edge
// (BT.601 luma < 80, darker than any bar color) within 4 pixels outside it
// on the left, right and top, halfway along each side. The bar is found as
// the first run of at least 10 pixels of the color in a row (anti-aliased
// text leaves stray pixels of light grays), extended up and down while its
// middle pixel keeps the color.
func outlined(t *testing.T, m image.Image, want color.RGBA) bool {
	t.Helper()
	b := m.Bounds()
	is := func(x, y int) bool {
		return image.Pt(x, y).In(b) && color.RGBAModel.Convert(m.At(x, y)).(color.RGBA) == want
	}
	box := image.Rectangle{}
	for y := b.Min.Y; y < b.Max.Y && box.Empty(); y++ {
		run := 0
		for x := b.Min.X; x <= b.Max.X; x++ {
			if is(x, y) {
				run++
				continue
			}
			if run >= 10 {
				box = image.Rect(x-run, y, x, y+1)
				break
			}
			run = 0
		}
	}
	if box.Empty() {
		t.Fatalf("no bar of color %v in the chart", want)
	}
	midX := (box.Min.X + box.Max.X) / 2
	for is(midX, box.Min.Y-1) {
		box.Min.Y--
	}
	for is(midX, box.Max.Y) {
		box.Max.Y++
	}
	if box.Dy() < 6 {
		t.Fatalf("bar of color %v is %v", want, box)
	}
	dark := func(x, y int) bool { return color.GrayModel.Convert(m.At(x, y)).(color.Gray).Y < 80 }
	side := func(pts func(d int) (int, int)) bool {
		for d := 1; d <= 4; d++ {
			if dark(pts(d)) {
				return true
			}
		}
		return false
	}
	midY := (box.Min.Y + box.Max.Y) / 2
	return side(func(d int) (int, int) { return box.Min.X - d, midY }) &&
		side(func(d int) (int, int) { return box.Max.X - 1 + d, midY }) &&
		side(func(d int) (int, int) { return midX, box.Min.Y - d })
}

// A class drawn in near-white (a die, paper: 250, 250, 250) on the white
// chart is still seen: every bar has a dark outline. So do the strata
// chart's bars, light split colors included.
func TestReportBarsOutlined(t *testing.T) {
	s, d := reportFixture()
	white := color.RGBA{250, 250, 250, 255}
	d.Classes[1].Color = [3]uint8{white.R, white.G, white.B}
	c, ok, err := repFrequencyChart(s, repClassColors(d))
	if err != nil || !ok {
		t.Fatal(ok, err)
	}
	if !outlined(t, chartImage(t, c), white) {
		t.Error("the near-white class bar of the frequency chart has no dark outline")
	}
	c, ok, err = repObjectsChart(s, repClassColors(d))
	if err != nil || !ok {
		t.Fatal(ok, err)
	}
	if !outlined(t, chartImage(t, c), white) {
		t.Error("the near-white class bar of the objects chart has no dark outline")
	}
	c, ok, err = repStrataChart(s)
	if err != nil || !ok {
		t.Fatal(ok, err)
	}
	if !outlined(t, chartImage(t, c), repSplitColors[1]) {
		t.Error("the strata chart's bars have no dark outline")
	}
}

// A dataset without a recipe (an augmented plain folder) shows no "Recipe
// SHA-256" row at all, not an empty one, and says it has no recipe; one
// with a recipe shows the row with the hash.
func TestReportNoRecipeNoHashRow(t *testing.T) {
	s, d := reportFixture()
	d.Recipe, d.RecipeSHA256 = nil, ""
	d.Augment = &manifest.AugmentInfo{Source: "plain", Copies: 2, SourceSamples: 5, Seed: 1,
		Plan: json.RawMessage(`{"geometry":{"sampling":"bilinear","moves":[{"do":"flip","axis":"x","chance":0.5}]},"pixels":[]}`)}
	page, err := RenderReport(s, ReportOptions{Dataset: d})
	if err != nil {
		t.Fatal(err)
	}
	html := string(page)
	if strings.Contains(html, "Recipe SHA-256") {
		t.Error("a dataset without a recipe has a Recipe SHA-256 row")
	}
	if !strings.Contains(html, "dataset.json records no recipe.") || strings.Contains(html, `id="recipe-yaml"`) {
		t.Error("no note that the dataset has no recipe")
	}
	if !strings.Contains(html, "<pre id=\"plan-yaml\">geometry:\n  sampling: bilinear\n  moves:\n    - do: flip\n") {
		t.Errorf("plan not shown as YAML:\n%s", html[strings.Index(html, "plan-yaml")-10:])
	}
	s, d = reportFixture()
	page, _ = RenderReport(s, ReportOptions{Dataset: d})
	if !strings.Contains(string(page), "<dt>Recipe SHA-256</dt><dd title=\""+d.RecipeSHA256+"\">abababababababab…</dd>") {
		t.Error("a dataset with a recipe lacks its Recipe SHA-256 row")
	}
}

// The recipe converts to YAML that reads back to the same values as the
// stored JSON, keeps strings that look like other types quoted, and puts
// short number lists on one line (not one number per line).
func TestReportRecipeYAMLRoundTrip(t *testing.T) {
	raw := json.RawMessage(`{"name":"x","flag":"yes","n":"1","empty":"","ratio":0.25,"color":[[1,2,3],[4,5,6]],"box":[0,0,64,64],"nested":{"list":[{"a":1}],"none":null,"t":true}}`)
	y, note := repYAML(raw, "recipe")
	if note != "" {
		t.Fatal(note)
	}
	var back any
	if err := yaml.Unmarshal([]byte(y), &back); err != nil {
		t.Fatalf("%v\n%s", err, y)
	}
	var want any
	_ = json.Unmarshal(raw, &want)
	bj, _ := json.Marshal(back)
	var got any
	_ = json.Unmarshal(bj, &got)
	if !reflect.DeepEqual(got, want) {
		t.Errorf("YAML reads back as %s, want %s\n%s", bj, raw, y)
	}
	for _, line := range []string{"box: [0, 0, 64, 64]", "  - [1, 2, 3]", "name: x"} {
		if !strings.Contains(y, line+"\n") {
			t.Errorf("YAML lacks the line %q:\n%s", line, y)
		}
	}
	if regexp.MustCompile(`(?m)^\s*-?\s*\d+,?$`).MatchString(y) {
		t.Errorf("a number on a line of its own:\n%s", y)
	}
}
