package inspect

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"unicode/utf8"

	"golang.org/x/image/font"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/font/opentype"
	fx "golang.org/x/image/math/fixed"

	"github.com/trueset/trueset/manifest"
)

// Contact sheet layout, in sheet pixels.
const (
	DefaultPreviewCount = 16
	// PreviewCell is the target length of a cell's longer side: images are
	// scaled by the integer nearest PreviewCell / their longer side (at
	// least 1; larger images are shrunk by an integer factor instead).
	PreviewCell = 192
	// OverlayAlpha is the opacity of the class-color tint over the image.
	OverlayAlpha = 0.45
	// MaxPreviewCount bounds the samples on one sheet.
	MaxPreviewCount = 400

	sheetMargin  = 10
	cellGap      = 10
	fontSize     = 12
	lineHeight   = 15
	captionLines = 2 // lines kept for captions at least; longer ones wrap onto more
	swatchSize   = 12
)

// The sheet's palette: a light page with dark text.
var (
	pageColor   = color.RGBA{246, 246, 244, 255}
	textColor   = color.RGBA{32, 32, 32, 255}
	mutedColor  = color.RGBA{110, 110, 110, 255}
	frameColor  = color.RGBA{190, 190, 190, 255}
	ignoreColor = color.RGBA{150, 150, 150, 255}
	emptyColor  = color.RGBA{228, 228, 226, 255}
)

// PreviewOptions choose the samples of a contact sheet.
type PreviewOptions struct {
	Split string // the split to draw from; "" = DefaultSplit; "all" = every split
	Count int    // samples; 0 = DefaultPreviewCount
	Seed  uint64 // seeds the shuffle that picks them
}

// Sheet is a rendered contact sheet.
type Sheet struct {
	Image  *image.RGBA
	IDs    []string        // the samples shown, in grid order (row by row)
	Of     int             // records in the split
	Cols   int             // grid columns
	Rows   int             // grid rows
	Cell   image.Point     // size of one cell's picture
	Scale  string          // "×3", or "÷2" for shrunk images
	Legend image.Rectangle // the legend rows at the bottom
	// Captions holds each cell's caption as drawn, wrapped to the cell
	// width: the id (and split), then the targets as name=value.
	Captions [][]string
}

// Preview draws a contact sheet of o.Count samples of a split, chosen by a
// Fisher–Yates shuffle seeded with manifest.RNG(o.Seed) and shown in index
// order: each cell is the image scaled with nearest neighbor, tinted with
// the semantic mask's class colors (background untinted, the ignore id and
// unknown ids hatched gray), each object's box outlined in its class
// color, and a caption of the id and targets, wrapped onto as many lines as
// it needs (never cut); a legend of class colors
// closes the sheet. The manifest is read twice (count, then pick) so only
// the chosen records are held.
func Preview(dir string, o PreviewOptions) (*Sheet, error) {
	if o.Split == "" {
		o.Split = DefaultSplit
	}
	if o.Count == 0 {
		o.Count = DefaultPreviewCount
	}
	if o.Count < 1 || o.Count > MaxPreviewCount {
		return nil, fmt.Errorf("count %d: want 1..%d", o.Count, MaxPreviewCount)
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return nil, err
	}
	all := o.Split == "all"
	in := func(r *manifest.Record) bool { return all || r.Split == o.Split }
	n := 0
	if err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		if in(r) {
			n++
		}
		return nil
	}); err != nil {
		return nil, err
	}
	if n == 0 {
		return nil, fmt.Errorf("split %s has no records (splits: %s)", o.Split, strings.Join(d.Splits.Names, ", "))
	}
	k := min(o.Count, n)
	// Partial Fisher–Yates over the split's positions: the first k of a
	// uniform random permutation.
	rng := manifest.RNG(o.Seed, 0x70726576) // "prev"
	perm := make([]int, n)
	for i := range perm {
		perm[i] = i
	}
	for i := 0; i < k; i++ {
		j := i + rng.IntN(n-i)
		perm[i], perm[j] = perm[j], perm[i]
	}
	chosen := map[int]bool{}
	for _, p := range perm[:k] {
		chosen[p] = true
	}
	var recs []*manifest.Record
	pos := 0
	if err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
		if in(r) {
			if chosen[pos] {
				recs = append(recs, r)
			}
			pos++
		}
		return nil
	}); err != nil {
		return nil, err
	}

	// Cell size and scale from the largest chosen image.
	maxW, maxH := 1, 1
	for _, r := range recs {
		maxW, maxH = max(maxW, r.Width), max(maxH, r.Height)
	}
	num, den := 1, 1
	if long := max(maxW, maxH); long <= PreviewCell {
		num = max(1, int(math.Round(float64(PreviewCell)/float64(long))))
	} else {
		den = (long + PreviewCell - 1) / PreviewCell
	}
	cw, ch := maxW*num/den, maxH*num/den
	scale := fmt.Sprintf("×%d", num)
	if den > 1 {
		scale = fmt.Sprintf("÷%d", den)
	}

	face, err := previewFace()
	if err != nil {
		return nil, err
	}
	defer face.Close()
	// Captions wrap to the cell width, never cut: every cell keeps room
	// for the longest (and at least captionLines lines).
	captions := make([][]string, len(recs))
	lines := captionLines
	for i, r := range recs {
		captions[i] = wrapWords(face, caption(d, r, all), cw, "  ")
		lines = max(lines, len(captions[i]))
	}
	// A roughly square grid: of the column counts around the square one,
	// the one leaving the fewest empty cells, the wider on a tie.
	cellH := ch + 4 + lines*lineHeight
	sq := math.Sqrt(float64(k) * float64(cellH+cellGap) / float64(cw+cellGap))
	cols, empty := 0, k
	for c := max(1, int(sq)); c <= int(sq)+2; c++ {
		cc := min(c, k)
		if e := (k+cc-1)/cc*cc - k; e <= empty {
			cols, empty = cc, e
		}
	}
	rows := (k + cols - 1) / cols
	width := 2*sheetMargin + cols*cw + (cols-1)*cellGap
	width = max(width, 360)

	classes := append([]manifest.Class(nil), d.Classes...)
	sort.SliceStable(classes, func(i, j int) bool { return classes[i].ID < classes[j].ID })
	classColor := map[int]color.RGBA{}
	for _, c := range classes {
		classColor[c.ID] = color.RGBA{c.Color[0], c.Color[1], c.Color[2], 255}
	}
	legendItems := legendLayout(face, classes, width)
	legendH := legendItems.rows * (lineHeight + 4)

	what := "split " + o.Split
	if all {
		what = "all splits"
	}
	title := func(name string) string {
		return fmt.Sprintf("%s — %s: %d of %d samples, seed %d, scale %s", name, what, k, n, o.Seed, scale)
	}
	head := title(dir)
	if font.MeasureString(face, head).Ceil() > width-2*sheetMargin {
		head = title(filepath.Base(filepath.Clean(dir)))
	}
	// The title wraps too (a narrow sheet, a long folder name).
	headLines := wrapWords(face, strings.Split(head, " "), width-2*sheetMargin, " ")
	titleH := len(headLines)*lineHeight + 8
	gridTop := sheetMargin + titleH
	gridH := rows*cellH + (rows-1)*cellGap
	legendTop := gridTop + gridH + cellGap
	height := legendTop + legendH + sheetMargin

	sheet := image.NewRGBA(image.Rect(0, 0, width, height))
	fill(sheet, sheet.Bounds(), pageColor)
	for i, l := range headLines {
		drawText(sheet, face, sheetMargin, sheetMargin+fontSize+i*lineHeight, l, textColor)
	}

	b := newBudget(RunBudgetBytes)
	s := &Sheet{Image: sheet, Of: n, Cols: cols, Rows: rows, Cell: image.Pt(cw, ch), Scale: scale,
		Legend: image.Rect(0, legendTop, width, legendTop+legendH)}
	for i, r := range recs {
		x0 := sheetMargin + (i%cols)*(cw+cellGap)
		y0 := gridTop + (i/cols)*(cellH+cellGap)
		cell := image.Rect(x0, y0, x0+cw, y0+ch)
		fill(sheet, cell, emptyColor)
		if err := drawCell(sheet, cell, dir, r, num, den, classColor, b); err != nil {
			return nil, fmt.Errorf("record %s: %w", r.ID, err)
		}
		outline(sheet, cell.Inset(-1), frameColor)
		drawCaption(sheet, face, image.Pt(x0, y0+ch+4), captions[i])
		s.Captions = append(s.Captions, captions[i])
		s.IDs = append(s.IDs, r.ID)
	}
	legendItems.draw(sheet, face, legendTop)
	return s, nil
}

// drawCell paints one sample into cell: image, tint, hatching, boxes.
func drawCell(dst *image.RGBA, cell image.Rectangle, dir string, r *manifest.Record, num, den int, classColor map[int]color.RGBA, bud *budget) error {
	// Both files opened through safefile and their headers checked against
	// the record before either is decoded; one cell at a time, within the
	// run's budget.
	imf, icfg, err := openImage(dir, r.Image, r.Width, r.Height)
	if err != nil {
		return err
	}
	mkf, mcfg, err := openMask(dir, r.Mask, r.Width, r.Height)
	if err != nil {
		imf.Close()
		return err
	}
	need := manifest.DecodedBytes(icfg) + manifest.DecodedBytes(mcfg)
	if err := bud.acquire(need); err != nil {
		imf.Close()
		mkf.Close()
		return fmt.Errorf("%s: %w", r.Image, err)
	}
	defer bud.release(need)
	img, err := decodeClose(imf)
	if err != nil {
		mkf.Close()
		return err
	}
	mk, err := decodeClose(mkf)
	if err != nil {
		return err
	}
	var maskPix []uint8
	var maskStride int
	switch m := mk.(type) {
	case *image.Paletted:
		maskPix, maskStride = m.Pix, m.Stride
	case *image.Gray:
		maskPix, maskStride = m.Pix, m.Stride
	default:
		return fmt.Errorf("%s: semantic mask is not an 8-bit indexed or gray PNG", r.Mask)
	}
	w, h := r.Width*num/den, r.Height*num/den
	b := img.Bounds()
	const a = OverlayAlpha
	for Y := 0; Y < h; Y++ {
		sy := Y * den / num
		for X := 0; X < w; X++ {
			sx := X * den / num
			c := color.RGBAModel.Convert(img.At(b.Min.X+sx, b.Min.Y+sy)).(color.RGBA)
			id := int(maskPix[sy*maskStride+sx])
			px, py := cell.Min.X+X, cell.Min.Y+Y
			if id != 0 {
				cc, known := classColor[id]
				switch {
				case id == manifest.IgnoreID || !known:
					if (px+py)/3%2 == 0 {
						c = ignoreColor
					}
				default:
					c = color.RGBA{blend(c.R, cc.R, a), blend(c.G, cc.G, a), blend(c.B, cc.B, a), 255}
				}
			}
			dst.SetRGBA(px, py, c)
		}
	}
	for _, ob := range r.Objects {
		cc, ok := classColor[ob.Class]
		if !ok {
			cc = color.RGBA{255, 0, 255, 255}
		}
		bx := image.Rect(ob.Box[0]*num/den, ob.Box[1]*num/den, ob.Box[2]*num/den, ob.Box[3]*num/den)
		if bx.Empty() {
			continue
		}
		outline(dst, bx.Add(cell.Min).Intersect(cell), cc)
	}
	return nil
}

func blend(a, b uint8, alpha float64) uint8 {
	return uint8(math.Round((1-alpha)*float64(a) + alpha*float64(b)))
}

func fill(m *image.RGBA, r image.Rectangle, c color.RGBA) {
	r = r.Intersect(m.Bounds())
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			m.SetRGBA(x, y, c)
		}
	}
}

// outline draws the 1-pixel border just inside r.
func outline(m *image.RGBA, r image.Rectangle, c color.RGBA) {
	if r.Empty() {
		return
	}
	fill(m, image.Rect(r.Min.X, r.Min.Y, r.Max.X, r.Min.Y+1), c)
	fill(m, image.Rect(r.Min.X, r.Max.Y-1, r.Max.X, r.Max.Y), c)
	fill(m, image.Rect(r.Min.X, r.Min.Y, r.Min.X+1, r.Max.Y), c)
	fill(m, image.Rect(r.Max.X-1, r.Min.Y, r.Max.X, r.Max.Y), c)
}

// caption is the id (and split, on an all-splits sheet) and the targets in
// dataset.json's order.
func caption(d *manifest.Dataset, r *manifest.Record, split bool) []string {
	head := r.ID
	if split {
		head += "  " + r.Split
	}
	names := append([]string(nil), d.Targets...)
	known := map[string]bool{}
	for _, n := range names {
		known[n] = true
	}
	var extra []string
	for n := range r.Targets {
		if !known[n] {
			extra = append(extra, n)
		}
	}
	sort.Strings(extra)
	names = append(names, extra...)
	var parts []string
	for _, n := range names {
		if v, ok := r.Targets[n]; ok {
			parts = append(parts, n+"="+v.String())
		}
	}
	return append([]string{head}, parts...)
}

// wrapWords sets words in lines of at most w pixels: firstSep after the
// first word (two spaces after a caption's id), one space between the
// others. A word wider than w is broken between characters, so
// nothing is ever cut off.
func wrapWords(face font.Face, words []string, w int, firstSep string) []string {
	fits := func(s string) bool { return font.MeasureString(face, s).Ceil() <= w }
	var lines []string
	cur := ""
	for i, wd := range words {
		if wd == "" {
			continue
		}
		sep := " "
		if i == 1 {
			sep = firstSep
		}
		if cur != "" && fits(cur+sep+wd) {
			cur += sep + wd
			continue
		}
		if cur != "" {
			lines = append(lines, cur)
		}
		cur = ""
		for !fits(wd) && utf8.RuneCountInString(wd) > 1 {
			r := []rune(wd)
			n := len(r) - 1
			for n > 1 && !fits(string(r[:n])) {
				n--
			}
			lines = append(lines, string(r[:n]))
			wd = string(r[n:])
		}
		cur = wd
	}
	if cur != "" || len(lines) == 0 {
		lines = append(lines, cur)
	}
	return lines
}

// drawCaption sets a wrapped caption: the first line (with the id) dark,
// the rest muted.
func drawCaption(dst *image.RGBA, face font.Face, at image.Point, lines []string) {
	for i, l := range lines {
		c := textColor
		if i > 0 {
			c = mutedColor
		}
		drawText(dst, face, at.X, at.Y+fontSize+i*lineHeight, l, c)
	}
}

func drawText(dst *image.RGBA, face font.Face, x, baseline int, s string, c color.RGBA) {
	dr := font.Drawer{Dst: dst, Src: image.NewUniform(c), Face: face, Dot: fx.P(x, baseline)}
	dr.DrawString(s)
}

var (
	fontOnce sync.Once
	fontVal  *opentype.Font
	fontErr  error
)

// previewFace returns a new Go Regular face at fontSize (a Face is not safe
// for concurrent use, so each sheet gets its own; the font is parsed once).
func previewFace() (font.Face, error) {
	fontOnce.Do(func() { fontVal, fontErr = opentype.Parse(goregular.TTF) })
	if fontErr != nil {
		return nil, fontErr
	}
	return opentype.NewFace(fontVal, &opentype.FaceOptions{Size: fontSize, DPI: 72, Hinting: font.HintingFull})
}

// legend is the laid-out legend: one swatchSize and name per non-background
// class, then the ignore hatching, wrapped to the sheet width.
type legend struct {
	items []legendItem
	rows  int
}

type legendItem struct {
	x, row int
	name   string
	color  color.RGBA
	hatch  bool
}

func legendLayout(face font.Face, classes []manifest.Class, width int) legend {
	var l legend
	x, row := sheetMargin, 0
	add := func(name string, c color.RGBA, hatch bool) {
		w := swatchSize + 5 + font.MeasureString(face, name).Ceil() + 16
		if x > sheetMargin && x+w > width-sheetMargin {
			x, row = sheetMargin, row+1
		}
		l.items = append(l.items, legendItem{x: x, row: row, name: name, color: c, hatch: hatch})
		x += w
	}
	for _, c := range classes {
		if c.ID == 0 {
			continue
		}
		add(fmt.Sprintf("%d %s", c.ID, c.Name), color.RGBA{c.Color[0], c.Color[1], c.Color[2], 255}, false)
	}
	add("ignore / unknown", ignoreColor, true)
	l.rows = row + 1
	return l
}

func (l legend) draw(dst *image.RGBA, face font.Face, top int) {
	for _, it := range l.items {
		y := top + it.row*(lineHeight+4)
		sw := image.Rect(it.x, y+1, it.x+swatchSize, y+1+swatchSize)
		if it.hatch {
			fill(dst, sw, pageColor)
			for py := sw.Min.Y; py < sw.Max.Y; py++ {
				for px := sw.Min.X; px < sw.Max.X; px++ {
					if (px+py)/3%2 == 0 {
						dst.SetRGBA(px, py, it.color)
					}
				}
			}
		} else {
			fill(dst, sw, it.color)
		}
		outline(dst, sw.Inset(-1), mutedColor)
		drawText(dst, face, sw.Max.X+5, y+fontSize, it.name, textColor)
	}
}
