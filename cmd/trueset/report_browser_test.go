//go:build browser

// Checks of `trueset report` as a real browser shows it. .ci/browser.sh
// makes the files (a report, `trueset stats --json` of the same dataset,
// and headless Chromium's screenshot and --dump-dom of the page) and runs
//
//	go test -tags browser -run Browser ./cmd/trueset/
//
// with these variables naming them:
//
//	TRUESET_BROWSER_REPORT  report.html as trueset wrote it
//	TRUESET_BROWSER_STATS   the output of trueset stats --json
//	TRUESET_BROWSER_SHOT    Chromium's --screenshot PNG
//	TRUESET_BROWSER_DOM     Chromium's --dump-dom output
package main

import (
	"bytes"
	"image/color"
	"image/png"
	"os"
	"regexp"
	"strings"
	"testing"
)

func browserFile(t *testing.T, env string) []byte {
	t.Helper()
	p := os.Getenv(env)
	if p == "" {
		t.Skipf("%s is not set; run .ci/browser.sh", env)
	}
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestBrowserScreenshot: the page Chromium drew is not blank. A blank or
// failed page is one color (white, or Chromium's error page gray); this one
// has text, a contact sheet of tinted images and charts, so many colors
// and a good share of non-white pixels, spread down the page.
func TestBrowserScreenshot(t *testing.T) {
	img, err := png.Decode(bytes.NewReader(browserFile(t, "TRUESET_BROWSER_SHOT")))
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	b := img.Bounds()
	if b.Dx() < 1000 || b.Dy() < 1500 {
		t.Fatalf("screenshot is %v, want the 1280×2000 window", b)
	}
	colors := map[color.RGBA]int{}
	nonWhite := 0
	const bands = 8 // the page in horizontal bands, each must have ink
	inked := make([]int, bands)
	dark := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			c := color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)
			colors[c]++
			if c.R < 245 || c.G < 245 || c.B < 245 {
				nonWhite++
				inked[(y-b.Min.Y)*bands/b.Dy()]++
			}
			if int(c.R)+int(c.G)+int(c.B) < 150 {
				dark++
			}
		}
	}
	total := b.Dx() * b.Dy()
	t.Logf("screenshot %v: %d distinct colors, %.1f%% non-white, %.1f%% dark, ink per band %v",
		b, len(colors), 100*float64(nonWhite)/float64(total), 100*float64(dark)/float64(total), inked)
	if len(colors) < 500 {
		t.Errorf("only %d distinct colors: the page looks blank or unstyled", len(colors))
	}
	if nonWhite < total/10 {
		t.Errorf("only %d of %d pixels are not white", nonWhite, total)
	}
	if dark < total/200 {
		t.Errorf("only %d dark pixels: no text or images drawn", dark)
	}
	for i, n := range inked {
		if n < b.Dx() { // less than one row's worth of ink in a band
			t.Errorf("band %d of %d of the screenshot is empty", i+1, bands)
		}
	}
}

// TestBrowserDOMStats: the values Chromium parsed into the DOM are the
// values of `trueset stats --json`, every data-stat cell, and the page as
// the browser holds it still has every cell trueset wrote.
func TestBrowserDOMStats(t *testing.T) {
	dom := browserFile(t, "TRUESET_BROWSER_DOM")
	doc := decodeStatsJSON(t, browserFile(t, "TRUESET_BROWSER_STATS"))
	written := readReportCells(t, browserFile(t, "TRUESET_BROWSER_REPORT"))
	cells := readReportCells(t, dom)
	n := compareReportCells(t, cells, doc)
	t.Logf("%d data-stat cells in the DOM checked against stats --json", n)
	checkRequiredReportStats(t, cells, doc)
	if len(cells) != len(written) {
		t.Errorf("the DOM has %d data-stat cells, the file %d", len(cells), len(written))
	}
	for k, c := range written {
		if cells[k] != c {
			t.Errorf("%s: file %+v, DOM %+v", k, c, cells[k])
		}
	}
	// As the browser holds it: the heading, inline images only, no script.
	s := string(dom)
	if !strings.Contains(s, `<h1 id="dataset-name">`) {
		t.Error("no dataset name heading in the DOM")
	}
	imgs := regexp.MustCompile(`<img [^>]*src="([^"]*)"`).FindAllStringSubmatch(s, -1)
	if len(imgs) < 4 {
		t.Errorf("%d images in the DOM, want the sheet and three charts", len(imgs))
	}
	for _, m := range imgs {
		if !strings.HasPrefix(m[1], "data:image/png;base64,") {
			t.Errorf("image src %.40q is not inline", m[1])
		}
	}
	if strings.Contains(s, "<script") {
		t.Error("the DOM has a script")
	}
}
