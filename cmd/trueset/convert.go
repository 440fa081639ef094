package main

import (
	"fmt"
	"io"
	"time"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/manifest"
)

// convertOptions are the flags of `trueset convert`.
type convertOptions struct {
	in    string
	out   string
	to    layoutFlags
	force bool
	quiet bool
	json  bool
}

func newConvertCmd(stdout, stderr io.Writer) *cobra.Command {
	o := &convertOptions{}
	cmd := &cobra.Command{
		Use:   "convert --in DIR --out DIR --layout folder|packed",
		Short: "Write a dataset in the other layout (one PNG per file, or tar packs)",
		Long: `Copy a finished dataset into --out in the layout --layout names: folder
(images/, masks/, instances/, one PNG per file) or packed (each split as tar
archives of the pax format under packs/, at most --pack-size bytes each, with
packs/index.jsonl). Nothing is decoded or re-encoded: every file is checked
against its record's SHA-256 and copied byte for byte, and manifest.jsonl is
kept as it is, so a folder converted to packed and back is the same folder,
file for file (dataset.json included), and a packed set converted to folder
and back with the same --pack-size is the same packs.`,
		Example: `  # pack a set for streaming, in archives of at most 64 MiB, and back
  # (demo-again holds the same files as demo)
  trueset convert --in demo --out demo-packed --layout packed --pack-size 64MiB
  trueset convert --in demo-packed --out demo-again --layout folder`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error { return runConvert(o, stdout, stderr) },
	}
	f := cmd.Flags()
	f.StringVarP(&o.in, "in", "i", "", "the dataset to convert (required)")
	f.StringVarP(&o.out, "out", "o", "", "output folder (required; must be empty or new)")
	o.to.bind(f, "")
	f.BoolVar(&o.force, "force", false, "write into a folder that is not empty")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "no progress bar and no summary")
	f.BoolVar(&o.json, "json", false, "print the summary as one JSON document on stdout instead of text (errors still go to stderr)")
	return cmd
}

// convertJSON is what `convert --json` prints.
type convertJSON struct {
	Command   string  `json:"command"` // "convert"
	In        string  `json:"in"`
	Dir       string  `json:"dir"`
	Layout    string  `json:"layout"`
	PackBytes int64   `json:"pack_bytes,omitempty"`
	Packs     int     `json:"packs,omitempty"`
	Samples   int     `json:"samples"`
	Seconds   float64 `json:"seconds"`
}

func runConvert(o *convertOptions, stdout, stderr io.Writer) error {
	if o.in == "" || o.out == "" {
		return usagef("convert needs --in DIR and --out DIR")
	}
	if o.to.layout == "" {
		return usagef("--layout is required: folder or packed")
	}
	layout, packBytes, err := o.to.resolve()
	if err != nil {
		return err
	}
	if err := checkFolder("--in", o.in); err != nil {
		return err
	}
	if err := checkOutFolder(o.out); err != nil {
		return err
	}
	if err := manifest.CheckDisjoint(o.out, o.in); err != nil {
		return usageError{err}
	}
	if err := manifest.CheckUnlocked(o.out); err != nil {
		return err
	}
	if !o.force && manifest.HasEntries(o.out) {
		return usagef("--out %s is not empty; choose a new folder or pass --force", o.out)
	}
	start := time.Now()
	var bar *progress
	opts := manifest.ConvertOptions{Layout: layout, PackBytes: packBytes, Force: o.force}
	if !o.quiet && isTerminal(stderr) {
		if d, err := manifest.ReadDataset(o.in); err == nil {
			bar = newProgress(stderr, "converting", "samples", d.Count, terminalWidth(stderr))
			opts.Progress = func(done, total int) { bar.set(done) }
		}
	}
	d, err := manifest.Convert(o.in, o.out, opts)
	bar.finish()
	if err != nil {
		return fmt.Errorf("%w; %s is not a complete dataset", err, o.out)
	}
	secs := time.Since(start).Seconds()
	packs := 0
	if d.Layout != nil {
		packs = len(d.Layout.Packs)
	}
	if o.json {
		return writeJSON(stdout, convertJSON{Command: "convert", In: o.in, Dir: o.out, Layout: layout, PackBytes: packBytes,
			Packs: packs, Samples: d.Count, Seconds: manifest.Round(secs, 3)})
	}
	if !o.quiet {
		what := "the folder layout"
		if packs > 0 {
			what = fmt.Sprintf("%d %s of at most %s", packs, manifest.Plural(packs, "pack", "packs"), humanBytes(packBytes))
		}
		fmt.Fprintf(stdout, "converted %s to %s: %d %s in %s, %s\n", o.in, o.out, d.Count, manifest.Plural(d.Count, "sample", "samples"), what, seconds(secs))
	}
	return nil
}
