package main

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"fmt"
	stdhtml "html"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"

	"github.com/trueset/trueset/manifest/inspect"
)

// reportCell is one element carrying data-stat, as read back from a page.
type reportCell struct{ Value, Text string }

// readReportCells walks an HTML page (the report as written, or Chromium's
// --dump-dom of it) with encoding/xml in its HTML-tolerant mode: not strict,
// HTML void elements closed automatically, HTML entities known. It returns
// each data-stat element's data-value and text, and fails on unbalanced
// tags or a data-stat that appears twice.
func readReportCells(t *testing.T, page []byte) map[string]reportCell {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(page))
	dec.Strict = false
	dec.AutoClose = xml.HTMLAutoClose
	dec.Entity = xml.HTMLEntity
	type open struct {
		name, stat, value string
		text              strings.Builder
	}
	var stack []*open
	cells := map[string]reportCell{}
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("parsing the page: %v", err)
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
			if o.stat == "" {
				continue
			}
			if _, dup := cells[o.stat]; dup {
				t.Errorf("data-stat %q appears twice", o.stat)
			}
			cells[o.stat] = reportCell{o.value, strings.TrimSpace(o.text.String())}
		}
	}
	if len(stack) != 0 {
		t.Fatalf("%d elements left open, the first <%s>", len(stack), stack[0].name)
	}
	return cells
}

// statAt finds a data-stat path in a JSON document decoded with UseNumber:
// object keys and array indexes joined by dots; a last "len" under an array
// is its length.
func statAt(doc any, path string) (any, error) {
	v := doc
	for _, seg := range strings.Split(path, ".") {
		switch x := v.(type) {
		case map[string]any:
			var ok bool
			if v, ok = x[seg]; !ok {
				return nil, fmt.Errorf("no key %q", seg)
			}
		case []any:
			if seg == "len" {
				v = json.Number(strconv.Itoa(len(x)))
				continue
			}
			i, err := strconv.Atoi(seg)
			if err != nil || i < 0 || i >= len(x) {
				return nil, fmt.Errorf("no index %q of %d", seg, len(x))
			}
			v = x[i]
		default:
			return nil, fmt.Errorf("%q below the scalar %v", seg, x)
		}
	}
	return v, nil
}

func decodeStatsJSON(t *testing.T, b []byte) any {
	t.Helper()
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	var doc any
	if err := dec.Decode(&doc); err != nil {
		t.Fatalf("stats JSON: %v", err)
	}
	return doc
}

// compareReportCells checks every data-stat cell against the stats JSON:
// numbers exactly (data-value and the JSON number parse to the same
// float64) and the visible text within its own rounding; strings and
// booleans as they are. It returns the number of cells checked.
func compareReportCells(t *testing.T, cells map[string]reportCell, doc any) int {
	t.Helper()
	n := 0
	for path, c := range cells {
		want, err := statAt(doc, path)
		if err != nil {
			t.Errorf("data-stat %s: %v", path, err)
			continue
		}
		n++
		switch w := want.(type) {
		case json.Number:
			wf, err := w.Float64()
			if err != nil {
				t.Errorf("%s: JSON %s: %v", path, w, err)
				continue
			}
			if got, err := strconv.ParseFloat(c.Value, 64); err != nil || got != wf {
				t.Errorf("%s: data-value %q, stats --json %s", path, c.Value, w)
			}
			// The text is the value rounded: group separators (narrow
			// no-break spaces) removed, it is within half a unit of its
			// last digit.
			text := strings.NewReplacer("\u202f", "", ",", "").Replace(c.Text)
			tf, err := strconv.ParseFloat(text, 64)
			unit := 1.0
			if _, frac, ok := strings.Cut(text, "."); ok {
				unit = 1 / float64(pow10i(len(frac)))
			}
			if err != nil || absf(tf-wf) > unit/2*(1+1e-9) {
				t.Errorf("%s: text %q does not show %s", path, c.Text, w)
			}
		case string:
			if c.Value != w || c.Text != w {
				t.Errorf("%s: data-value %q, text %q, stats --json %q", path, c.Value, c.Text, w)
			}
		case bool:
			if c.Value != strconv.FormatBool(w) {
				t.Errorf("%s: data-value %q, stats --json %v", path, c.Value, w)
			}
		default:
			t.Errorf("%s: stats --json has %v there, not a scalar", path, want)
		}
	}
	return n
}

func pow10i(n int) int64 {
	p := int64(1)
	for range n {
		p *= 10
	}
	return p
}

func absf(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// requiredReportStats lists the data-stat paths a report must carry for the
// statistics in doc: every split, every channel's mean and std, every
// class's frequency and both weights, every target, and the leakage figures.
func requiredReportStats(t *testing.T, doc any) []string {
	t.Helper()
	length := func(path string) int {
		v, err := statAt(doc, path+".len")
		if err != nil {
			t.Fatalf("stats JSON: %s: %v", path, err)
		}
		n, _ := strconv.Atoi(string(v.(json.Number)))
		return n
	}
	want := []string{"dir", "samples", "leakage.method", "leakage.threshold", "leakage.pairs.len", "leakage.groups_spanning_splits.len"}
	for i := range length("per_split") {
		want = append(want, fmt.Sprintf("per_split.%d.name", i), fmt.Sprintf("per_split.%d.samples", i), fmt.Sprintf("per_split.%d.groups", i))
	}
	for _, k := range []string{"mean", "std"} {
		for c := range length("pixels." + k) {
			want = append(want, fmt.Sprintf("pixels.%s.%d", k, c))
		}
	}
	for i := range length("classes") {
		for _, f := range []string{"id", "name", "pixels", "frequency", "weight_inverse", "weight_median", "objects"} {
			want = append(want, fmt.Sprintf("classes.%d.%s", i, f))
		}
	}
	for i := range length("targets") {
		want = append(want, fmt.Sprintf("targets.%d.name", i), fmt.Sprintf("targets.%d.count", i))
	}
	for i := range length("splits.strata") {
		want = append(want, fmt.Sprintf("splits.strata.%d.key", i), fmt.Sprintf("splits.strata.%d.groups", i))
	}
	return want
}

func checkRequiredReportStats(t *testing.T, cells map[string]reportCell, doc any) {
	t.Helper()
	for _, p := range requiredReportStats(t, doc) {
		if _, ok := cells[p]; !ok {
			t.Errorf("the page has no data-stat %q", p)
		}
	}
}

func TestReportCommand(t *testing.T) {
	tmp := t.TempDir()
	set := filepath.Join(tmp, "set")
	wantCode(t, exitOK, "generate", "--out", set, "--count", "40", "--quiet")
	out := filepath.Join(tmp, "report.html")
	stdout, _ := wantCode(t, exitOK, "report", set, "--out", out, "--sheet-count", "4")
	if !strings.HasPrefix(stdout, "wrote "+out+": report of 40 samples") {
		t.Errorf("stdout %q", stdout)
	}
	page, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	js, _ := wantCode(t, exitOK, "stats", set, "--json")
	doc := decodeStatsJSON(t, []byte(js))
	cells := readReportCells(t, page)
	if n := compareReportCells(t, cells, doc); n < 40 {
		t.Errorf("only %d data-stat cells", n)
	}
	checkRequiredReportStats(t, cells, doc)
	// … and equal what inspect.Compute returns in this process.
	st, err := inspect.Compute(set, inspect.Options{})
	if err != nil {
		t.Fatal(err)
	}
	cjs, err := json.Marshal(st)
	if err != nil {
		t.Fatal(err)
	}
	compareReportCells(t, cells, decodeStatsJSON(t, cjs))

	html := string(page)
	if !strings.Contains(html, `<h1 id="dataset-name">workshop-parts</h1>`) {
		t.Error("no dataset name heading")
	}
	// Self-contained: every image inline, nothing fetched, no script.
	imgs := regexp.MustCompile(`<img [^>]*src="([^"]*)"`).FindAllStringSubmatch(html, -1)
	if len(imgs) != 4 {
		t.Errorf("%d images, want the sheet and three charts", len(imgs))
	}
	for _, m := range imgs {
		if !strings.HasPrefix(m[1], "data:image/png;base64,") {
			t.Errorf("image src %.40q is not inline", m[1])
		}
	}
	for _, bad := range []string{"<script", "http://", "https://", "url("} {
		if strings.Contains(html, bad) {
			t.Errorf("report contains %q", bad)
		}
	}
	// The recipe is dataset.json's, as YAML (parsed with go.yaml.in/yaml/v3
	// it holds the same values as the stored JSON), escaped; a list of
	// numbers stays on one line.
	pre := regexp.MustCompile(`(?s)<pre id="recipe-yaml">(.*?)</pre>`).FindStringSubmatch(html)
	if pre == nil {
		t.Fatal("no recipe <pre>")
	}
	text := stdhtml.UnescapeString(pre[1])
	var fromYAML any
	if err := yaml.Unmarshal([]byte(text), &fromYAML); err != nil {
		t.Fatalf("recipe <pre> is not YAML: %v\n%s", err, text)
	}
	yj, _ := json.Marshal(fromYAML)
	var got, want any
	_ = json.Unmarshal(yj, &got)
	_ = json.Unmarshal(readDataset(t, set).Recipe, &want)
	if !reflect.DeepEqual(got, want) {
		t.Errorf("recipe <pre> reads as\n%s\nnot dataset.json's recipe", yj)
	}
	if strings.HasPrefix(strings.TrimSpace(text), "{") || regexp.MustCompile(`(?m)^\s*-?\s*\d+(\.\d+)?,?$`).MatchString(text) {
		t.Errorf("recipe shown as JSON or one number per line:\n%s", text)
	}
	if !strings.Contains(text, "name: workshop-parts\n") || !regexp.MustCompile(`(?m)^\s+color: \[\d+, \d+, \d+\]$`).MatchString(text) {
		t.Errorf("recipe YAML lacks its name or a one-line class color:\n%s", text)
	}

	// Same dataset, same flags: the same bytes; no sheet: the slot.
	out2 := filepath.Join(tmp, "again.html")
	wantCode(t, exitOK, "report", set, "--out", out2, "--sheet-count", "4", "-j", "1", "--quiet")
	if again, _ := os.ReadFile(out2); !bytes.Equal(again, page) {
		t.Error("a second report of the same dataset differs")
	}
	wantCode(t, exitOK, "report", set, "-o", out2, "--sheet-count", "0", "-q")
	if b, _ := os.ReadFile(out2); !bytes.Contains(b, []byte(`<div class="slot">`)) || bytes.Contains(b, []byte(`class="sheet"`)) {
		t.Error("--sheet-count 0 should leave the contact-sheet slot")
	}
}

func TestReportUsageErrors(t *testing.T) {
	tmp := t.TempDir()
	set := filepath.Join(tmp, "set")
	wantCode(t, exitOK, "generate", "--out", set, "--count", "10", "--quiet")
	out := filepath.Join(tmp, "r.html")
	for name, args := range map[string][]string{
		"no --out":          {"report", set},
		"no folder":         {"report", "--out", out},
		"two folders":       {"report", set, set, "--out", out},
		"not a folder":      {"report", filepath.Join(tmp, "nope"), "--out", out},
		"bad threshold":     {"report", set, "--out", out, "--threshold", "40"},
		"unknown split":     {"report", set, "--out", out, "--split", "holdout"},
		"unknown sheet set": {"report", set, "--out", out, "--sheet-split", "holdout"},
		"bad sheet count":   {"report", set, "--out", out, "--sheet-count", "-1"},
		"bad workers":       {"report", set, "--out", out, "--workers", "0"},
	} {
		t.Run(name, func(t *testing.T) {
			_, stderr := wantCode(t, exitUsage, args...)
			if !strings.HasPrefix(stderr, "trueset: ") {
				t.Errorf("stderr %q", stderr)
			}
		})
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("a refused report wrote %s", out)
	}
}

// An augmented plain labeled folder has no recipe: its report has no
// "Recipe SHA-256" row (not an empty one) and says so; the plan shows as
// YAML. Each target's type reads "numeric" or "text" in the page, as in
// `trueset stats` (the same words for the same target).
func TestReportPlainFolderAndTargetTypes(t *testing.T) {
	plain := filepath.Join(t.TempDir(), "plain")
	wantCode(t, exitOK, "augment", "--in", filepath.Join("..", "..", "testdata", "plain"), "--out", plain,
		"--plan", filepath.Join("..", "..", "testdata", "plans", "upright.yaml"), "--copies", "2", "--quiet")
	out := filepath.Join(t.TempDir(), "plain.html")
	wantCode(t, exitOK, "report", plain, "--out", out, "-q")
	page, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	html := string(page)
	if strings.Contains(html, "Recipe SHA-256") {
		t.Error("the report of a plain folder has a Recipe SHA-256 row")
	}
	if !strings.Contains(html, "dataset.json records no recipe.") || !strings.Contains(html, `<pre id="plan-yaml">`) {
		t.Error("no note of the missing recipe, or no plan as YAML")
	}
	text, _ := wantCode(t, exitOK, "stats", plain)
	st, _ := statsJSON(t, plain)
	cells := readReportCells(t, page)
	kinds := map[string]bool{}
	for i, tg := range st.Targets {
		c := cells[fmt.Sprintf("targets.%d.numeric", i)]
		if c.Text != tg.Type() {
			t.Errorf("target %s: the report says %q, want %q", tg.Name, c.Text, tg.Type())
		}
		if !regexp.MustCompile(`(?m)^\s*` + regexp.QuoteMeta(tg.Name) + `\s+` + c.Text + `\s`).MatchString(text) {
			t.Errorf("target %s: the report says %q, stats text does not", tg.Name, c.Text)
		}
		kinds[c.Text] = true
	}
	if !kinds["numeric"] || !kinds["text"] {
		t.Errorf("want both a numeric and a text target in testdata/plain, got %v", kinds)
	}
}
