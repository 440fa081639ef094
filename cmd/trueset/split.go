package main

import (
	"fmt"
	"io"
	"time"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/manifest"
)

// splitOptions are the flags of `trueset split`.
type splitOptions struct {
	ratios string
	strat  string
	cover  bool
	quiet  bool
	json   bool
}

func newSplitCmd(stdout, stderr io.Writer) *cobra.Command {
	o := &splitOptions{}
	cmd := &cobra.Command{
		Use:   "split DIR",
		Short: "Re-deal an existing dataset's groups to splits, without touching pixels",
		Long: `Re-split the dataset in DIR: every group (all copies of one source stay
together) is dealt to a split (--ratios), stratified by --stratify, with the
strata × splits table rounded so every cell and every split total is within
±1 of its exact share (--require-coverage: coverage first, as generate
--help says). In the folder layout only manifest.jsonl and dataset.json
are rewritten; in the packed layout the packs are too (each holds one
split and its samples' records), written beside the old ones first, so
split needs room for a second copy of them while it runs. dataset.json is
removed first and written last, so an interrupted split leaves a folder
that is visibly incomplete rather than a mix. The shuffle
uses the dataset's own seed, so the same flags give the same split as
generate did.

Unlike generate, split reads the rendered records, so it can stratify by any
target, areas and sizes included.`,
		Example: `  # stratify an existing set by its total part count
  trueset split demo --stratify parts

  # new ratios, and insist every split sees every stratum
  trueset split dice --ratios train=0.6,val=0.2,test=0.2 --stratify dice --require-coverage`,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return usagef("split takes one dataset folder")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runSplit(args[0], o, stdout, stderr) },
	}
	f := cmd.Flags()
	f.StringVar(&o.ratios, "ratios", "", "split names and ratios adding up to 1 (default: the dataset's current ones)")
	f.StringVar(&o.strat, "stratify", "", "a target name, class:NAME or classes (default: the dataset's current key)")
	f.BoolVar(&o.cover, "require-coverage", false, "put every stratum with at least as many groups as splits in every split (shares then bend); refuse, changing nothing, if one has fewer")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "do not print the table")
	f.BoolVar(&o.json, "json", false, "print the result as one JSON document on stdout instead of the table (errors still go to stderr)")
	return cmd
}

// splitJSON is what `split --json` prints: the new split table, in
// dataset.json's shape.
type splitJSON struct {
	Command string              `json:"command"` // "split"
	Dir     string              `json:"dir"`
	Samples int                 `json:"samples"`
	Seconds float64             `json:"seconds"`
	Splits  manifest.SplitTable `json:"splits"`
}

func runSplit(dir string, o *splitOptions, stdout, stderr io.Writer) error {
	if err := checkFolder("", dir); err != nil {
		return err
	}
	start := time.Now()
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return err
	}
	spec := o.ratios
	if spec == "" {
		spec = d.Splits.Spec
	}
	sp, err := parseRatiosFlag(spec)
	if err != nil {
		return err
	}
	key := o.strat
	if key == "" {
		key = d.Splits.Stratify
	} else if err := checkStratify(key, d.Classes, d.Targets); err != nil {
		return err
	}
	t, err := manifest.Resplit(dir, manifest.ResplitOptions{Seed: d.Seed, Splits: sp, Stratify: key, RequireCoverage: o.cover})
	if err != nil {
		if t != nil {
			printSplitTable(stderr, *t)
		}
		return err
	}
	if o.json {
		return writeJSON(stdout, splitJSON{Command: "split", Dir: dir, Samples: d.Count, Seconds: manifest.Round(time.Since(start).Seconds(), 3), Splits: *t})
	}
	if !o.quiet {
		fmt.Fprintf(stdout, "re-split %s\n", dir)
		printSplitTable(stdout, *t)
	}
	return nil
}
