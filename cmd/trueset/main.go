// Command trueset renders labeled scenes with exact masks and writes them as
// reproducible datasets. See README.md.
package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
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
		Version:           version,
	}
	root.SetVersionTemplate(versionLine() + "\n")
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return usageError{fmt.Errorf("%s\nsee: %s --help", flagErrorText(c, err), c.CommandPath())}
	})
	root.AddCommand(newGenerateCmd(stdout, stderr), newAugmentCmd(stdout, stderr), newSplitCmd(stdout, stderr), newVerifyCmd(stdout, stderr),
		newMergeCmd(stdout), newConvertCmd(stdout, stderr), newPresetsCmd(stdout), newVersionCmd(stdout), newStatsCmd(stdout), newPreviewCmd(stdout))
	root.AddCommand(newCompletionCmd(stdout), newManCmd(stdout))
	root.AddCommand(newReportCmd(stdout))
	root.AddCommand(newReadbackCmd(stdout))
	root.AddCommand(newExportCmd(stdout))
	return root
}

// exitCode maps an error to the process exit code.
func exitCode(err error) int {
	if err == nil {
		return exitOK
	}
	var ue usageError
	var re *gen.RecipeError // also augment.PlanError: both are yamlnode.Error
	var se *manifest.StratifyError
	var le *manifest.LockedError  // another run holds the output folder
	var oe *manifest.OverlapError // the output folder overlaps an input
	if errors.As(err, &ue) || errors.As(err, &re) || errors.As(err, &se) || errors.As(err, &le) || errors.As(err, &oe) {
		return exitUsage
	}
	// cobra's own argument and command errors are usage errors too.
	msg := err.Error()
	if strings.HasPrefix(msg, "unknown command") || strings.HasPrefix(msg, "accepts ") || strings.Contains(msg, "arg(s), received") {
		return exitUsage
	}
	return exitFailure
}

// renamedFlags maps, per command, a flag name trueset used to have (or that
// people reach for) to the one that means it now.
var renamedFlags = map[string]map[string]string{
	"generate": {"split": "ratios"},
	"split":    {"split": "ratios"},
	"augment":  {"splits": "split"},
}

// flagErrorText rewrites pflag's parse errors so they name the flag and
// what it allows, and suggests the flag a misspelled one probably meant.
func flagErrorText(c *cobra.Command, err error) string {
	var ne *pflag.NotExistError
	var ie *pflag.InvalidValueError
	var re *pflag.ValueRequiredError
	switch {
	case errors.As(err, &ie):
		f := ie.GetFlag()
		return fmt.Sprintf("--%s %s: want %s (%s)", f.Name, ie.GetValue(), flagWants(f), f.Usage)
	case errors.As(err, &re):
		f := re.GetFlag()
		return fmt.Sprintf("--%s needs a value: %s", f.Name, f.Usage)
	case errors.As(err, &ne) && ne.GetSpecifiedShortnames() == "":
		name := ne.GetSpecifiedName()
		if to, ok := renamedFlags[c.Name()][name]; ok {
			return fmt.Sprintf("unknown flag --%s; did you mean --%s? (%s)", name, to, c.Flags().Lookup(to).Usage)
		}
		if near := nearestFlag(c, name); near != "" {
			return fmt.Sprintf("unknown flag --%s; did you mean --%s?", name, near)
		}
		return fmt.Sprintf("unknown flag --%s", name)
	}
	return err.Error()
}

// flagWants says in words what values a flag of f's type takes.
func flagWants(f *pflag.Flag) string {
	switch f.Value.Type() {
	case "int", "int64", "int32":
		return "a whole number"
	case "uint", "uint64", "uint32":
		return "a whole number ≥ 0"
	case "float64", "float32":
		return "a number"
	case "bool":
		return "true or false"
	case "duration":
		return "a duration such as 30s or 5m"
	}
	return "a " + f.Value.Type()
}

// nearestFlag returns the flag of c whose name is closest to name: one it
// begins (from 3 letters on), else one at most max(2, len/3) edits away;
// "" when none is.
func nearestFlag(c *cobra.Command, name string) string {
	limit := max(2, len(name)/3)
	best, bestD := "", limit+1
	visit := func(f *pflag.Flag) {
		if f.Hidden {
			return
		}
		d := editDistance(name, f.Name)
		if len(name) >= 3 && strings.HasPrefix(f.Name, name) {
			d = 0
		}
		if d < bestD || (d == bestD && f.Name < best) {
			best, bestD = f.Name, d
		}
	}
	c.Flags().VisitAll(visit)
	c.InheritedFlags().VisitAll(visit)
	return best
}

// editDistance is the Levenshtein distance between a and b.
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			sub := prev[j-1]
			if a[i-1] != b[j-1] {
				sub++
			}
			cur[j] = min(sub, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
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

// checkFolder refuses a folder argument that does not exist or is a file
// (exit 2), in the same words for every command; flag names the flag, or ""
// for a positional argument.
func checkFolder(flag, dir string) error {
	label := dir
	if flag != "" {
		label = flag + " " + dir
	}
	st, err := os.Stat(dir)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return usagef("%s does not exist", label)
	case err != nil:
		return usagef("%s: %v", label, err)
	case !st.IsDir():
		return usagef("%s is a file, not a folder", label)
	}
	return nil
}

// checkOutFolder refuses an --out that exists as something other than a
// folder (exit 2); a missing one is made by the run.
func checkOutFolder(dir string) error {
	if st, err := os.Stat(dir); err == nil && !st.IsDir() {
		return usagef("--out %s is a file, not a folder", dir)
	}
	return nil
}
