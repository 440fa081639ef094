package main

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/png"
	"io"
	"path/filepath"
	"runtime"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/manifest"
	"github.com/trueset/trueset/manifest/inspect"
	"github.com/trueset/trueset/readback"
)

// readbackOptions are the flags of `trueset readback`.
type readbackOptions struct {
	split      string
	statsSplit string
	json       bool
	sheet      string
	sheetMax   int
	workers    int
}

func newReadbackCmd(stdout io.Writer) *cobra.Command {
	o := &readbackOptions{}
	cmd := &cobra.Command{
		Use:   "readback DIR BATCH.npz",
		Short: "Read back a batch as your loader made it and name what it got wrong",
		Long: `Read one batch that your training pipeline produced from the dataset in DIR,
saved as NumPy .npz with dump_batch (examples/python/trueset_loader.py):
"ids" (record ids or indices), "images" (N×C×H×W, N×H×W×C or N×H×W, any
dtype), optionally "masks" (N×H×W) and one array per target named as the
dataset names it. Because trueset knows every sample's truth, it recovers
how each loader image relates to its source (the eight flips and quarter
turns, shifts of up to 3 px, crops, resizes with their interpolation), and
the same for each mask; fits the per-channel value mapping and names it
(raw, 0–1, the dataset's own normalization, other constants, twice,
channels swapped, gray replicated); checks mask values against the class
table (interpolated, shifted ids, the ignore id 255 mapped to a class),
targets against the records and against what the loader's own crop still
shows, and the batch (repeats, --split, strata and class mix).

Each finding has a kind (the README lists them), a severity, the sample ids
and the evidence. The exit code is 1 when any finding is an error, so the
command can guard your own CI; 2 when the batch cannot be read. --sheet
draws the flagged samples: source, the loader's image mapped back to
0..255, and the loader's mask over it.`,
		Example: `  trueset generate --preset tabletop-dice --count 40 --seed 7 --out dice7 --quiet
  trueset readback dice7 testdata/batches/dice7-ok.npz --split train

  # a loader that mirrors images but not masks: exit 1, and a sheet of the samples
  trueset generate --preset tabletop-dice --count 40 --seed 7 --out dice7 --quiet
  trueset readback dice7 testdata/batches/dice7-flip-image-only.npz --sheet flagged.png || echo "exit $?"

  trueset generate --preset tabletop-dice --count 40 --seed 7 --out dice7 --quiet
  trueset readback dice7 testdata/batches/dice7-ok.npz --json > findings.json`,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 2 {
				return usagef("readback takes a dataset folder and a batch file (.npz)")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runReadback(args[0], args[1], o, stdout) },
	}
	f := cmd.Flags()
	f.StringVar(&o.split, "split", "", "the split the batch should come from (default: not checked)")
	f.StringVar(&o.statsSplit, "stats-split", inspect.DefaultSplit, "the split whose statistics a normalization is compared with")
	f.BoolVar(&o.json, "json", false, "print the findings as one JSON document")
	f.StringVar(&o.sheet, "sheet", "", "write a contact sheet of the flagged samples (.png)")
	f.IntVar(&o.sheetMax, "sheet-max", 16, "flagged samples on the sheet at most")
	f.IntVarP(&o.workers, "workers", "j", min(runtime.NumCPU(), 8), "parallel workers (the findings do not depend on it)")
	return cmd
}

// readbackJSON is what `readback --json` prints.
type readbackJSON struct {
	Command string `json:"command"`
	Dir     string `json:"dir"`
	Samples int    `json:"samples"` // records in the dataset
	*readback.Report
	Sheet string `json:"sheet,omitempty"`
}

// errFindings ends a run whose batch has error findings: exit 1.
type errFindings struct{ n int }

func (e errFindings) Error() string {
	return fmt.Sprintf("the batch has %s", inspect.Plural(e.n, "error finding"))
}

func runReadback(dir, batch string, o *readbackOptions, stdout io.Writer) error {
	if o.workers < 1 || o.workers > 1024 {
		return usagef("--workers %d: want 1..1024", o.workers)
	}
	if o.sheetMax < 1 || o.sheetMax > inspect.MaxPanelRows {
		return usagef("--sheet-max %d: want 1..%d", o.sheetMax, inspect.MaxPanelRows)
	}
	if o.sheet != "" && strings.ToLower(filepath.Ext(o.sheet)) != ".png" {
		return usagef("--sheet %s: the sheet is written as .png", o.sheet)
	}
	if err := checkFolder("", dir); err != nil {
		return err
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return err
	}
	for _, s := range []struct{ flag, v string }{{"--split", o.split}, {"--stats-split", o.statsSplit}} {
		if s.v != "" && len(d.Splits.Names) > 0 && !slices.Contains(d.Splits.Names, s.v) {
			return usagef("%s %s: the dataset's splits are %s", s.flag, s.v, strings.Join(d.Splits.Names, ", "))
		}
	}
	rep, err := readback.Run(dir, batch, readback.Options{Split: o.split, StatsSplit: o.statsSplit, Workers: o.workers, MaxPanels: o.sheetMax})
	if err != nil {
		var ie *readback.InputError
		var se *safefile.Error
		if errors.As(err, &ie) || (errors.As(err, &se) && se.Path == batch) {
			return usageError{err}
		}
		return err
	}
	wrote := ""
	if o.sheet != "" && len(rep.Panels) > 0 {
		if err := writeReadbackSheet(o.sheet, batch, rep); err != nil {
			return err
		}
		wrote = o.sheet
	}
	if o.json {
		if err := writeJSON(stdout, readbackJSON{Command: "readback", Dir: dir, Samples: rep.Records, Report: rep, Sheet: wrote}); err != nil {
			return err
		}
	} else {
		printReadback(stdout, dir, rep)
		switch {
		case wrote != "":
			fmt.Fprintf(stdout, "\nwrote %s: %s\n", wrote, inspect.Plural(len(rep.Panels), "flagged sample"))
		case o.sheet != "":
			fmt.Fprintf(stdout, "\nnothing flagged; %s not written\n", o.sheet)
		}
	}
	if rep.Errors > 0 {
		return errFindings{rep.Errors}
	}
	return nil
}

// severityOrder puts errors first, then warnings, then information.
var severityOrder = map[string]int{readback.Error: 0, readback.Warning: 1, readback.Info: 2}

func printReadback(w io.Writer, dir string, rep *readback.Report) {
	fmt.Fprintf(w, "batch %s against %s: %s\n", rep.Batch, dir, rep.Layout.Describe())
	fs := slices.Clone(rep.Findings)
	slices.SortStableFunc(fs, func(a, b readback.Finding) int { return severityOrder[a.Severity] - severityOrder[b.Severity] })
	for _, f := range fs {
		if f.Kind == readback.KindLayout {
			continue // the first line says it
		}
		fmt.Fprintf(w, "\n%-7s  %s\n", f.Severity, f.Kind)
		for _, l := range wrapText(f.Message, 78) {
			fmt.Fprintf(w, "  %s\n", l)
		}
		if len(f.Samples) > 0 {
			shown := f.Samples
			more := ""
			if len(shown) > 12 {
				shown, more = shown[:12], fmt.Sprintf(" … (%d in all; --json lists them)", len(f.Samples))
			}
			for _, l := range wrapText("samples: "+strings.Join(shown, " ")+more, 78) {
				fmt.Fprintf(w, "  %s\n", l)
			}
		}
	}
	fmt.Fprintf(w, "\n%s, %s\n", inspect.Plural(rep.Errors, "error"), inspect.Plural(rep.Warnings, "warning"))
}

// wrapText breaks s into lines of at most width characters at spaces.
func wrapText(s string, width int) []string {
	var out []string
	line := ""
	for _, word := range strings.Fields(s) {
		if line != "" && len([]rune(line))+1+len([]rune(word)) > width {
			out = append(out, line)
			line = ""
		}
		if line != "" {
			line += " "
		}
		line += word
	}
	if line != "" {
		out = append(out, line)
	}
	return out
}

func writeReadbackSheet(path, batch string, rep *readback.Report) error {
	rows := make([]inspect.PanelRow, len(rep.Panels))
	for i, p := range rep.Panels {
		pics := []image.Image{p.Source, p.Loader}
		if p.Overlay != nil {
			pics = append(pics, p.Overlay)
		}
		rows[i] = inspect.PanelRow{Caption: []string{p.ID + ": " + strings.Join(p.Notes, ", ")}, Pictures: pics}
	}
	headers := []string{"source", "loader image, mapped back", "loader mask"}
	if rep.Layout.MaskDType == "" {
		headers = headers[:2]
	}
	img, err := inspect.PanelSheet(fmt.Sprintf("trueset readback %s: %s flagged", filepath.Base(batch), inspect.Plural(len(rows), "sample")), headers, rows, rep.Classes)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		return err
	}
	return manifest.WriteFileAtomic(path, buf.Bytes())
}
