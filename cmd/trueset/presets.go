package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/gen"
)

func newPresetsCmd(stdout io.Writer) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "presets",
		Short: "List the built-in presets",
		Example: `  trueset presets
  trueset presets show tabletop-dice > my-dice.yaml   # copy a preset to edit it`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error { return runPresetsList(stdout) },
	}
	cmd.AddCommand(&cobra.Command{
		Use:     "show NAME",
		Short:   "Print a preset's recipe YAML",
		Example: "  trueset presets show bin-labels > labels.yaml\n  trueset generate --recipe labels.yaml --out labels",
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return usagef("presets show takes one preset name; built-in presets: %s", strings.Join(gen.PresetNames(), ", "))
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runPresetsShow(args[0], stdout) },
	})
	return cmd
}

func runPresetsList(stdout io.Writer) error {
	for _, name := range gen.PresetNames() {
		r, err := gen.Preset(name)
		if err != nil {
			return err
		}
		mark := " "
		if name == gen.DefaultPreset {
			mark = "*"
		}
		size := fmt.Sprintf("%dx%d %s", r.Canvas.Width, r.Canvas.Height, r.Canvas.Mode)
		fmt.Fprintf(stdout, "%s %-16s %-12s  %s\n", mark, name, size, r.Description)
	}
	fmt.Fprintln(stdout, "\n* default preset. `trueset presets show NAME` prints one as YAML.")
	return nil
}

func runPresetsShow(name string, stdout io.Writer) error {
	b, err := gen.PresetYAML(name)
	if err != nil {
		return usageError{err}
	}
	_, err = stdout.Write(b)
	return err
}
