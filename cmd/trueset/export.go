package main

import (
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/export"
)

// exportOptions are the flags of `trueset export`.
type exportOptions struct {
	format string
	out    string
	split  string
	quiet  bool
	json   bool
}

func newExportCmd(stdout io.Writer) *cobra.Command {
	o := &exportOptions{}
	cmd := &cobra.Command{
		Use:   "export DIR --format FORMAT --out PATH",
		Short: "Write a dataset's objects in a detection or instance-segmentation interchange format",
		Long: `Write the objects of the dataset in DIR (generated or augmented) in one of two
interchange formats that detection and instance-segmentation training code
commonly reads. The dataset is read, never changed.

  objects-json   one JSON file with three lists: "images" (id, file_name —
                 the image path relative to DIR — width, height, and the
                 trueset sample_id and split), "annotations" (one per object:
                 id, image_id, category_id = the trueset class id, bbox as
                 [x, y, width, height] in pixels, area = mask pixels,
                 iscrowd 0, segmentation as run-length counts of the
                 object's pixels in column-major order — down each column,
                 columns left to right — starting with a run outside the
                 object: {"size": [height, width], "counts": [...]}) and
                 "categories" (id, name; background and ignore left out).
  center-boxes   a folder: labels/<image stem>.txt with one line per object,
                 "class cx cy w h": the 0-based class index (line of
                 classes.txt) and the box's center and size divided by the
                 image width and height. Pair each file with DIR/images/ by
                 its stem.

Every object is measured again from its instance mask and must agree with its
record (run trueset verify first if unsure). The JSON file appears whole or
not at all; the folder must be new or empty, is locked while written, and its
labels/ appears only when every file is written.`,
		Example: `  trueset generate --preset tabletop-dice --count 50 --out dice --quiet
  trueset export dice --format objects-json --out dice-objects.json
  trueset export dice --format center-boxes --split train --out dice-boxes
  cat dice-boxes/classes.txt`,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return usagef("export takes one dataset folder")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runExport(args[0], o, stdout) },
	}
	f := cmd.Flags()
	f.StringVarP(&o.format, "format", "f", "", "objects-json (one JSON file: images, annotations with boxes and run-length masks, categories) or center-boxes (a folder of one text file per image: class index and normalized center and size)")
	f.StringVarP(&o.out, "out", "o", "", "the JSON file (objects-json) or a new or empty folder (center-boxes); outside DIR")
	f.StringVar(&o.split, "split", "", "export only this split (default: every sample)")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "no summary")
	f.BoolVar(&o.json, "json", false, "print the summary as one JSON document on stdout instead of text (errors still go to stderr)")
	return cmd
}

// exportJSON is what `export --json` prints.
type exportJSON struct {
	Command string `json:"command"` // "export"
	Dir     string `json:"dir"`
	Samples int    `json:"samples"` // samples exported (one image each)
	*export.Summary
}

func runExport(dir string, o *exportOptions, stdout io.Writer) error {
	if o.format == "" {
		return usagef("--format is required: %s", strings.Join(export.Formats, " or "))
	}
	if o.out == "" {
		return usagef("--out PATH is required")
	}
	if err := checkFolder("", dir); err != nil {
		return err
	}
	sum, err := export.Run(export.Options{Dir: dir, Format: o.format, Out: o.out, Split: o.split})
	var ie *export.InputError
	if errors.As(err, &ie) {
		return usageError{err}
	}
	if err != nil {
		return err
	}
	if o.json {
		return writeJSON(stdout, exportJSON{Command: "export", Dir: dir, Samples: sum.Images, Summary: sum})
	}
	if !o.quiet {
		fmt.Fprintf(stdout, "exported %d images, %d objects (%d images without objects), %d categories as %s to %s\n",
			sum.Images, sum.Objects, sum.EmptyImages, len(sum.Categories), sum.Format, sum.Out)
	}
	return nil
}
