package inspect

import (
	"fmt"
	"image"
	"image/color"

	"github.com/trueset/trueset/manifest"
)

// PanelRow is one row of a panel sheet: pictures side by side (nil for an
// empty cell) and a caption under them.
type PanelRow struct {
	Caption  []string
	Pictures []image.Image
}

// PanelCell is the target length of a panel picture's longer side.
const PanelCell = 160

// MaxPanelRows bounds the rows of one panel sheet.
const MaxPanelRows = 400

// PanelSheet draws rows of pictures under column headers, on the contact
// sheet's page with its font, frames, wrapped captions and class legend:
// `trueset readback` shows each flagged sample's source, the loader's image
// and the loader's mask this way. Each picture is scaled by nearest
// neighbor by the integer nearest PanelCell / its longer side (at least 1;
// larger pictures shrink by an integer factor instead).
func PanelSheet(title string, headers []string, rows []PanelRow, classes []manifest.Class) (*image.RGBA, error) {
	if len(rows) == 0 || len(rows) > MaxPanelRows {
		return nil, fmt.Errorf("%d rows: want 1..%d", len(rows), MaxPanelRows)
	}
	face, err := previewFace()
	if err != nil {
		return nil, err
	}
	defer face.Close()
	cols := len(headers)
	// Every picture's scaled size; a column is as wide as its widest.
	type scaled struct{ num, den, w, h int }
	scale := func(m image.Image) scaled {
		b := m.Bounds()
		long := max(b.Dx(), b.Dy())
		num, den := max(1, (PanelCell+long/2)/long), 1
		if long > PanelCell {
			num, den = 1, (long+PanelCell-1)/PanelCell
		}
		return scaled{num, den, b.Dx() * num / den, b.Dy() * num / den}
	}
	colW := make([]int, cols)
	rowH := make([]int, len(rows))
	for i, r := range rows {
		for c := 0; c < cols && c < len(r.Pictures); c++ {
			if r.Pictures[c] == nil {
				continue
			}
			s := scale(r.Pictures[c])
			colW[c] = max(colW[c], s.w)
			rowH[i] = max(rowH[i], s.h)
		}
	}
	width := sheetMargin
	for _, w := range colW {
		width += max(w, 60) + cellGap
	}
	width += sheetMargin - cellGap
	width = max(width, 320)
	captions := make([][]string, len(rows))
	height := sheetMargin + lineHeight + 6 + lineHeight + 4
	for i, r := range rows {
		var lines []string
		for _, c := range r.Caption {
			lines = append(lines, wrapWords(face, []string{c}, width-2*sheetMargin, " ")...)
		}
		captions[i] = lines
		height += rowH[i] + 4 + len(lines)*lineHeight + cellGap
	}
	leg := legendLayout(face, classes, width)
	legendTop := height
	height += leg.rows*(lineHeight+4) + sheetMargin
	sheet := image.NewRGBA(image.Rect(0, 0, width, height))
	fill(sheet, sheet.Bounds(), pageColor)
	drawText(sheet, face, sheetMargin, sheetMargin+fontSize, title, textColor)
	y := sheetMargin + lineHeight + 6
	x := sheetMargin
	for c, h := range headers {
		drawText(sheet, face, x, y+fontSize, h, mutedColor)
		x += max(colW[c], 60) + cellGap
	}
	y += lineHeight + 4
	for i, r := range rows {
		x := sheetMargin
		for c := 0; c < cols; c++ {
			cw := max(colW[c], 60)
			if c < len(r.Pictures) && r.Pictures[c] != nil {
				m := r.Pictures[c]
				s := scale(m)
				b := m.Bounds()
				for Y := 0; Y < s.h; Y++ {
					for X := 0; X < s.w; X++ {
						cc := color.RGBAModel.Convert(m.At(b.Min.X+X*s.den/s.num, b.Min.Y+Y*s.den/s.num)).(color.RGBA)
						sheet.SetRGBA(x+X, y+Y, cc)
					}
				}
				outline(sheet, image.Rect(x, y, x+s.w, y+s.h).Inset(-1), frameColor)
			} else {
				fill(sheet, image.Rect(x, y, x+cw, y+rowH[i]), emptyColor)
			}
			x += cw + cellGap
		}
		drawCaption(sheet, face, image.Pt(sheetMargin, y+rowH[i]+4), captions[i])
		y += rowH[i] + 4 + len(captions[i])*lineHeight + cellGap
	}
	leg.draw(sheet, face, legendTop)
	return sheet, nil
}
