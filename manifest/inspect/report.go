package inspect

import (
	"bytes"
	"encoding/base64"
	"encoding/json"
	"fmt"
	"html/template"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"
	xfont "golang.org/x/image/font"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/trueset/trueset/manifest"
)

// ReportOptions are what a report needs beyond the statistics.
type ReportOptions struct {
	// Dataset is the dataset's dataset.json (recipe, class colors, seed…).
	// When nil, Report reads it from Stats.Dir.
	Dataset *manifest.Dataset
	// ContactSheet is a preview of some samples, inlined as a PNG. When nil
	// the report says that no contact sheet was made.
	ContactSheet image.Image
	// ContactSheetCaption describes the sheet (which samples, how laid out).
	ContactSheetCaption string
}

// Report writes a self-contained HTML report of s: no external requests,
// no JavaScript; charts and the contact sheet are PNG data: URIs and the
// style sheet is inline. The bytes depend only on s and o (no clock), so the
// same dataset gives the same report.
//
// Every cell that shows a statistic carries data-stat, the path of the
// value in s's JSON encoding (`trueset stats --json`): object keys and
// array indexes joined by dots, e.g. "pixels.mean.0" or
// "classes.2.weight_median"; the final segment "len" of an array path
// stands for its length ("leakage.pairs.len"). data-value holds the value
// exactly (shortest round-trip decimal for numbers); the cell text is the
// value rounded for reading.
func Report(w io.Writer, s *Stats, o ReportOptions) error {
	b, err := RenderReport(s, o)
	if err != nil {
		return err
	}
	_, err = w.Write(b)
	return err
}

// WriteReport renders the report and writes it to path atomically.
func WriteReport(path string, s *Stats, o ReportOptions) error {
	b, err := RenderReport(s, o)
	if err != nil {
		return err
	}
	return manifest.WriteFileAtomic(path, b)
}

// RenderReport returns the report's bytes; see Report.
func RenderReport(s *Stats, o ReportOptions) ([]byte, error) {
	if s == nil {
		return nil, fmt.Errorf("report: no statistics")
	}
	d := o.Dataset
	if d == nil {
		var err error
		if d, err = manifest.ReadDataset(s.Dir); err != nil {
			return nil, fmt.Errorf("report: %w", err)
		}
	}
	v, err := buildReportView(s, d, o)
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if err := reportTemplate.Execute(&buf, v); err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	return buf.Bytes(), nil
}

// ---- the view the template renders ----

type reportView struct {
	Title      string
	Name       string
	Folder     string
	Facts      []repFact
	Warnings   []string
	Sheet      template.URL // data: URI, "" when there is none
	SheetW     int          // CSS width of the sheet
	SheetCap   string
	Splits     repTable
	Strata     repTable
	StrataNote string
	Pixels     repTable
	PixelsNote string
	Classes    repTable
	PerSample  repTable
	// ObjectsBySplit counts each class's objects per split.
	ObjectsBySplit repTable
	ClassFacts     []repFact
	StatsSplit     string // the split of the pixel, class and target figures
	TargetSplit    string
	Targets        repTable
	LossScales     repTable
	LossScaleNote  string
	Leakage        []repFact
	LeakPairs      repTable
	Spanned        []string
	SpannedN       repCell
	SpannedCut     int
	Charts         map[string]repChart
	Planted        []repTable // instruments (planted.go)
	Recipe         string
	RecipeNote     string
	Plan           string
}

// repFact is one labeled value of a definition list.
type repFact struct {
	Label string
	Cell  repCell
}

// repCell is one table cell. Stat and Value are empty for cells that show no
// statistic of the JSON (headers, derived figures).
type repCell struct {
	Stat   string
	Value  string
	Text   string
	Num    bool
	Swatch template.CSS // background color of a swatch before the text
	Title  string
}

type repTable struct {
	ID    string
	Head  []string
	Rows  [][]repCell
	Foot  []repCell
	Empty string // shown instead of an empty table
	More  int    // rows left out
}

// Tall reports whether the table scrolls in a box of its own.
func (t repTable) Tall() bool { return len(t.Rows) > 16 }

// NumCol reports whether column i holds numbers (its header aligns right).
func (t repTable) NumCol(i int) bool {
	return len(t.Rows) > 0 && i < len(t.Rows[0]) && t.Rows[0][i].Num
}

type repChart struct {
	URI    template.URL
	Width  int // CSS pixels
	Height int
	Alt    string
}

// ---- cells ----

func repNum(stat string, v float64, decimals int) repCell {
	return repCell{Stat: stat, Value: repExact(v), Text: repFixed(v, decimals), Num: true}
}

// repNumWhole is repNum, but shows whole values without decimals.
func repNumWhole(stat string, v float64, decimals int) repCell {
	if v == math.Trunc(v) && math.Abs(v) < 1e15 {
		decimals = 0
	}
	return repNum(stat, v, decimals)
}

func repInt(stat string, v int64) repCell {
	return repCell{Stat: stat, Value: strconv.FormatInt(v, 10), Text: repGrouped(v), Num: true}
}

func repText(stat, v string) repCell { return repCell{Stat: stat, Value: v, Text: v} }

func repBool(stat string, v bool) repCell {
	t := "no"
	if v {
		t = "yes"
	}
	return repCell{Stat: stat, Value: strconv.FormatBool(v), Text: t}
}

func repPlain(t string) repCell    { return repCell{Text: t} }
func repPlainNum(t string) repCell { return repCell{Text: t, Num: true} }

// repExact is the shortest decimal that parses back to v, as
// encoding/json writes it.
func repExact(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// repFixed rounds v to the given decimals, grouping the integer part.
func repFixed(v float64, decimals int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	s := strconv.FormatFloat(v, 'f', decimals, 64)
	sign := ""
	if strings.HasPrefix(s, "-") {
		sign, s = "-", s[1:]
	}
	ip, fp, _ := strings.Cut(s, ".")
	out := sign + repGroupDigits(ip)
	if fp != "" {
		out += "." + fp
	}
	return out
}

func repGrouped(v int64) string {
	if v < 0 {
		return "-" + repGroupDigits(strconv.FormatInt(-v, 10))
	}
	return repGroupDigits(strconv.FormatInt(v, 10))
}

// repGroupSep separates thousands in cell text: a narrow no-break space (SI
// style), which no locale reads as a decimal mark.
const repGroupSep = "\u202f"

func repGroupDigits(d string) string {
	if len(d) <= 4 {
		return d
	}
	var b strings.Builder
	for i, r := range d {
		if i > 0 && (len(d)-i)%3 == 0 {
			b.WriteString(repGroupSep)
		}
		b.WriteRune(r)
	}
	return b.String()
}

// ---- building the view ----

func reportName(s *Stats, d *manifest.Dataset) string {
	var r struct {
		Name string `json:"name"`
	}
	if len(d.Recipe) > 0 && json.Unmarshal(d.Recipe, &r) == nil && r.Name != "" {
		return r.Name
	}
	if s.Dir != "" {
		return filepath.Base(filepath.Clean(s.Dir))
	}
	return "dataset"
}

func buildReportView(s *Stats, d *manifest.Dataset, o ReportOptions) (*reportView, error) {
	name := reportName(s, d)
	v := &reportView{
		Title:    name + " · trueset report",
		Name:     name,
		Folder:   s.Dir,
		Warnings: s.Warnings,
		SheetCap: o.ContactSheetCaption,
		Charts:   map[string]repChart{},
		Planted:  repPlanted(s),
	}
	v.Facts = []repFact{
		{"Folder", repText("dir", s.Dir)},
		{"Samples", repInt("samples", int64(s.Samples))},
		{"Image size", repPlain(repImageSize(d))},
		{"Seed", repPlain(strconv.FormatUint(d.Seed, 10))},
		{"Tool version", repPlain(d.ToolVersion)},
	}
	// A plain labeled folder, augmented, has no recipe and so no recipe
	// hash: no row rather than an empty one.
	if d.RecipeSHA256 != "" {
		v.Facts = append(v.Facts, repFact{"Recipe SHA-256", repCell{Text: repShort(d.RecipeSHA256), Title: d.RecipeSHA256}})
	}
	if d.ManifestSHA256 != "" {
		v.Facts = append(v.Facts, repFact{"Manifest SHA-256", repCell{Text: repShort(d.ManifestSHA256), Title: d.ManifestSHA256}})
	}
	if d.Augment != nil {
		a := d.Augment
		v.Facts = append(v.Facts, repFact{"Augmented", repPlain(fmt.Sprintf("%d copies per %s source (%d sources), plan seed %d",
			a.Copies, a.Source, a.SourceSamples, a.Seed))})
	}

	if o.ContactSheet != nil {
		uri, err := repPNGURI(o.ContactSheet)
		if err != nil {
			return nil, err
		}
		v.Sheet = uri
		// The sheet is drawn at its own scale: shown pixel for pixel,
		// narrower only when the page is.
		v.SheetW = o.ContactSheet.Bounds().Dx()
	}

	v.Splits = repSplits(s)
	v.Strata, v.StrataNote = repStrata(s)
	v.Pixels, v.PixelsNote = repPixels(s)
	v.Classes = repClasses(s, d)
	v.PerSample = repPerSample(s, d)
	v.ObjectsBySplit = repObjectsBySplit(s, d)
	split := repOrDash(s.Pixels.Split)
	v.ClassFacts = []repFact{
		{"Labeled mask pixels (" + split + ")", repInt("labeled_pixels", s.LabeledPixels)},
		{"Ignore pixels, id 255 (" + split + ")", repInt("ignore_pixels", s.IgnorePixels)},
	}
	v.StatsSplit = split
	for _, g := range s.Targets {
		if g.Split != "" {
			v.TargetSplit = g.Split
			break
		}
	}
	v.Targets = repTargets(s)
	v.LossScales, v.LossScaleNote = repLossScales(s), "Over the "+split+" split, the "+LossScaleMethod+"." // lossscale.go
	repLeakage(v, s)

	colors := repClassColors(d)
	var err error
	if c, ok, e := repStrataChart(s); e != nil {
		err = e
	} else if ok {
		v.Charts["strata"] = c
	}
	if c, ok, e := repFrequencyChart(s, colors); e != nil {
		err = e
	} else if ok {
		v.Charts["frequency"] = c
	}
	if c, ok, e := repObjectsChart(s, colors); e != nil {
		err = e
	} else if ok {
		v.Charts["objects"] = c
	}
	if err != nil {
		return nil, fmt.Errorf("report: chart: %w", err)
	}

	v.Recipe, v.RecipeNote = repYAML(d.Recipe, "recipe")
	if d.Augment != nil && len(d.Augment.Plan) > 0 {
		v.Plan, _ = repYAML(d.Augment.Plan, "plan")
	}
	return v, nil
}

// repImageSize describes the images; an augmented plain folder whose
// sources differ records size 0 and mode "mixed".
func repImageSize(d *manifest.Dataset) string {
	mode := d.Mode
	if mode == "" {
		mode = "mode not recorded"
	}
	if d.Width <= 0 || d.Height <= 0 {
		return "sizes vary, " + mode
	}
	return fmt.Sprintf("%d × %d px, %s", d.Width, d.Height, mode)
}

func repShort(h string) string {
	if len(h) > 16 {
		return h[:16] + "…"
	}
	return h
}

// repYAML shows a normalized recipe or plan, stored in dataset.json as
// JSON, as the YAML it was written in: block style, keys in their stored
// order, short lists of numbers (colors, ranges, boxes) on one line. what
// names it in the notes ("recipe", "plan").
func repYAML(raw json.RawMessage, what string) (string, string) {
	if len(bytes.TrimSpace(raw)) == 0 || string(bytes.TrimSpace(raw)) == "null" {
		return "", "dataset.json records no " + what + "."
	}
	if !json.Valid(raw) {
		return string(raw), "the " + what + " is not valid JSON; shown as stored."
	}
	// JSON is YAML (1.2), so the YAML parser reads it into nodes that keep
	// the key order; only the styles change.
	var doc yaml.Node
	if err := yaml.Unmarshal(raw, &doc); err != nil {
		return repIndentJSON(raw), "the " + what + " is shown as JSON (it did not convert to YAML: " + err.Error() + ")."
	}
	repBlockStyle(&doc)
	var buf bytes.Buffer
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(&doc); err != nil {
		return repIndentJSON(raw), "the " + what + " is shown as JSON (it did not convert to YAML: " + err.Error() + ")."
	}
	_ = enc.Close()
	return strings.TrimRight(buf.String(), "\n"), ""
}

func repIndentJSON(raw json.RawMessage) string {
	var buf bytes.Buffer
	if err := json.Indent(&buf, raw, "", "  "); err != nil {
		return string(raw)
	}
	return buf.String()
}

// repBlockStyle turns the flow style of parsed JSON into block style, keeps
// lists of up to 8 scalars on one line ("color: [230, 25, 75]"), and drops
// the quotes of strings; the encoder quotes again any that would read back
// as another type ("yes", "1").
func repBlockStyle(n *yaml.Node) {
	switch n.Kind {
	case yaml.ScalarNode:
		n.Style = 0
	case yaml.SequenceNode:
		short := len(n.Content) > 0 && len(n.Content) <= 8
		for _, c := range n.Content {
			if c.Kind != yaml.ScalarNode {
				short = false
			}
		}
		if short {
			n.Style = yaml.FlowStyle
		} else {
			n.Style = 0
		}
	default:
		n.Style = 0
	}
	for _, c := range n.Content {
		repBlockStyle(c)
	}
}

func repSplits(s *Stats) repTable {
	t := repTable{ID: "splits", Head: []string{"split", "samples", "share", "groups"}, Empty: "No splits."}
	total := 0
	for _, sp := range s.PerSplit {
		total += sp.Samples
	}
	for i, sp := range s.PerSplit {
		p := fmt.Sprintf("per_split.%d.", i)
		share := "–"
		if total > 0 {
			share = repFixed(100*float64(sp.Samples)/float64(total), 1) + " %"
		}
		t.Rows = append(t.Rows, []repCell{
			repText(p+"name", sp.Name),
			repInt(p+"samples", int64(sp.Samples)),
			repPlainNum(share),
			repInt(p+"groups", int64(sp.Groups)),
		})
	}
	if len(s.PerSplit) > 1 {
		groups := 0
		for _, sp := range s.PerSplit {
			groups += sp.Groups
		}
		t.Foot = []repCell{repPlain("all"), repPlainNum(repGrouped(int64(s.Samples))), repPlainNum("100.0 %"), repPlainNum(repGrouped(int64(groups)))}
	}
	return t
}

// repStrataLabels strips the common "key=" prefix of stratum keys.
func repStrataLabels(st manifest.SplitTable) ([]string, string) {
	labels := make([]string, len(st.Strata))
	prefix := st.Stratify + "="
	strip := st.Stratify != ""
	for _, r := range st.Strata {
		if !strings.HasPrefix(r.Key, prefix) {
			strip = false
		}
	}
	for i, r := range st.Strata {
		labels[i] = r.Key
		if strip {
			labels[i] = strings.TrimPrefix(r.Key, prefix)
		}
	}
	axis := "stratum"
	if strip {
		axis = st.Stratify
	}
	return labels, axis
}

func repStrata(s *Stats) (repTable, string) {
	st := s.Splits
	t := repTable{ID: "strata", Head: []string{"stratum", "groups"}, Empty: "One stratum: the split was not stratified."}
	t.Head = append(t.Head, st.Names...)
	for i, r := range st.Strata {
		p := fmt.Sprintf("splits.strata.%d.", i)
		row := []repCell{repText(p+"key", r.Key), repInt(p+"groups", int64(r.Groups))}
		for _, n := range st.Names {
			row = append(row, repInt(p+"splits."+n, int64(r.Splits[n])))
		}
		t.Rows = append(t.Rows, row)
	}
	note := ""
	if st.Stratify != "" {
		note = "Stratified by " + st.Stratify + "; counts are groups (all copies of one source form a group)."
	}
	if len(st.Thin) > 0 {
		note += " Thin strata (fewer groups than splits): " + strings.Join(st.Thin, ", ") + "."
	}
	return t, strings.TrimSpace(note)
}

func repPixels(s *Stats) (repTable, string) {
	p := s.Pixels
	t := repTable{ID: "pixels", Head: []string{"channel", "mean", "std", "mean / 255", "std / 255"}, Empty: "No pixel statistics."}
	names, fromStats := p.Names, true
	if len(names) < len(p.Mean) {
		names, fromStats = repChannelNames(len(p.Mean)), false
	}
	for c := 0; c < len(p.Mean) && c < len(p.Std); c++ {
		name := repPlain(names[c])
		if fromStats {
			name = repText(fmt.Sprintf("pixels.names.%d", c), names[c])
		}
		t.Rows = append(t.Rows, []repCell{
			name,
			repNum(fmt.Sprintf("pixels.mean.%d", c), p.Mean[c], 3),
			repNum(fmt.Sprintf("pixels.std.%d", c), p.Std[c], 3),
			repPlainNum(repFixed(p.Mean[c]/255, 4)),
			repPlainNum(repFixed(p.Std[c]/255, 4)),
		})
	}
	note := ""
	if p.Split != "" || p.Count > 0 {
		est := ""
		if p.Estimator != "" {
			est = " (" + p.Estimator + " std)"
		}
		note = fmt.Sprintf("Over the %s split, %s values per channel, in 0..255 units%s; normalize a value v as (v − mean) / std. The /255 columns are for loaders that scale to 0..1 first.",
			repOrDash(p.Split), repGrouped(p.Count), est)
	}
	return t, note
}

func repChannelNames(n int) []string {
	switch n {
	case 1:
		return []string{"gray"}
	case 3:
		return []string{"red", "green", "blue"}
	}
	out := make([]string, n)
	for i := range out {
		out[i] = strconv.Itoa(i)
	}
	return out
}

func repOrDash(s string) string {
	if s == "" {
		return "–"
	}
	return s
}

func repClassColors(d *manifest.Dataset) map[int]color.RGBA {
	m := map[int]color.RGBA{}
	for _, c := range d.Classes {
		m[c.ID] = color.RGBA{c.Color[0], c.Color[1], c.Color[2], 255}
	}
	return m
}

func repSwatch(colors map[int]color.RGBA, id int) template.CSS {
	c, ok := colors[id]
	if !ok {
		return ""
	}
	return template.CSS(fmt.Sprintf("#%02x%02x%02x", c.R, c.G, c.B))
}

func repClasses(s *Stats, d *manifest.Dataset) repTable {
	colors := repClassColors(d)
	t := repTable{ID: "classes", Empty: "No classes.", Head: []string{"id", "class", "pixels", "frequency", "weight 1/f", "weight median-f", "objects", "area min", "area median", "area max"}}
	for i, c := range s.Classes {
		p := fmt.Sprintf("classes.%d.", i)
		name := repText(p+"name", c.Name)
		name.Swatch = repSwatch(colors, c.ID)
		t.Rows = append(t.Rows, []repCell{
			repInt(p+"id", int64(c.ID)),
			name,
			repInt(p+"pixels", c.Pixels),
			repNum(p+"frequency", c.Frequency, 4),
			repNum(p+"weight_inverse", c.WeightInverse, 3),
			repNum(p+"weight_median", c.WeightMedian, 3),
			repInt(p+"objects", int64(c.Objects)),
			repInt(p+"area_min", int64(c.AreaMin)),
			repNum(p+"area_median", c.AreaMedian, 1),
			repInt(p+"area_max", int64(c.AreaMax)),
		})
	}
	return t
}

// repObjectsBySplit is objects per class and split: a split with none of
// a class cannot test it.
func repObjectsBySplit(s *Stats, d *manifest.Dataset) repTable {
	colors := repClassColors(d)
	t := repTable{ID: "objects-by-split", Empty: "No objects.", Head: []string{"class", "all"}}
	splits := make([]string, len(s.PerSplit))
	for i, sp := range s.PerSplit {
		splits[i] = sp.Name
	}
	t.Head = append(t.Head, splits...)
	for i, c := range s.Classes {
		if c.ID == 0 && c.Objects == 0 {
			continue
		}
		name := repPlain(c.Name)
		name.Swatch = repSwatch(colors, c.ID)
		// the total's data-stat is in the class table
		row := []repCell{name, repPlainNum(repGrouped(int64(c.Objects)))}
		for _, sp := range splits {
			if n, ok := c.ObjectsBySplit[sp]; ok {
				row = append(row, repInt(fmt.Sprintf("classes.%d.objects_by_split.%s", i, sp), int64(n)))
			} else {
				row = append(row, repPlainNum("0"))
			}
		}
		t.Rows = append(t.Rows, row)
	}
	return t
}

// repPerSample is samples by number of objects of each class.
func repPerSample(s *Stats, d *manifest.Dataset) repTable {
	colors := repClassColors(d)
	t := repTable{ID: "per-sample", Empty: "No object counts."}
	var ns []int
	seen := map[int]bool{}
	for _, c := range s.Classes {
		for k := range c.PerSample {
			n, err := strconv.Atoi(k)
			if err == nil && !seen[n] {
				seen[n] = true
				ns = append(ns, n)
			}
		}
	}
	if len(ns) == 0 {
		return t
	}
	sort.Ints(ns)
	t.Head = []string{"class"}
	for _, n := range ns {
		t.Head = append(t.Head, strconv.Itoa(n))
	}
	for i, c := range s.Classes {
		if len(c.PerSample) == 0 || (c.ID == 0 && c.Objects == 0) {
			continue // background has no objects to count
		}
		name := repPlain(c.Name)
		name.Swatch = repSwatch(colors, c.ID)
		row := []repCell{name}
		for _, n := range ns {
			k := strconv.Itoa(n)
			if m, ok := c.PerSample[k]; ok {
				row = append(row, repInt(fmt.Sprintf("classes.%d.per_sample.%s", i, k), int64(m)))
			} else {
				row = append(row, repPlainNum("0")) // no sample has n of them
			}
		}
		t.Rows = append(t.Rows, row)
	}
	return t
}

func repTargets(s *Stats) repTable {
	t := repTable{ID: "targets", Empty: "No targets.", Head: []string{"target", "type", "count", "min", "max", "mean", "std", "distinct"}}
	for i, g := range s.Targets {
		p := fmt.Sprintf("targets.%d.", i)
		// "numeric" or "text", as `trueset stats` says it; data-value is
		// the JSON's boolean "numeric".
		kind := repCell{Stat: p + "numeric", Value: strconv.FormatBool(g.Numeric), Text: g.Type()}
		row := []repCell{repText(p+"name", g.Name), kind, repInt(p+"count", int64(g.Count))}
		if g.Numeric {
			row = append(row, repNumWhole(p+"min", g.Min, 4), repNumWhole(p+"max", g.Max, 4), repNum(p+"mean", g.Mean, 4), repNum(p+"std", g.Std, 4))
		} else {
			row = append(row, repPlainNum("–"), repPlainNum("–"), repPlainNum("–"), repPlainNum("–"))
		}
		row = append(row, repInt(p+"distinct", int64(g.Distinct)))
		t.Rows = append(t.Rows, row)
	}
	return t
}

const (
	repMaxLeakRows = 100
	repMaxSpanned  = 100
)

func repLeakage(v *reportView, s *Stats) {
	l := s.Leakage
	v.Leakage = []repFact{
		{"Method", repText("leakage.method", l.Method)},
		{"Search", repText("leakage.index", l.Index)},
		{"Images hashed", repInt("leakage.images", int64(l.Images))},
		{"Threshold (Hamming distance)", repInt("leakage.threshold", int64(l.Threshold))},
		{"Candidate pairs (within the threshold)", repInt("leakage.candidates", int64(l.Candidates))},
		{"Confirmed by", repText("leakage.confirm", l.Confirm)},
		{"Pairs across splits (confirmed)", repInt("leakage.pairs_found", int64(l.PairsFound))},
		{"Pairs listed", repInt("leakage.pairs.len", int64(len(l.Pairs)))},
		{"Groups in more than one split", repInt("leakage.groups_spanning_splits.len", int64(len(l.GroupsSpanned)))},
	}
	t := repTable{ID: "leak-pairs", Head: []string{"sample", "split", "sample", "split", "dHash distance", "mean abs. difference", "same SHA-256"},
		Empty: "No near-duplicate images across splits."}
	for i, p := range l.Pairs {
		if i == repMaxLeakRows {
			t.More = len(l.Pairs) - i
			break
		}
		q := fmt.Sprintf("leakage.pairs.%d.", i)
		t.Rows = append(t.Rows, []repCell{repText(q+"a", p.A), repText(q+"split_a", p.SplitA), repText(q+"b", p.B), repText(q+"split_b", p.SplitB), repInt(q+"distance", int64(p.Distance)),
			repNum(q+"mean_abs_diff", p.MeanAbsDiff, 2), repBool(q+"identical", p.Identical)})
	}
	v.LeakPairs = t
	v.Spanned = l.GroupsSpanned
	if len(v.Spanned) > repMaxSpanned {
		v.SpannedCut = len(v.Spanned) - repMaxSpanned
		v.Spanned = v.Spanned[:repMaxSpanned]
	}
}

// ---- charts ----

// Charts are drawn at twice their CSS size so they stay sharp on dense
// screens: a CSS pixel is 0.75 pt, and 192 dpi makes 2 image pixels of it.
const repChartDPI = 192

func repPt(px int) vg.Length { return vg.Length(px) * 0.75 }

var repSplitColors = []color.RGBA{
	// Okabe & Ito (2008), "Color Universal Design": color-blind safe.
	{0, 114, 178, 255},   // blue
	{230, 159, 0, 255},   // orange
	{0, 158, 115, 255},   // bluish green
	{204, 121, 167, 255}, // reddish purple
	{86, 180, 233, 255},  // sky blue
	{213, 94, 0, 255},    // vermillion
	{240, 228, 66, 255},  // yellow
}

// repBarOutline is the dark edge of every bar, so a bar in a near-white
// class color (a die, paper) or a light split color still shows on the
// white chart.
func repBarOutline() draw.LineStyle {
	return draw.LineStyle{Color: color.Gray{40}, Width: vg.Points(0.75)}
}

// repFont is Liberation Sans (embedded in gonum/plot) at size points.
func repFont(size float64, bold bool) font.Font {
	f := font.Font{Typeface: "Liberation", Variant: "Sans", Size: vg.Points(size)}
	if bold {
		f.Weight = xfont.WeightBold
	}
	return f
}

func repPlot(title, x, y string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.Title.TextStyle.Font = repFont(13, true)
	p.Title.Padding = vg.Points(10)
	p.X.Label.Text = x
	p.Y.Label.Text = y
	p.X.Label.TextStyle.Font = repFont(11, false)
	p.Y.Label.TextStyle.Font = repFont(11, false)
	p.X.Tick.Label.Font = repFont(10, false)
	p.Y.Tick.Label.Font = repFont(10, false)
	p.Y.Min = 0
	p.X.Padding = 0
	p.Y.Padding = 0
	grid := plotter.NewGrid()
	grid.Vertical.Width = 0 // horizontal lines only: bars need no vertical ones
	grid.Horizontal.Color = color.Gray{215}
	p.Add(grid)
	p.Legend.Top = true
	p.Legend.TextStyle.Font = repFont(10, false)
	p.Legend.ThumbnailWidth = vg.Points(14)
	p.Legend.XOffs = -vg.Points(6)
	p.Legend.YOffs = -vg.Points(4)
	return p
}

// repIntegerTicks labels whole numbers only (counts are whole), about
// five of them, at steps of 1, 2 or 5 times a power of ten.
func repIntegerTicks(lo, hi float64) []plot.Tick {
	step := 1.0
	for p := 1.0; ; p *= 10 {
		found := false
		for _, m := range []float64{1, 2, 5} {
			if (hi-lo)/(m*p) <= 6 {
				step, found = m*p, true
				break
			}
		}
		if found {
			break
		}
	}
	var out []plot.Tick
	for v := math.Ceil(lo/step) * step; v <= hi+1e-9; v += step {
		out = append(out, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'f', 0, 64)})
	}
	return out
}

func repRender(p *plot.Plot, wpx, hpx int, alt string) (repChart, error) {
	c := vgimg.NewWith(vgimg.UseWH(repPt(wpx), repPt(hpx)), vgimg.UseDPI(repChartDPI), vgimg.UseBackgroundColor(color.White))
	p.Draw(draw.New(c))
	uri, err := repPNGURI(c.Image())
	if err != nil {
		return repChart{}, err
	}
	return repChart{URI: uri, Width: wpx, Height: hpx, Alt: alt}, nil
}

func repPNGURI(img image.Image) (template.URL, error) {
	var buf bytes.Buffer
	enc := png.Encoder{CompressionLevel: png.DefaultCompression}
	if err := enc.Encode(&buf, img); err != nil {
		return "", err
	}
	// A data: URI of our own PNG bytes, base64 only: safe as a URL.
	return template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(buf.Bytes())), nil
}

// repStrataChart is a grouped bar chart: per stratum, one bar per split, of
// the groups dealt to it.
func repStrataChart(s *Stats) (repChart, bool, error) {
	st := s.Splits
	if len(st.Strata) == 0 || len(st.Names) == 0 {
		return repChart{}, false, nil
	}
	labels, axis := repStrataLabels(st)
	n, k := len(st.Strata), len(st.Names)
	// Bars are 4 to 22 CSS px wide, a bar's width apart between strata.
	bar := max(4, min(22, (1100-140)/(n*(k+1))))
	width := max(560, min(1100, n*(k+1)*bar+140))
	p := repPlot("Groups per stratum and split", axis, "groups")
	p.Y.Tick.Marker = plot.TickerFunc(repIntegerTicks)
	top := 0
	for _, r := range st.Strata {
		for _, name := range st.Names {
			top = max(top, r.Splits[name])
		}
	}
	p.Y.Max = math.Max(1, float64(top)) * (1.1 + 0.09*float64(k)) // room for the legend
	p.X.Min, p.X.Max = -0.5, float64(n)-0.5
	w := repPt(bar)
	for j, name := range st.Names {
		vals := make(plotter.Values, n)
		for i, r := range st.Strata {
			vals[i] = float64(r.Splits[name])
		}
		b, err := plotter.NewBarChart(vals, w)
		if err != nil {
			return repChart{}, false, err
		}
		b.Color = repSplitColors[j%len(repSplitColors)]
		b.LineStyle = repBarOutline()
		b.Offset = vg.Length(float64(j)-float64(k-1)/2) * w
		p.Add(b)
		p.Legend.Add(name, b)
	}
	p.NominalX(labels...)
	repFitLabels(p, labels, repPt((width-140)/n))
	c, err := repRender(p, width, 360, "grouped bar chart of groups per stratum, one bar per split")
	return c, err == nil, err
}

// repFitLabels turns the x tick labels by 45° when the widest one does not
// fit its slot.
func repFitLabels(p *plot.Plot, labels []string, slot vg.Length) {
	widest := vg.Length(0)
	for _, l := range labels {
		widest = max(widest, p.X.Tick.Label.Width(l))
	}
	if widest > slot*0.9 {
		p.X.Tick.Label.Rotation = math.Pi / 4
		p.X.Tick.Label.XAlign = draw.XRight
		p.X.Tick.Label.YAlign = draw.YTop
	}
}

// repClassBars draws one bar per class in its own color, a label above each.
func repClassBars(p *plot.Plot, width int, classes []ClassStats, colors map[int]color.RGBA, value func(ClassStats) float64, label func(ClassStats) string) error {
	bar := repPt(max(8, min(48, (width-120)*6/10/max(1, len(classes)))))
	p.X.Min, p.X.Max = -0.5, float64(len(classes))-0.5
	names := make([]string, len(classes))
	xys := make(plotter.XYs, len(classes))
	texts := make([]string, len(classes))
	for i, c := range classes {
		names[i] = c.Name
		b, err := plotter.NewBarChart(plotter.Values{value(c)}, bar)
		if err != nil {
			return err
		}
		col, ok := colors[c.ID]
		if !ok {
			col = color.RGBA{128, 128, 128, 255}
		}
		b.Color = col
		b.LineStyle = repBarOutline()
		b.XMin = float64(i)
		p.Add(b)
		xys[i] = plotter.XY{X: float64(i), Y: value(c)}
		texts[i] = label(c)
	}
	l, err := plotter.NewLabels(plotter.XYLabels{XYs: xys, Labels: texts})
	if err != nil {
		return err
	}
	for i := range l.TextStyle {
		l.TextStyle[i].XAlign = draw.XCenter
		l.TextStyle[i].Font = repFont(9, false)
	}
	l.Offset = vg.Point{Y: vg.Points(3)}
	p.Add(l)
	p.NominalX(names...)
	repFitLabels(p, names, repPt((width-120)/max(1, len(classes))))
	return nil
}

func repClassChartWidth(n int) int { return min(1100, max(480, n*56+120)) }

func repFrequencyChart(s *Stats, colors map[int]color.RGBA) (repChart, bool, error) {
	if len(s.Classes) == 0 {
		return repChart{}, false, nil
	}
	split := s.Pixels.Split
	if split == "" {
		split = "train"
	}
	p := repPlot("Class pixel frequency ("+split+" split)", "class", "share of labeled pixels (%)")
	top := 0.0
	for _, c := range s.Classes {
		top = max(top, 100*c.Frequency)
	}
	p.Y.Max = top * 1.12 // room for the labels
	width := repClassChartWidth(len(s.Classes))
	err := repClassBars(p, width, s.Classes, colors, func(c ClassStats) float64 { return 100 * c.Frequency },
		func(c ClassStats) string { return repFixed(100*c.Frequency, 2) + "%" })
	if err != nil {
		return repChart{}, false, err
	}
	c, err := repRender(p, width, 340, "bar chart of each class's share of the labeled mask pixels")
	return c, err == nil, err
}

func repObjectsChart(s *Stats, colors map[int]color.RGBA) (repChart, bool, error) {
	var cs []ClassStats
	top := 0
	for _, c := range s.Classes {
		if c.ID == 0 && c.Objects == 0 {
			continue // background has no objects
		}
		cs = append(cs, c)
		top = max(top, c.Objects)
	}
	if len(cs) == 0 {
		return repChart{}, false, nil
	}
	p := repPlot("Objects per class (all splits)", "class", "objects")
	p.Y.Tick.Marker = plot.TickerFunc(repIntegerTicks)
	p.Y.Max = math.Max(1, float64(top)*1.12)
	width := repClassChartWidth(len(cs))
	err := repClassBars(p, width, cs, colors, func(c ClassStats) float64 { return float64(c.Objects) },
		func(c ClassStats) string { return repGrouped(int64(c.Objects)) })
	if err != nil {
		return repChart{}, false, err
	}
	c, err := repRender(p, width, 340, "bar chart of the number of objects of each class")
	return c, err == nil, err
}

// ---- the page ----

var reportTemplate = template.Must(template.New("report").Parse(reportHTML))

const reportHTML = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="trueset">
<title>{{.Title}}</title>
<style>
:root { --ink: #1d232b; --muted: #5b6673; --line: #d6dbe1; --band: #f3f5f8; --accent: #0b6bcb; --warn: #8a4b00; --warnbg: #fff4e0; }
* { box-sizing: border-box; }
body { margin: 0; font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "Liberation Sans", "DejaVu Sans", sans-serif; color: var(--ink); background: #fff; }
main { max-width: 1160px; margin: 0 auto; padding: 28px 32px 64px; }
header h1 { font-size: 30px; margin: 0 0 2px; letter-spacing: -0.01em; }
header .sub { color: var(--muted); margin: 0 0 18px; }
nav { border-top: 1px solid var(--line); border-bottom: 1px solid var(--line); padding: 8px 0; margin-bottom: 8px; }
nav a { color: var(--accent); text-decoration: none; margin-right: 18px; white-space: nowrap; }
h2 { font-size: 21px; margin: 38px 0 10px; padding-bottom: 4px; border-bottom: 2px solid var(--ink); }
h3 { font-size: 16px; margin: 22px 0 8px; }
p.note { color: var(--muted); margin: 6px 0 12px; max-width: 80ch; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 4px 18px; margin: 0; }
dl.facts dt { color: var(--muted); }
dl.facts dd { margin: 0; font-variant-numeric: tabular-nums; }
.scroll { overflow-x: auto; max-width: 100%; }
.scroll.tall { max-height: 560px; overflow-y: auto; display: inline-block; border-bottom: 1px solid var(--line); }
.scroll.tall thead th { position: sticky; top: 0; z-index: 1; }
table { border-collapse: collapse; margin: 6px 0 14px; font-variant-numeric: tabular-nums; }
th, td { padding: 5px 12px; border-bottom: 1px solid var(--line); text-align: left; white-space: nowrap; }
thead th { background: var(--band); border-bottom: 2px solid #aab3bd; font-weight: 600; font-size: 13px; color: #2d3640; }
tbody tr:nth-child(even) td { background: #fafbfc; }
tfoot td { border-top: 2px solid #aab3bd; font-weight: 600; }
td.num, th.num { text-align: right; }
td.mono { font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: 13px; }
.sw { display: inline-block; width: 12px; height: 12px; border: 1px solid #444; border-radius: 2px; margin-right: 7px; vertical-align: -1px; }
figure { margin: 12px 0 18px; }
figure img { display: block; max-width: 100%; height: auto; border: 1px solid var(--line); }
figcaption { color: var(--muted); font-size: 13px; margin-top: 4px; }
.charts { display: flex; flex-wrap: wrap; gap: 18px; }
.side { display: flex; flex-wrap: wrap; gap: 8px 48px; align-items: flex-start; }
img.sheet { border: 0; }
.slot { border: 2px dashed var(--line); color: var(--muted); padding: 36px; text-align: center; max-width: 640px; }
.warnings { background: var(--warnbg); border-left: 4px solid #e69f00; padding: 10px 16px; margin: 16px 0; color: var(--warn); }
.warnings ul { margin: 4px 0 0; padding-left: 20px; }
.ok { color: #006b4a; }
pre { background: var(--band); border: 1px solid var(--line); padding: 12px 14px; overflow-x: auto; font: 12.5px/1.45 ui-monospace, "DejaVu Sans Mono", monospace; max-height: 640px; }
ul.ids { columns: 4 12ch; font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: 13px; }
</style>
</head>
<body>
<main>
<header>
<h1 id="dataset-name">{{.Name}}</h1>
<p class="sub">trueset dataset report · <code>{{.Folder}}</code></p>
</header>
<nav><a href="#overview">Overview</a><a href="#preview">Preview</a><a href="#splits">Splits</a><a href="#pixels">Normalization</a><a href="#classes">Classes</a><a href="#targets">Targets</a><a href="#leakage">Leakage</a><a href="#recipe">Recipe</a></nav>

<section id="overview">
<h2>Overview</h2>
<dl class="facts">{{range .Facts}}
<dt>{{.Label}}</dt>{{template "dd" .Cell}}{{end}}
</dl>
{{if .Warnings}}<div class="warnings" id="warnings"><strong>Warnings</strong><ul>{{range .Warnings}}<li>{{.}}</li>{{end}}</ul></div>{{else}}<p class="ok" id="warnings">No warnings.</p>{{end}}
</section>

<section id="preview">
<h2>Preview</h2>
{{if .Sheet}}<figure><img class="sheet" src="{{.Sheet}}" width="{{.SheetW}}" alt="contact sheet of samples">{{if .SheetCap}}<figcaption>{{.SheetCap}}</figcaption>{{end}}</figure>
{{else}}<div class="slot">No contact sheet in this report.</div>{{end}}
</section>

<section id="splits-section">
<h2 id="splits">Splits</h2>
{{template "table" .Splits}}
{{with index .Charts "strata"}}<figure><img src="{{.URI}}" width="{{.Width}}" height="{{.Height}}" alt="{{.Alt}}"></figure>{{end}}
<h3>Strata × splits (groups)</h3>
{{if .StrataNote}}<p class="note">{{.StrataNote}}</p>{{end}}
{{template "table" .Strata}}
</section>

<section id="pixels-section">
<h2 id="pixels">Normalization</h2>
{{if .PixelsNote}}<p class="note">{{.PixelsNote}}</p>{{end}}
{{template "table" .Pixels}}
</section>

<section id="classes-section">
<h2 id="classes">Classes</h2>
<p class="note">Pixels and frequency count mask pixels of the {{.StatsSplit}} split (the ignore id excluded). Weight 1/f is inverse frequency scaled so the classes present average 1; weight median-f is median-frequency balancing (Eigen &amp; Fergus 2015). Objects and areas are over all splits.</p>
<dl class="facts">{{range .ClassFacts}}
<dt>{{.Label}}</dt>{{template "dd" .Cell}}{{end}}
</dl>
{{template "table" .Classes}}
<div class="charts">
{{with index .Charts "frequency"}}<figure><img src="{{.URI}}" width="{{.Width}}" height="{{.Height}}" alt="{{.Alt}}"></figure>{{end}}
{{with index .Charts "objects"}}<figure><img src="{{.URI}}" width="{{.Width}}" height="{{.Height}}" alt="{{.Alt}}"></figure>{{end}}
</div>
<div class="side">
<div><h3>Objects per class and split</h3>
{{template "table" .ObjectsBySplit}}</div>
<div><h3>Samples by number of objects of a class</h3>
{{template "table" .PerSample}}</div>
</div>
</section>

<section id="targets-section">
<h2 id="targets">Targets</h2>
{{if .TargetSplit}}<p class="note">Over the {{.TargetSplit}} split: count is the samples carrying the target; min, max, mean and std (population) are over its numeric values.</p>{{end}}
{{template "table" .Targets}}
<h3>Loss scales</h3>
<p class="note">{{.LossScaleNote}}</p>
{{template "table" .LossScales}}
</section>

<section id="leakage-section">
<h2 id="leakage">Leakage</h2>
<p class="note">Images in different splits whose 64-bit difference hashes (dHash) differ in at most the threshold number of bits are candidates; a candidate counts as a leak once the two images also agree at full size. Groups found in more than one split are listed too.</p>
<dl class="facts">{{range .Leakage}}
<dt>{{.Label}}</dt>{{template "dd" .Cell}}{{end}}
</dl>
<h3>Near-duplicate pairs</h3>
{{template "table" .LeakPairs}}
{{if .Spanned}}<h3>Groups in more than one split</h3>
<ul class="ids" id="groups-spanning">{{range .Spanned}}<li>{{.}}</li>{{end}}</ul>{{if .SpannedCut}}<p class="note">… and {{.SpannedCut}} more.</p>{{end}}{{end}}
</section>

{{if .Planted}}<section id="instruments-section">
<h2 id="instruments">Instruments</h2>
<p class="note">What the recipe planted, read back from the written files: label-noise rates, held-out samples and the bait cue measured in the images against its target (Pearson r), per split.</p>
{{range .Planted}}{{template "table" .}}{{end}}
</section>
{{end}}
<section id="recipe-section">
<h2 id="recipe">Recipe</h2>
{{if .RecipeNote}}<p class="note">{{.RecipeNote}}</p>{{end}}
{{if .Recipe}}<pre id="recipe-yaml">{{.Recipe}}</pre>{{end}}
{{if .Plan}}<h3>Augmentation plan</h3>
<pre id="plan-yaml">{{.Plan}}</pre>{{end}}
</section>
</main>
</body>
</html>
{{define "dd"}}<dd{{if .Stat}} data-stat="{{.Stat}}" data-value="{{.Value}}"{{end}}{{if .Title}} title="{{.Title}}"{{end}}>{{.Text}}</dd>{{end}}
{{define "td"}}<td{{if .Stat}} data-stat="{{.Stat}}" data-value="{{.Value}}"{{end}}{{if .Num}} class="num"{{end}}{{if .Title}} title="{{.Title}}"{{end}}>{{if .Swatch}}<span class="sw" style="background: {{.Swatch}}"></span>{{end}}{{.Text}}</td>{{end}}
{{define "table"}}{{if .Rows}}<div class="scroll{{if .Tall}} tall{{end}}"><table id="table-{{.ID}}">
<thead><tr>{{range $i, $h := .Head}}<th{{if $.NumCol $i}} class="num"{{end}}>{{$h}}</th>{{end}}</tr></thead>
<tbody>{{range .Rows}}
<tr>{{range .}}{{template "td" .}}{{end}}</tr>{{end}}
</tbody>{{if .Foot}}
<tfoot><tr>{{range .Foot}}{{template "td" .}}{{end}}</tr></tfoot>{{end}}
</table></div>{{if .More}}<p class="note">… and {{.More}} more rows.</p>{{end}}{{else}}<p class="note" id="table-{{.ID}}-empty">{{.Empty}}</p>{{end}}{{end}}
`
