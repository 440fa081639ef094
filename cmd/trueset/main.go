// Command trueset renders labeled scenes with exact masks and writes them as
// reproducible datasets. See README.md.
package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/gen"
)

// version is the tool version written into every dataset.json; release
// builds may set it with -ldflags "-X main.version=…".
var version = "0.1.0"

// Exit codes.
const (
	exitOK      = 0
	exitFailure = 1 // something failed while working
	exitUsage   = 2 // bad usage or an invalid recipe
)

// usageError marks an error as the caller's: exit code 2.
type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

func usagef(format string, args ...any) error { return usageError{fmt.Errorf(format, args...)} }

func newRoot(stdout, stderr io.Writer) *cobra.Command {
	root := &cobra.Command{
		Use:   "trueset",
		Short: "Labeled scenes with exact masks, stratified splits and byte-for-byte reproducible datasets",
		Long: `trueset renders procedural scenes of shapes and glyphs whose masks, boxes, counts
and numeric targets are true by construction, and writes them as a dataset
(images, semantic masks, instance masks, manifest.jsonl, dataset.json) that
anyone can regenerate byte for byte from the recipe and the seed.`,
		Example: `  trueset generate --out demo
  trueset presets
  trueset generate --preset tabletop-dice --count 5000 --seed 7 --out dice`,
		SilenceUsage:      true,
		SilenceErrors:     true,
		CompletionOptions: cobra.CompletionOptions{DisableDefaultCmd: true},
	}
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return usageError{fmt.Errorf("%w\nsee: %s --help", err, c.CommandPath())}
	})
	root.AddCommand(newGenerateCmd(stdout, stderr), newAugmentCmd(stdout, stderr), newSplitCmd(stdout, stderr), newVerifyCmd(stdout, stderr),
		newMergeCmd(stdout), newPresetsCmd(stdout), newVersionCmd(stdout), newStatsCmd(stdout), newPreviewCmd(stdout))
	root.AddCommand(newCompletionCmd(stdout), newManCmd(stdout))
	root.AddCommand(newReportCmd(stdout))
	return root
}

// exitCode maps an error to the process exit code.
func exitCode(err error) int {
	if err == nil {
		return exitOK
	}
	var ue usageError
	var re *gen.RecipeError // also augment.PlanError: both are yamlnode.Error
	if errors.As(err, &ue) || errors.As(err, &re) {
		return exitUsage
	}
	// cobra's own argument and command errors are usage errors too.
	msg := err.Error()
	if strings.HasPrefix(msg, "unknown command") || strings.HasPrefix(msg, "accepts ") || strings.Contains(msg, "arg(s), received") {
		return exitUsage
	}
	return exitFailure
}

// writeJSON writes v as the one JSON document of a --json run: indented,
// ending in a newline, with <, > and & as they are.
func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

func run(args []string, stdout, stderr io.Writer) int {
	root := newRoot(stdout, stderr)
	root.SetArgs(args)
	err := root.Execute()
	if err != nil && err != errInterrupted {
		fmt.Fprintln(stderr, "trueset:", err)
	}
	return exitCode(err)
}

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}
