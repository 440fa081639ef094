package main

import (
	"fmt"
	"io"
	"runtime"

	"github.com/spf13/cobra"
)

// versionLine is what `trueset version` and `trueset --version` print.
func versionLine() string {
	return fmt.Sprintf("trueset %s (%s, %s/%s)", version, runtime.Version(), runtime.GOOS, runtime.GOARCH)
}

// versionJSON is what `trueset version --json` prints.
type versionJSON struct {
	Command string `json:"command"`
	Version string `json:"version"`
	Go      string `json:"go"`
	OS      string `json:"os"`
	Arch    string `json:"arch"`
}

func newVersionCmd(stdout io.Writer) *cobra.Command {
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "version",
		Short: "Print the tool version (recorded in every dataset.json)",
		Example: `  trueset version
  trueset --version
  trueset version --json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			if asJSON {
				return writeJSON(stdout, versionJSON{Command: "version", Version: version, Go: runtime.Version(), OS: runtime.GOOS, Arch: runtime.GOARCH})
			}
			_, err := fmt.Fprintln(stdout, versionLine())
			return err
		},
	}
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the version as one JSON document")
	return cmd
}
