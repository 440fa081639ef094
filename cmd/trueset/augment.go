package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"syscall"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/augment"
	"github.com/trueset/trueset/manifest"
)

// augmentOptions are the flags of `trueset augment`.
type augmentOptions struct {
	in, out, plan string
	copies        int
	seed          uint64
	split         string // the splits whose sources get copies
	workers       int
	allow         bool
	force         bool
	quiet         bool
	maxPixels     int
	ratios        string
	strat         string
	onError       string
	resume        bool
	json          bool
	acceptStale   bool
	to            layoutFlags
}

func newAugmentCmd(stdout, stderr io.Writer) *cobra.Command {
	o := &augmentOptions{}
	cmd := &cobra.Command{
		Use:   "augment --in DIR --out DIR --plan FILE",
		Short: "Expand a labeled set with transforms that move masks, boxes and counts with the pixels",
		Long: `Augment a trueset dataset, or a plain labeled folder of your own (images/ and
masks/ with matching file names, optional instances/, labels.csv and
classes.json), into a new trueset dataset that ` + "`trueset verify`" + ` accepts.

Every source is carried over unchanged. Only sources in --split (default:
train; comma-separated for more) get --copies augmented copies, so validation
and test stay on real samples; each copy keeps its source's split, group and
stratum, so copies of one source never leak across splits. A plain folder's
sources are first dealt to splits (--ratios, --stratify), each its own group.

All geometric steps of a copy compose into one affine matrix applied once:
bilinear (or bicubic) for the image, nearest neighbour for both masks, so
masks move with the pixels. Boxes, areas, visible shares and count targets
are then measured again from the warped instance mask. Copy k of source s
draws only from (seed, s, k): the output is the same whatever --workers is.
A plan that would break a class's declared invariance (a flipped glyph, a
6 turned into a 9) is refused before any work unless --allow-label-change.`,
		Example: `  # five copies of every training sample of a generated set
  trueset augment --in demo --out demo-aug --plan examples/plans/light.yaml --copies 5

  # your own labeled folder, held-out splits dealt first
  trueset augment --in my-labels --out my-labels-aug --plan examples/plans/light.yaml --copies 10 --ratios train=0.7,val=0.15,test=0.15

  # augment train and val
  trueset augment --in demo --out demo-aug-2 --plan examples/plans/light.yaml --split train,val`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return runAugment(cmd.Context(), o, stdout, stderr)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.in, "in", "", "input: a trueset dataset or a plain labeled folder (required)")
	f.StringVarP(&o.out, "out", "o", "", "output folder (required; must be empty or new)")
	f.StringVar(&o.plan, "plan", "", "augmentation plan YAML (required)")
	f.IntVarP(&o.copies, "copies", "k", 1, "augmented copies per source")
	f.Uint64Var(&o.seed, "seed", 1, "augmentation seed")
	f.StringVar(&o.split, "split", "train", "the splits whose sources get copies, comma-separated, e.g. train,val")
	f.IntVarP(&o.workers, "workers", "j", runtime.NumCPU(), "parallel workers (output does not depend on it)")
	f.BoolVar(&o.allow, "allow-label-change", false, "run a plan even where it breaks a class's declared invariance")
	f.BoolVar(&o.force, "force", false, "write into a folder that is not empty (files trueset did not write are never deleted)")
	f.BoolVar(&o.resume, "resume", false, "continue an interrupted run in --out (same input, plan, seed and options); the result equals an uninterrupted run")
	f.StringVar(&o.onError, "on-error", "fail", "a source that cannot be read: fail (stop the run) or skip (leave it out; listed in the summary and dataset.json)")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "no progress bar and no summary")
	f.IntVar(&o.maxPixels, "max-pixels", augment.DefaultMaxPixels, "refuse input images with more pixels than this")
	f.StringVar(&o.ratios, "ratios", "", "plain folders: split names and ratios adding up to 1 (default "+manifest.DefaultSplits+")")
	f.StringVar(&o.strat, "stratify", "", "plain folders: stratify by a labels.csv column, count_<class>, class:NAME or classes")
	f.BoolVar(&o.acceptStale, "accept-stale-columns", false, "plain folders: write copies that lost, cut or dropped objects even though labels.csv has columns columns.json does not declare; their records list those columns in stale_targets (default: such copies are drawn again within cuts.tries, else not written)")
	f.BoolVar(&o.json, "json", false, "print the summary as one JSON document on stdout instead of text (errors still go to stderr)")
	o.to.bind(f, "")
	return cmd
}

// augmentJSON is the summary `augment --json` prints. Samples counts every
// record written (sources and copies); Bytes and Seconds count this run
// only; Resumed samples were kept from an interrupted one; Skipped lists the
// sources left out by --on-error skip, with their errors.
type augmentJSON struct {
	Command string              `json:"command"` // "augment"
	Dir     string              `json:"dir"`
	Input   string              `json:"input"`
	Plan    string              `json:"plan"` // the plan's name
	Seed    uint64              `json:"seed"`
	Sources int                 `json:"sources"`
	Copies  int                 `json:"copies"`
	Samples int                 `json:"samples"`
	Resumed int                 `json:"resumed"`
	Skipped []string            `json:"skipped"`
	Seconds float64             `json:"seconds"`
	Bytes   int64               `json:"bytes"`
	Splits  manifest.SplitTable `json:"splits"`
	// Fallbacks: per source split that got copies, what the cuts policy and
	// the label rules did (as dataset.json's augment.fallbacks);
	// NotWritten: the copies not written, with why (at most 20);
	// Undeclared: labels.csv columns columns.json does not declare.
	Fallbacks  map[string]*manifest.Fallbacks `json:"fallbacks"`
	NotWritten []string                       `json:"not_written"`
	Undeclared []string                       `json:"undeclared_columns"`
}

func runAugment(ctx context.Context, o *augmentOptions, stdout, stderr io.Writer) error {
	switch {
	case o.in == "":
		return usagef("--in DIR is required")
	case o.out == "":
		return usagef("--out DIR is required")
	case o.plan == "":
		return usagef("--plan FILE is required (an augmentation plan, see schema/plan.schema.json)")
	case o.copies < 0 || o.copies > augment.MaxCopies:
		return usagef("--copies %d: want 0..%d", o.copies, augment.MaxCopies)
	case o.workers < 1 || o.workers > 1024:
		return usagef("--workers %d: want 1..1024", o.workers)
	case o.maxPixels < 1:
		return usagef("--max-pixels %d: want a whole number ≥ 1", o.maxPixels)
	case strings.Contains(o.split, "="):
		return usagef("--split %s: --split names the splits whose sources get copies (e.g. train,val); split names and ratios are --ratios", o.split)
	}
	if err := checkFolder("--in", o.in); err != nil {
		return err
	}
	if err := checkOutFolder(o.out); err != nil {
		return err
	}
	if o.onError != "fail" && o.onError != "skip" {
		return usagef("--on-error %q: want fail or skip", o.onError)
	}
	if o.resume && o.force {
		return usagef("give --resume or --force, not both")
	}
	if err := manifest.CheckDisjoint(o.out, o.in); err != nil {
		return err
	}
	if err := manifest.CheckUnlocked(o.out); err != nil {
		return err
	}
	if !o.force && !o.resume {
		if manifest.HasEntries(o.out) {
			if _, err := os.Stat(filepath.Join(o.out, manifest.RunMarkerFile)); err == nil {
				return usagef("--out %s holds an interrupted run; add --resume to continue it, or --force to start again", o.out)
			}
			return usagef("--out %s is not empty; choose a new folder or pass --force", o.out)
		}
	}
	if o.ratios != "" {
		if _, err := parseRatiosFlag(o.ratios); err != nil {
			return err
		}
	}
	if _, err := os.Stat(filepath.Join(o.in, manifest.DatasetFile)); err == nil && (o.ratios != "" || o.strat != "") {
		return usagef("--ratios and --stratify deal a plain folder's sources to splits; %s is a trueset dataset, whose split augment keeps (re-deal it first with: trueset split %s --ratios … --stratify …)", o.in, o.in)
	}
	if err := fileExists("--plan", o.plan); err != nil {
		return err
	}
	plan, err := augment.LoadPlan(o.plan)
	if err != nil {
		return usageError{err}
	}
	if ctx == nil {
		ctx = context.Background()
	}
	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()
	var bar *progress
	var splits []string
	for _, s := range strings.Split(o.split, ",") {
		if s = strings.TrimSpace(s); s != "" {
			splits = append(splits, s)
		}
	}
	layout, packBytes, err := augmentLayout(o)
	if err != nil {
		return err
	}
	opts := augment.RunOptions{
		Layout: layout, PackBytes: packBytes,
		In: o.in, Out: o.out, Plan: plan, Copies: o.copies, Seed: o.seed, Splits: splits,
		Workers: o.workers, AllowLabelChange: o.allow, Force: o.force, MaxPixels: o.maxPixels,
		SplitSpec: o.ratios, Stratify: o.strat, OnError: o.onError, Resume: o.resume, Version: version, AcceptStale: o.acceptStale,
		Progress: func(done, total int) {
			if bar == nil && !o.quiet && isTerminal(stderr) {
				bar = newProgress(stderr, "augmenting", "samples", total, terminalWidth(stderr))
			}
			bar.set(done)
		},
	}
	sum, err := augment.Run(ctx, opts)
	bar.finish()
	if errors.Is(err, manifest.ErrComplete) {
		if o.json {
			fmt.Fprintf(stderr, "%s: %v\n", o.out, err)
			return writeAugmentDone(stdout, o)
		}
		fmt.Fprintf(stdout, "%s: %v\n", o.out, err)
		return nil
	}
	if err != nil {
		var pe *augment.PlanError
		var ue *augment.UsageError // a plan that breaks invariance, an unknown --split
		if errors.As(err, &pe) || errors.As(err, &ue) {
			return usageError{err}
		}
		var ie *augment.InputError
		if errors.As(err, &ie) {
			// The input must change: resuming would fail the same way.
			// Exit 1, as for every input file whose content is refused
			// (testdata/bad/README.md).
			if _, serr := os.Stat(filepath.Join(o.out, manifest.RunMarkerFile)); serr == nil {
				return fmt.Errorf("%w\n%s has no dataset.json, so it is visibly incomplete; fix the input, then start again with --force (or into a new folder)", err, o.out)
			}
			return err
		}
		var re *augment.ResumeError
		if resumeRefused(err) || errors.As(err, &re) {
			return usageError{err}
		}
		return interrupted(o.out, sum.Records, err, stderr)
	}
	for _, s := range sum.Skipped {
		fmt.Fprintf(stderr, "skipped: %s\n", s)
	}
	if o.json {
		j := augmentJSON{Command: "augment", Dir: o.out, Input: o.in, Plan: plan.Name, Seed: o.seed, Sources: sum.Sources, Copies: sum.Copies,
			Samples: sum.Records, Resumed: sum.Resumed, Skipped: sum.Skipped, Seconds: manifest.Round(sum.Elapsed.Seconds(), 3), Bytes: sum.Bytes, Splits: sum.Splits,
			Fallbacks: sum.Fallbacks, NotWritten: sum.NotWritten, Undeclared: sum.Undeclared}
		if j.Skipped == nil {
			j.Skipped = []string{}
		}
		if j.NotWritten == nil {
			j.NotWritten = []string{}
		}
		if j.Undeclared == nil {
			j.Undeclared = []string{}
		}
		return writeJSON(stdout, j)
	}
	if !o.quiet {
		secs := sum.Elapsed.Seconds()
		fmt.Fprintf(stdout, "wrote %d %s (%d %s, %d %s) to %s\n", sum.Records, manifest.Plural(sum.Records, "sample", "samples"),
			sum.Sources, manifest.Plural(sum.Sources, "source", "sources"), sum.Copies, manifest.Plural(sum.Copies, "copy", "copies"), o.out)
		if sum.Resumed > 0 {
			fmt.Fprintf(stdout, "  %d kept from the interrupted run\n", sum.Resumed)
		}
		if len(sum.Skipped) > 0 {
			fmt.Fprintf(stdout, "  %d %s skipped\n", len(sum.Skipped), manifest.Plural(len(sum.Skipped), "source", "sources"))
		}
		fmt.Fprintf(stdout, "  %s, %s, %s, plan %s, seed %d\n", seconds(secs), rate(sum.Copies, secs, "copies"), humanBytes(sum.Bytes), plan.Name, o.seed)
		printFallbacks(stdout, sum, o.acceptStale)
		printSplitTable(stdout, sum.Splits)
	}
	return nil
}

// writeAugmentDone describes, for --json, an augmented dataset that was
// already complete: nothing was written, every record was kept.
func writeAugmentDone(stdout io.Writer, o *augmentOptions) error {
	out := o.out
	d, err := manifest.ReadDataset(out)
	if err != nil {
		return err
	}
	j := augmentJSON{Command: "augment", Dir: out, Input: o.in, Seed: o.seed, Skipped: []string{}, Splits: d.Splits}
	if d.Augment != nil {
		j.Seed = d.Augment.Seed
		var p struct {
			Name string `json:"name"`
		}
		if json.Unmarshal(d.Augment.Plan, &p) == nil {
			j.Plan = p.Name
		}
	}
	if err := manifest.ReadManifest(out, func(r *manifest.Record) error {
		j.Samples++
		if r.Lineage != nil {
			j.Copies++
		}
		return nil
	}); err != nil {
		return err
	}
	j.Sources, j.Resumed = j.Samples-j.Copies, j.Samples
	if d.Augment != nil && d.Augment.Skipped != nil {
		j.Skipped = d.Augment.Skipped
	}
	j.NotWritten, j.Undeclared = []string{}, []string{}
	if d.Augment != nil {
		j.Fallbacks = d.Augment.Fallbacks
		if d.Augment.UndeclaredColumns != nil {
			j.Undeclared = d.Augment.UndeclaredColumns
		}
	}
	return writeJSON(stdout, j)
}

// printFallbacks says, per source split, what the cuts policy and the label
// rules did to the copies: redrawn, with dropped objects, not written (with
// the first reasons) and carrying stale columns.
func printFallbacks(w io.Writer, sum augment.Summary, acceptStale bool) {
	if len(sum.Undeclared) > 0 {
		if acceptStale {
			fmt.Fprintf(w, "  labels.csv columns without a declaration in columns.json: %s; --accept-stale-columns: copies that lost, cut or dropped objects carry them, listed in stale_targets\n", strings.Join(sum.Undeclared, ", "))
		} else {
			fmt.Fprintf(w, "  labels.csv columns without a declaration in columns.json: %s; copies that would lose, cut or drop an object are drawn again, else not written (declare the columns, or pass --accept-stale-columns)\n", strings.Join(sum.Undeclared, ", "))
		}
	}
	var names []string
	for n := range sum.Fallbacks {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		f := sum.Fallbacks[n]
		if f.Planned == 0 {
			continue
		}
		line := fmt.Sprintf("  %s: %d of %d copies written; %d redrawn, %d with dropped objects (%d objects), %d not written", n, f.Written, f.Planned, f.Redrawn, f.Dropped, f.DroppedObjects, f.NotWritten)
		if f.Stale > 0 || acceptStale {
			line += fmt.Sprintf(", %d with stale columns", f.Stale)
		}
		fmt.Fprintln(w, line)
	}
	for _, note := range sum.NotWritten {
		fmt.Fprintf(w, "    %s\n", note)
	}
}

// augmentLayout is the output's layout: --layout if given, else the
// input's (a packed trueset set gives packs of its own bound; a plain
// folder gives the folder layout).
func augmentLayout(o *augmentOptions) (string, int64, error) {
	if o.to.layout != "" {
		return o.to.resolve()
	}
	d, err := manifest.ReadDataset(o.in)
	if err != nil || d.Layout == nil {
		return manifest.LayoutFolder, 0, nil // a plain folder, or one the run refuses with its own message
	}
	if o.to.packSize != "" {
		o.to.layout = manifest.LayoutPacked
		return o.to.resolve()
	}
	return manifest.LayoutPacked, d.Layout.PackBytes, nil
}
