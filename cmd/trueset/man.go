package main

import (
	"fmt"
	"io"
	"os"
	"sort"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/cobra/doc"
)

// manOptions are the flags of `trueset man`.
type manOptions struct {
	out string
}

func newManCmd(stdout io.Writer) *cobra.Command {
	o := &manOptions{}
	cmd := &cobra.Command{
		Use:   "man --out DIR",
		Short: "Write a man page for every trueset command into a folder",
		Long: `Write one man page (section 1, roff) per command into DIR: trueset.1,
trueset-generate.1, trueset-presets-show.1 and so on, made from the same
text as --help. DIR is created if it does not exist; pages already there
are replaced. The date in the pages is the current month, or the one
SOURCE_DATE_EPOCH gives (for reproducible packages).`,
		Example: `  # read one without installing
  trueset man --out man-pages && man -l man-pages/trueset-generate.1

  # install for your user (man looks in ~/.local/share/man on most systems)
  trueset man --out ~/.local/share/man/man1 && man trueset-verify`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return runMan(cmd.Root(), o, stdout)
		},
	}
	cmd.Flags().StringVarP(&o.out, "out", "o", "", "folder for the man pages (required; created if missing)")
	return cmd
}

func runMan(root *cobra.Command, o *manOptions, stdout io.Writer) error {
	if o.out == "" {
		return usagef("--out DIR is required")
	}
	if err := os.MkdirAll(o.out, 0o755); err != nil {
		return err
	}
	// No "Auto generated" history section: it would stamp today's date into
	// every page a second time.
	root.DisableAutoGenTag = true
	header := &doc.GenManHeader{Section: "1", Source: "trueset " + version, Manual: "trueset manual"}
	if err := doc.GenManTree(root, header, o.out); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %d man pages to %s\n", len(manPages(root)), o.out)
	return nil
}

// manPages lists the file names doc.GenManTree writes for root: one per
// available command, its path joined by "-", in section 1.
func manPages(root *cobra.Command) []string {
	var names []string
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		for _, sub := range c.Commands() {
			if sub.IsAvailableCommand() && !sub.IsAdditionalHelpTopicCommand() {
				walk(sub)
			}
		}
		names = append(names, strings.ReplaceAll(c.CommandPath(), " ", "-")+".1")
	}
	walk(root)
	sort.Strings(names)
	return names
}
