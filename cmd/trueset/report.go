package main

import (
	"fmt"
	"io"
	"runtime"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/manifest"
	"github.com/trueset/trueset/manifest/inspect"
)

// reportOptions are the flags of `trueset report`.
type reportOptions struct {
	out        string
	split      string
	threshold  int
	workers    int
	sheetCount int
	sheetSplit string
	sheetSeed  uint64
	quiet      bool
}

func newReportCmd(stdout io.Writer) *cobra.Command {
	o := &reportOptions{}
	cmd := &cobra.Command{
		Use:   "report DIR --out REPORT.html",
		Short: "Write one self-contained HTML page with a dataset's statistics, charts, a contact sheet and its recipe",
		Long: `Compute the statistics of the dataset in DIR (as ` + "`trueset stats`" + ` does) and write
them as one HTML file that needs nothing else: no network, no JavaScript, no
files beside it. The page shows the dataset's name and facts, a contact sheet
of samples (as ` + "`trueset preview`" + ` draws it), the splits with a grouped bar chart
of groups per stratum and split, the normalization mean and std per channel,
the classes with their pixel frequency, both loss weights and object counts
(with bar charts), the targets, the leakage check, and the recipe from
dataset.json. Charts and the sheet are inlined PNGs; the file is written
atomically.

Every figure's cell carries data-stat, its path in ` + "`trueset stats --json`" + `
(e.g. data-stat="pixels.mean.0"), and data-value, the exact number, so
scripts can read the page too.`,
		Example: `  trueset report demo --out demo-report.html

  # exact duplicates only, a bigger sheet of the test split
  trueset report dice --out dice.html --threshold 0 --sheet-count 36 --sheet-split test`,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return usagef("report takes one dataset folder")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runReport(args[0], o, stdout) },
	}
	f := cmd.Flags()
	f.StringVarP(&o.out, "out", "o", "", "the HTML file to write (required)")
	f.StringVar(&o.split, "split", inspect.DefaultSplit, "the split for normalization, class weights and target scales")
	f.IntVar(&o.threshold, "threshold", inspect.DefaultThreshold, "report image pairs across splits within this many dHash bits (0 = identical hashes)")
	f.IntVarP(&o.workers, "workers", "j", min(runtime.NumCPU(), 8), "parallel decoders (the report does not depend on it)")
	f.IntVar(&o.sheetCount, "sheet-count", inspect.DefaultPreviewCount, "samples on the contact sheet (0 = no sheet)")
	f.StringVar(&o.sheetSplit, "sheet-split", "all", "the split the sheet's samples come from, or all")
	f.Uint64Var(&o.sheetSeed, "sheet-seed", 1, "seeds the shuffle that picks the sheet's samples")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "print nothing")
	return cmd
}

func runReport(dir string, o *reportOptions, stdout io.Writer) error {
	if o.out == "" {
		return usagef("--out REPORT.html is required")
	}
	if o.threshold < 0 || o.threshold > 32 {
		return usagef("--threshold %d: want 0..32 bits of 64", o.threshold)
	}
	if o.workers < 1 || o.workers > 1024 {
		return usagef("--workers %d: want 1..1024", o.workers)
	}
	if o.sheetCount < 0 || o.sheetCount > inspect.MaxPreviewCount {
		return usagef("--sheet-count %d: want 0..%d", o.sheetCount, inspect.MaxPreviewCount)
	}
	if err := checkFolder("", dir); err != nil {
		return err
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return err
	}
	names := d.Splits.Names
	if len(names) > 0 && !slices.Contains(names, o.split) {
		return usagef("--split %s: the dataset's splits are %s", o.split, strings.Join(names, ", "))
	}
	if o.sheetCount > 0 && o.sheetSplit != "all" && len(names) > 0 && !slices.Contains(names, o.sheetSplit) {
		return usagef("--sheet-split %s: the dataset's splits are %s (or all)", o.sheetSplit, strings.Join(names, ", "))
	}
	th := o.threshold
	if th == 0 {
		th = inspect.ExactOnly
	}
	st, err := inspect.Compute(dir, inspect.Options{Split: o.split, Threshold: th, Workers: o.workers})
	if err != nil {
		return err
	}
	ro := inspect.ReportOptions{Dataset: d}
	if o.sheetCount > 0 {
		s, err := inspect.Preview(dir, inspect.PreviewOptions{Split: o.sheetSplit, Count: o.sheetCount, Seed: o.sheetSeed})
		if err != nil {
			return fmt.Errorf("contact sheet: %w", err)
		}
		ro.ContactSheet = s.Image
		from := "all splits"
		if o.sheetSplit != "all" {
			from = "the " + o.sheetSplit + " split"
		}
		ro.ContactSheetCaption = fmt.Sprintf("%d of the %d samples of %s, picked with seed %d and shown in index order (scale %s): images tinted with their mask's class colors, boxes outlined, ids and targets below.",
			len(s.IDs), s.Of, from, o.sheetSeed, s.Scale)
	}
	b, err := inspect.RenderReport(st, ro)
	if err != nil {
		return err
	}
	if err := manifest.WriteFileAtomic(o.out, b); err != nil {
		return err
	}
	if !o.quiet {
		warn := "no warnings"
		switch n := len(st.Warnings); {
		case n == 1:
			warn = "1 warning"
		case n > 1:
			warn = fmt.Sprintf("%d warnings", n)
		}
		fmt.Fprintf(stdout, "wrote %s: report of %d samples, %s, %d KiB\n", o.out, st.Samples, warn, (len(b)+1023)/1024)
	}
	return nil
}
