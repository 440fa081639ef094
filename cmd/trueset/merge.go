package main

import (
	"fmt"
	"io"
	"os"
	"time"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/manifest"
)

// mergeOptions are the flags of `trueset merge`.
type mergeOptions struct {
	out   string
	force bool
	quiet bool
}

func newMergeCmd(stdout io.Writer) *cobra.Command {
	o := &mergeOptions{}
	cmd := &cobra.Command{
		Use:   "merge SHARD_DIR... --out DIR",
		Short: "Join the folders of `generate --shard` into one dataset",
		Long: `Join shard folders written by generate --shard I/N (or by a batch engine's
array of them) into one dataset. Every shard of 0..N-1 must be given once,
all from the same recipe, seed, count and tool version; the merged files,
manifest.jsonl and dataset.json are byte-identical to a single-machine run.`,
		Example: `  trueset merge part-0 part-1 part-2 --out labels
  trueset merge shards/* --out labels && trueset verify labels`,
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
	return cmd
}

func runMerge(dirs []string, o *mergeOptions, stdout io.Writer) error {
	if o.out == "" {
		return usagef("--out DIR is required")
	}
	if !o.force {
		if ents, err := os.ReadDir(o.out); err == nil && len(ents) > 0 {
			return usagef("--out %s is not empty; choose a new folder or pass --force", o.out)
		}
	}
	start := time.Now()
	n, err := manifest.Merge(dirs, o.out, o.force)
	if err != nil {
		return err
	}
	if !o.quiet {
		fmt.Fprintf(stdout, "merged %d shards into %s in %.2fs (%s)\n", len(dirs), o.out, time.Since(start).Seconds(), humanBytes(n))
	}
	return nil
}
