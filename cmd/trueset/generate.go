package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"syscall"

	"github.com/spf13/cobra"
	"golang.org/x/term"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// generateOptions are the flags of `trueset generate`.
type generateOptions struct {
	preset  string
	recipe  string
	out     string
	count   int
	seed    uint64
	workers int
	ratios  string
	strat   string
	cover   bool
	shard   string
	shards  int
	force   bool
	resume  bool
	quiet   bool
	json    bool
	layoutFlags
}

func newGenerateCmd(stdout, stderr io.Writer) *cobra.Command {
	o := &generateOptions{}
	cmd := &cobra.Command{
		Use:   "generate [--preset NAME | --recipe FILE] --out DIR",
		Short: "Render a labeled dataset from a preset or a recipe",
		Long: `Render COUNT scenes from a recipe (or a built-in preset) and write them to DIR:
images/, masks/ (8-bit indexed PNG, palette = class colors), instances/
(16-bit PNG of instance ids), manifest.jsonl (one record per sample, in index
order) and dataset.json (written last; it marks the dataset complete).

The split is allocated before rendering (--ratios): each sample's stratum (--stratify)
is computed from its plan, and the strata × splits table is rounded so every
cell and every split total is within ±1 of its exact share (controlled
rounding). The table is printed and stored in dataset.json.

--require-coverage puts coverage first: every stratum with at least as many
groups as splits gets a group in every split, even where that takes a cell
more than 1 from its share (3 groups at 0.8/0.1/0.1 give 1/1/1); the other
cells stay within ±1 where their stratum allows and split totals within ±1
where the cells allow. A stratum with fewer groups than splits cannot be
covered: the run is refused, naming it, before anything is written.

Shards: --shard I/N renders samples [⌊I·count/N⌋, ⌊(I+1)·count/N⌋) with the
same global split; ` + "`trueset merge`" + ` joins the shard folders into the dataset a
single run would write. Without --shard, a Kubernetes Indexed Job
(JOB_COMPLETION_INDEX, with --shards N) or a Slurm job array
(SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_COUNT, SLURM_ARRAY_TASK_MIN) sets it.

--layout packed writes each split as a sequence of tar archives (pax) of at
most --pack-size bytes under packs/, with packs/index.jsonl and the same
manifest.jsonl, for training jobs that stream from object storage; every
command reads both layouts and ` + "`trueset convert`" + ` turns one into the other.

The same tool version, recipe and seed give byte-identical files whatever
--workers is.`,
		Example: `  # the default preset (` + gen.DefaultPreset + `), 1000 samples
  trueset generate --out demo

  # a preset, more samples, another seed, 2 workers
  trueset generate --preset tabletop-dice --count 20000 --seed 7 --workers 2 --out dice

  # your own recipe (start from: trueset presets show bin-labels > labels.yaml)
  trueset generate --recipe labels.yaml --out labels --ratios train=0.7,val=0.15,test=0.15

  # every split must see every number of dice
  trueset generate --preset tabletop-dice --stratify dice --require-coverage --out dice

  # packed: tar archives of at most 64 MiB per split, for streaming
  trueset generate --count 20000 --layout packed --pack-size 64MiB --out parts-packed

  # shard 2 of 7 on one machine of a batch; then merge the seven folders
  trueset generate --preset bin-labels --count 70000 --shard 2/7 --out part-2
  trueset merge part-0 part-1 part-2 part-3 part-4 part-5 part-6 --out labels`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return runGenerate(cmd.Context(), o, stdout, stderr)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.preset, "preset", "", "built-in preset name (list them with: trueset presets); default "+gen.DefaultPreset)
	f.StringVar(&o.recipe, "recipe", "", "recipe YAML file")
	f.StringVarP(&o.out, "out", "o", "", "output folder (required; must be empty or new)")
	f.IntVarP(&o.count, "count", "n", 1000, "number of samples")
	f.Uint64Var(&o.seed, "seed", 1, "seed; with the recipe and tool version it fixes every byte")
	f.IntVarP(&o.workers, "workers", "j", runtime.NumCPU(), "parallel workers (output does not depend on it)")
	f.StringVar(&o.ratios, "ratios", "", "split names and ratios adding up to 1 (default: the recipe's split.ratios, else "+manifest.DefaultSplits+")")
	f.StringVar(&o.strat, "stratify", "", "stratify by a target name, class:NAME (its count) or classes (the set present); default: the recipe's split.stratify")
	f.BoolVar(&o.cover, "require-coverage", false, "put every stratum with at least as many groups as splits in every split (shares then bend); refuse if one has fewer")
	f.StringVar(&o.shard, "shard", "", "render only shard I of N, as I/N (0-based)")
	f.IntVar(&o.shards, "shards", 0, "the shard count N when the index comes from JOB_COMPLETION_INDEX")
	f.BoolVar(&o.force, "force", false, "write into a folder that is not empty (files trueset did not write are never deleted)")
	f.BoolVar(&o.resume, "resume", false, "continue an interrupted run in --out (same recipe, seed and options); the result equals an uninterrupted run")
	f.BoolVarP(&o.quiet, "quiet", "q", false, "no progress bar and no summary")
	f.BoolVar(&o.json, "json", false, "print the summary as one JSON document on stdout instead of text (errors still go to stderr)")
	o.layoutFlags.bind(f, manifest.LayoutFolder)
	return cmd
}

// generateJSON is the summary `generate --json` prints. Bytes and Seconds
// count this run only; Resumed samples were kept from an interrupted one.
type generateJSON struct {
	Command          string              `json:"command"` // "generate"
	Dir              string              `json:"dir"`
	Recipe           string              `json:"recipe"`
	Seed             uint64              `json:"seed"`
	Samples          int                 `json:"samples"`
	Resumed          int                 `json:"resumed"`
	Seconds          float64             `json:"seconds"`
	SamplesPerSecond float64             `json:"samples_per_second"`
	Bytes            int64               `json:"bytes"`
	Shard            *int                `json:"shard,omitempty"`
	Shards           int                 `json:"shards,omitempty"`
	Splits           manifest.SplitTable `json:"splits"`
}

func runGenerate(ctx context.Context, o *generateOptions, stdout, stderr io.Writer) error {
	if o.out == "" {
		return usagef("--out DIR is required")
	}
	layout, packBytes, err := o.layoutFlags.resolve()
	if err != nil {
		return err
	}
	if err := checkOutFolder(o.out); err != nil {
		return err
	}
	if o.preset != "" && o.recipe != "" {
		return usagef("give --preset or --recipe, not both")
	}
	if o.count < 1 || o.count > gen.MaxCount {
		return usagef("--count %d: want 1..%d", o.count, gen.MaxCount)
	}
	if o.workers < 1 || o.workers > 1024 {
		return usagef("--workers %d: want 1..1024", o.workers)
	}
	var r *gen.Recipe
	switch {
	case o.recipe != "":
		if err := fileExists("--recipe", o.recipe); err != nil {
			return err
		}
		r, err = gen.LoadRecipe(o.recipe)
	default:
		name := o.preset
		if name == "" {
			name = gen.DefaultPreset
		}
		r, err = gen.Preset(name)
		if err != nil {
			if _, ok := err.(*gen.RecipeError); !ok {
				err = usageError{err}
			}
		}
	}
	if err != nil {
		return err
	}
	if o.ratios != "" {
		if _, err := parseRatiosFlag(o.ratios); err != nil {
			return err
		}
	}
	if o.strat != "" {
		if err := checkStratify(o.strat, r.ClassTable(), recipeTargets(r)); err != nil {
			return err
		}
		if err := r.CheckStratify(o.strat); err != nil {
			return usageError{err}
		}
	}
	shard, shards, from, err := shardFromFlagsOrEnv(o.shard, o.shards, os.Getenv)
	if err != nil {
		return err
	}
	// A folder that already holds files is the caller's mistake, not a
	// failure while working: refuse it before anything is written.
	if o.resume && o.force {
		return usagef("give --resume or --force, not both")
	}
	if err := manifest.CheckUnlocked(o.out); err != nil {
		return err
	}
	if !o.force && !o.resume {
		if manifest.HasEntries(o.out) {
			if _, err := os.Stat(filepath.Join(o.out, manifest.RunMarkerFile)); err == nil {
				return usagef("--out %s holds an interrupted run; add --resume to continue it, or --force to start again", o.out)
			}
			return usagef("--out %s is not empty; choose a new folder or pass --force to write over a previous dataset", o.out)
		}
	}

	if ctx == nil {
		ctx = context.Background()
	}
	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	defer stop()

	var bar *progress
	if !o.quiet && isTerminal(stderr) {
		bar = newProgress(stderr, "generating "+r.Name, "samples", o.count, terminalWidth(stderr))
	}
	sum, err := gen.Run(ctx, gen.RunOptions{
		Recipe: r, Out: o.out, Count: o.count, Seed: o.seed, Workers: o.workers,
		Splits: o.ratios, Stratify: o.strat, RequireCoverage: o.cover,
		Shard: shard, Shards: shards, Force: o.force, Resume: o.resume, Version: version,
		Layout: layout, PackBytes: packBytes,
		Progress: func(done, total int) { bar.set(done) },
	})
	bar.finish()
	var ce *gen.CoverageError
	if errors.As(err, &ce) {
		printSplitTable(stderr, sum.Splits)
		return fmt.Errorf("%w; nothing was written", err)
	}
	if errors.Is(err, manifest.ErrComplete) {
		if o.json {
			fmt.Fprintf(stderr, "%s: %v\n", o.out, err)
			d, derr := manifest.ReadDataset(o.out)
			if derr != nil {
				return derr
			}
			return writeJSON(stdout, generateJSON{Command: "generate", Dir: o.out, Recipe: r.Name, Seed: d.Seed, Samples: d.Count, Resumed: d.Count, Splits: d.Splits})
		}
		fmt.Fprintf(stdout, "%s: %v\n", o.out, err)
		return nil
	}
	if resumeRefused(err) {
		return usageError{err}
	}
	if err != nil {
		return interrupted(o.out, sum.Samples, err, stderr)
	}
	if o.json {
		secs := sum.Elapsed.Seconds()
		j := generateJSON{Command: "generate", Dir: o.out, Recipe: r.Name, Seed: o.seed, Samples: sum.Samples, Resumed: sum.Resumed, Seconds: manifest.Round(secs, 3),
			Bytes: sum.Bytes, Splits: sum.Splits}
		if secs > 0 {
			j.SamplesPerSecond = manifest.Round(float64(sum.Samples-sum.Resumed)/secs, 1)
		}
		if shards > 0 {
			j.Shard, j.Shards = &shard, shards
		}
		return writeJSON(stdout, j)
	}
	if !o.quiet {
		printGenerateSummary(stdout, sum, r.Name, o.out, o.seed, shard, shards, from)
	}
	return nil
}

// printGenerateSummary prints what a run wrote, in short lines: the summary
// of a 20,000-sample run fits 80 columns.
func printGenerateSummary(w io.Writer, sum gen.Summary, recipe, out string, seed uint64, shard, shards int, from string) {
	secs := sum.Elapsed.Seconds()
	fmt.Fprintf(w, "wrote %d %s of %s to %s\n", sum.Samples, manifest.Plural(sum.Samples, "sample", "samples"), recipe, out)
	if shards > 0 {
		fmt.Fprintf(w, "  shard %d of 0..%d%s\n", shard, shards-1, from)
	}
	if sum.Resumed > 0 {
		fmt.Fprintf(w, "  %d kept from the interrupted run\n", sum.Resumed)
	}
	fmt.Fprintf(w, "  %s, %s, %s, seed %d\n", seconds(secs), rate(sum.Samples-sum.Resumed, secs, "samples"), humanBytes(sum.Bytes), seed)
	printSplitTable(w, sum.Splits)
}

// interrupted explains a run that stopped early: the folder has no
// dataset.json, so it is visibly incomplete, and the same command with
// --resume continues it.
func interrupted(out string, done int, err error, stderr io.Writer) error {
	if _, serr := os.Stat(filepath.Join(out, manifest.RunMarkerFile)); serr != nil {
		return err // stopped before anything was written: nothing to resume
	}
	args := os.Args[1:]
	has := false
	for _, a := range args {
		if a == "--resume" {
			has = true
		}
	}
	if !has {
		args = append(args, "--resume")
	}
	if errors.Is(err, context.Canceled) {
		fmt.Fprintf(stderr, "trueset: interrupted after %d samples; %s has no dataset.json yet. Resume with:\n  trueset %s\n", done, out, strings.Join(args, " "))
		return errInterrupted
	}
	var re *gen.RecipeError
	if errors.As(err, &re) {
		// The recipe must change, and a changed recipe is a new run:
		// --resume would refuse it, and the same one fails the same way.
		return fmt.Errorf("%w\n%s has no dataset.json, so it is visibly incomplete; change the recipe, then start again with --force (or into a new folder)", err, out)
	}
	return fmt.Errorf("%s: %w\nthe folder has no dataset.json, so it is visibly incomplete. If the cause lay outside the inputs (a full disk, a killed run), free it and resume with: trueset %s; if you change the recipe, plan or input, start again with --force", out, err, strings.Join(args, " "))
}

// resumeRefused reports whether --resume was refused because --out holds
// no interrupted run or another run's: the caller's mistake (exit 2), which
// resuming again would not mend.
func resumeRefused(err error) bool {
	var mm *manifest.MismatchError
	return errors.As(err, &mm) || errors.Is(err, manifest.ErrNoRun)
}

// errInterrupted is a stop by SIGINT or SIGTERM: exit code 1, message already printed.
var errInterrupted = errors.New("interrupted")

// shardFromFlagsOrEnv returns the shard to render: --shard I/N first, else a
// Kubernetes Indexed Job's JOB_COMPLETION_INDEX (count from --shards), else a
// Slurm job array's SLURM_ARRAY_TASK_ID − SLURM_ARRAY_TASK_MIN of
// SLURM_ARRAY_TASK_COUNT. shards = 0 means the whole dataset.
func shardFromFlagsOrEnv(flag string, shardsFlag int, getenv func(string) string) (shard, shards int, from string, err error) {
	if flag != "" {
		if _, err := fmt.Sscanf(flag, "%d/%d", &shard, &shards); err != nil || shards < 1 || shard < 0 || shard >= shards || fmt.Sprintf("%d/%d", shard, shards) != flag {
			return 0, 0, "", usagef("--shard %q: want I/N with 0 ≤ I < N, e.g. 2/7", flag)
		}
		return shard, shards, "", nil
	}
	atoi := func(name string) (int, bool, error) {
		v := getenv(name)
		if v == "" {
			return 0, false, nil
		}
		n, err := strconv.Atoi(v)
		if err != nil || n < 0 {
			return 0, true, usagef("%s=%q is not a whole number", name, v)
		}
		return n, true, nil
	}
	if idx, ok, err := atoi("JOB_COMPLETION_INDEX"); err != nil {
		return 0, 0, "", err
	} else if ok {
		if shardsFlag < 1 {
			return 0, 0, "", usagef("JOB_COMPLETION_INDEX=%d is set: give the shard count with --shards N (the Job's completions)", idx)
		}
		if idx >= shardsFlag {
			return 0, 0, "", usagef("JOB_COMPLETION_INDEX=%d is not below --shards %d", idx, shardsFlag)
		}
		return idx, shardsFlag, ", from JOB_COMPLETION_INDEX", nil
	}
	if id, ok, err := atoi("SLURM_ARRAY_TASK_ID"); err != nil {
		return 0, 0, "", err
	} else if ok {
		n, okN, err := atoi("SLURM_ARRAY_TASK_COUNT")
		if err != nil {
			return 0, 0, "", err
		}
		if !okN || n < 1 {
			return 0, 0, "", usagef("SLURM_ARRAY_TASK_ID=%d is set but SLURM_ARRAY_TASK_COUNT is not", id)
		}
		lo, _, err := atoi("SLURM_ARRAY_TASK_MIN")
		if err != nil {
			return 0, 0, "", err
		}
		if step, ok, err := atoi("SLURM_ARRAY_TASK_STEP"); err != nil {
			return 0, 0, "", err
		} else if ok && step != 1 {
			return 0, 0, "", usagef("SLURM_ARRAY_TASK_STEP=%d: shards need a contiguous array with step 1, such as --array=0-%d", step, n-1)
		}
		if id < lo || id-lo >= n {
			return 0, 0, "", usagef("SLURM_ARRAY_TASK_ID=%d is outside the array's %d tasks from %d; use a contiguous array such as --array=0-%d", id, n, lo, n-1)
		}
		return id - lo, n, ", from SLURM_ARRAY_TASK_ID", nil
	}
	if shardsFlag > 0 {
		return 0, 0, "", usagef("--shards %d needs JOB_COMPLETION_INDEX in the environment; on one machine use --shard I/N", shardsFlag)
	}
	return 0, 0, "", nil
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

func humanBytes(n int64) string {
	const unit = 1024
	if n < unit {
		return fmt.Sprintf("%d B", n)
	}
	div, exp := int64(unit), 0
	for m := n / unit; m >= unit; m /= unit {
		div *= unit
		exp++
	}
	return fmt.Sprintf("%.1f %ciB", float64(n)/float64(div), "KMGTPE"[exp])
}

// parseRatiosFlag reads --ratios; a spec that does not parse or add up to
// 1 is the caller's mistake (exit 2).
func parseRatiosFlag(s string) (manifest.Splits, error) {
	sp, err := manifest.ParseSplits(s)
	if err != nil {
		return sp, usagef("--ratios %s: %v", s, err)
	}
	return sp, nil
}

// checkStratify checks --stratify against a dataset's classes and targets
// the same way in every command: an unknown class or target is exit 2,
// naming the known ones.
func checkStratify(key string, classes []manifest.Class, targets []string) error {
	err := manifest.CheckStratify(key, manifest.ClassNames(classes), targets)
	var se *manifest.StratifyError
	if errors.As(err, &se) {
		return usagef("--stratify %s: %s", se.Key, se.Msg)
	}
	return err
}

// recipeTargets lists a recipe's target names.
func recipeTargets(r *gen.Recipe) []string {
	var names []string
	for _, t := range r.Targets {
		names = append(names, t.Name)
	}
	return names
}

// fileExists refuses a file flag whose file is missing, naming both.
func fileExists(flag, path string) error {
	st, err := os.Stat(path)
	switch {
	case errors.Is(err, os.ErrNotExist):
		return usagef("%s %s: the file does not exist", flag, path)
	case err != nil:
		return usagef("%s %s: %v", flag, path, err)
	case st.IsDir():
		return usagef("%s %s: is a folder, not a file", flag, path)
	}
	return nil
}

// terminalWidth is the width of the terminal w writes to, or 80.
func terminalWidth(w io.Writer) int {
	if f, ok := w.(*os.File); ok {
		if cols, _, err := term.GetSize(int(f.Fd())); err == nil && cols > 0 {
			return cols
		}
	}
	return 80
}
