package main

import (
	"bytes"
	"fmt"
	"image/jpeg"
	"image/png"
	"io"
	"path/filepath"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/manifest"
	"github.com/trueset/trueset/manifest/inspect"
)

// previewOptions are the flags of `trueset preview`.
type previewOptions struct {
	out   string
	count int
	split string
	seed  uint64
	quiet bool
}

func newPreviewCmd(stdout io.Writer) *cobra.Command {
	o := &previewOptions{}
	cmd := &cobra.Command{
		Use:   "preview DIR --out SHEET.png|SHEET.jpg",
		Short: "Draw a contact sheet of samples with their masks, boxes and targets",
		Long: `Draw a contact sheet of --count samples of one split of the dataset in DIR,
picked by a shuffle seeded with --seed and shown in index order. Each cell is
the image scaled up by an integer factor (nearest neighbor) to about 192
pixels, tinted with the semantic mask's class colors (background untinted;
the ignore id 255 hatched gray), each object's bounding box outlined in its
class color, and a caption with the sample id and its targets. A legend of
class colors closes the sheet. Captions wrap onto as many lines as they
need. The sheet is a PNG for --out *.png and a JPEG (quality 92) for *.jpg
or *.jpeg; any other extension is refused. It is written atomically.`,
		Example: `  trueset preview demo --out demo-sheet.png
  trueset preview dice --out dice-test.png --split test --count 25 --seed 3

  # every split at once
  trueset preview labels --out labels.png --split all`,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return usagef("preview takes one dataset folder")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runPreview(args[0], o, stdout) },
	}
	f := cmd.Flags()
	f.StringVarP(&o.out, "out", "o", "", "the sheet to write, .png or .jpg/.jpeg (required)")
	f.IntVarP(&o.count, "count", "n", inspect.DefaultPreviewCount, "samples on the sheet")
	f.StringVar(&o.split, "split", inspect.DefaultSplit, "the split to draw from, or all")
	f.Uint64Var(&o.seed, "seed", 1, "seeds the shuffle that picks the samples")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "print nothing")
	return cmd
}

// previewJPEGQuality is the quality of a .jpg sheet: high enough that the
// class tints and 1-pixel box outlines survive (common practice).
const previewJPEGQuality = 92

// sheetEncoding picks the sheet's format from the --out extension, in any
// letter case: "png" for .png, "jpeg" for .jpg and .jpeg. Anything else is
// refused (exit 2), naming the extension, rather than writing one format
// under another's name.
func sheetEncoding(out string) (string, error) {
	ext := filepath.Ext(out)
	switch strings.ToLower(ext) {
	case ".png":
		return "png", nil
	case ".jpg", ".jpeg":
		return "jpeg", nil
	case "":
		return "", usagef("--out %s has no extension: name the sheet .png, .jpg or .jpeg", out)
	}
	return "", usagef("--out %s: trueset writes contact sheets as .png, .jpg or .jpeg, not %s", out, ext)
}

func runPreview(dir string, o *previewOptions, stdout io.Writer) error {
	if o.out == "" {
		return usagef("--out SHEET.png is required")
	}
	enc, err := sheetEncoding(o.out)
	if err != nil {
		return err
	}
	if o.count < 1 || o.count > inspect.MaxPreviewCount {
		return usagef("--count %d: want 1..%d", o.count, inspect.MaxPreviewCount)
	}
	if err := checkFolder("", dir); err != nil {
		return err
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return err
	}
	if o.split != "all" && len(d.Splits.Names) > 0 && !slices.Contains(d.Splits.Names, o.split) {
		return usagef("--split %s: the dataset's splits are %s (or all)", o.split, strings.Join(d.Splits.Names, ", "))
	}
	s, err := inspect.Preview(dir, inspect.PreviewOptions{Split: o.split, Count: o.count, Seed: o.seed})
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if enc == "jpeg" {
		err = jpeg.Encode(&buf, s.Image, &jpeg.Options{Quality: previewJPEGQuality})
	} else {
		err = png.Encode(&buf, s.Image)
	}
	if err != nil {
		return err
	}
	if err := manifest.WriteFileAtomic(o.out, buf.Bytes()); err != nil {
		return err
	}
	if !o.quiet {
		b := s.Image.Bounds()
		fmt.Fprintf(stdout, "wrote %s: %d of %d samples (%d×%d grid, cells %d×%d, scale %s), %d×%d px\n",
			o.out, len(s.IDs), s.Of, s.Cols, s.Rows, s.Cell.X, s.Cell.Y, s.Scale, b.Dx(), b.Dy())
	}
	return nil
}
