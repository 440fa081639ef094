package main

import (
	"fmt"
	"io"
	"time"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/manifest"
)

// mergeOptions are the flags of `trueset merge`.
type mergeOptions struct {
	out   string
	force bool
	quiet bool
	json  bool
	to    layoutFlags
}

func newMergeCmd(stdout io.Writer) *cobra.Command {
	o := &mergeOptions{}
	cmd := &cobra.Command{
		Use:   "merge SHARD_DIR... --out DIR",
		Short: "Join the folders of generate --shard into one dataset",
		Long: `Join shard folders written by generate --shard I/N (or by a batch engine's
array of them) into one dataset. Every shard of 0..N-1 must be given once,
all from the same recipe, seed, count and tool version; the merged files,
manifest.jsonl and dataset.json are byte-identical to a single-machine run.
Shards may be in either layout; the merged set takes theirs (and their pack
size) unless --layout says otherwise.`,
		Example: `  trueset merge part-0 part-1 part-2 --out labels
  trueset merge shards/* --out labels-2 && trueset verify labels-2

  # shards written with --layout packed, merged into one packed set
  trueset merge part-0 part-1 part-2 --out labels-packed --layout packed`,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) == 0 {
				return usagef("merge needs the shard folders")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runMerge(args, o, stdout) },
	}
	f := cmd.Flags()
	f.StringVarP(&o.out, "out", "o", "", "output folder (required; must be empty or new)")
	f.BoolVar(&o.force, "force", false, "write into a folder that is not empty")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "no summary")
	f.BoolVar(&o.json, "json", false, "print the summary as one JSON document on stdout instead of text (errors still go to stderr)")
	o.to.bind(f, "")
	return cmd
}

// mergeJSON is what `merge --json` prints.
type mergeJSON struct {
	Command string              `json:"command"` // "merge"
	Dir     string              `json:"dir"`
	Shards  []string            `json:"shards"` // the shard folders, as given
	Seed    uint64              `json:"seed"`
	Samples int                 `json:"samples"`
	Seconds float64             `json:"seconds"`
	Bytes   int64               `json:"bytes"`
	Splits  manifest.SplitTable `json:"splits"`
}

func runMerge(dirs []string, o *mergeOptions, stdout io.Writer) error {
	if o.out == "" {
		return usagef("--out DIR is required")
	}
	if err := checkOutFolder(o.out); err != nil {
		return err
	}
	if err := manifest.CheckDisjoint(o.out, dirs...); err != nil {
		return err
	}
	if err := manifest.CheckUnlocked(o.out); err != nil {
		return err
	}
	if !o.force {
		if manifest.HasEntries(o.out) {
			return usagef("--out %s is not empty; choose a new folder or pass --force", o.out)
		}
	}
	mo := manifest.MergeOptions{Force: o.force}
	if o.to.layout != "" {
		var err error
		if mo.Layout, mo.PackBytes, err = o.to.resolve(); err != nil {
			return err
		}
		if o.to.packSize == "" {
			mo.PackBytes = 0 // the shards' own
		}
	}
	start := time.Now()
	n, err := manifest.Merge(dirs, o.out, mo)
	if err != nil {
		return err
	}
	secs := time.Since(start).Seconds()
	if o.json || !o.quiet {
		d, err := manifest.ReadDataset(o.out)
		if err != nil {
			return err
		}
		if o.json {
			return writeJSON(stdout, mergeJSON{Command: "merge", Dir: o.out, Shards: dirs, Seed: d.Seed, Samples: d.Count,
				Seconds: manifest.Round(secs, 3), Bytes: n, Splits: d.Splits})
		}
		fmt.Fprintf(stdout, "merged %d %s into %s: %d %s\n  %s, %s\n", len(dirs), manifest.Plural(len(dirs), "shard", "shards"), o.out,
			d.Count, manifest.Plural(d.Count, "sample", "samples"), seconds(secs), humanBytes(n))
	}
	return nil
}
