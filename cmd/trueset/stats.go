package main

import (
	"encoding/json"
	"fmt"
	"io"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/manifest"
	"github.com/trueset/trueset/manifest/inspect"
)

// statsOptions are the flags of `trueset stats`.
type statsOptions struct {
	json      bool
	split     string
	threshold int
	workers   int
}

// maxLeakRows bounds the near-duplicate pairs the text report lists.
const maxLeakRows = 20

func newStatsCmd(stdout io.Writer) *cobra.Command {
	o := &statsOptions{}
	cmd := &cobra.Command{
		Use:   "stats DIR",
		Short: "Normalization, class weights, target scales, object sizes and a leakage check for a dataset",
		Long: `Read the dataset in DIR once (generated or augmented) and report what a training
run needs: samples and groups per split; the per-channel mean and standard
deviation of the image intensities of the --split split (Welford's one-pass
method; population std, in 0..255 units) to normalize with (x − mean) / std;
mask pixels per class with their frequency and two sets of loss weights
(inverse frequency, normalized to mean 1 over the classes present, and
median-frequency balancing, Eigen & Fergus 2015; the ignore id 255 is left
out); object counts, areas and objects per sample per class; each target's
range, mean and std; and leakage: images in different splits whose 64-bit
difference hashes (dHash) are within --threshold bits, each candidate then
confirmed by comparing the two images at full size (mean absolute gray
difference of at most 4 levels), and groups present in more than one split.
The hash sees a 9×8 thumbnail, so scenes with the same coarse layout (one
die on the same felt) are candidates; the full-size comparison keeps copies,
re-encodes and lightly noised duplicates and drops those look-alikes.
Warnings name classes missing from the split, thin strata, leakage and
constant targets.

Checksums are not verified (that is ` + "`trueset verify`" + `).`,
		Example: `  trueset stats demo
  trueset stats demo --json > demo-stats.json

  # exact duplicates only, class weights from another split
  trueset stats dice --threshold 0 --split val`,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return usagef("stats takes one dataset folder")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error { return runStats(args[0], o, stdout) },
	}
	f := cmd.Flags()
	f.BoolVar(&o.json, "json", false, "print the statistics as one JSON document")
	f.StringVar(&o.split, "split", inspect.DefaultSplit, "the split for normalization, class weights and target scales")
	f.IntVar(&o.threshold, "threshold", inspect.DefaultThreshold, "report image pairs across splits within this many dHash bits (0 = identical hashes)")
	f.IntVarP(&o.workers, "workers", "j", min(runtime.NumCPU(), 8), "parallel decoders (the report does not depend on it)")
	return cmd
}

// statsJSONOut is what `stats --json` prints: the command's name, then the
// statistics ("dir", "samples", "splits" in dataset.json's shape, …), as the
// --json summaries of the other commands begin.
type statsJSONOut struct {
	Command string `json:"command"`
	*inspect.Stats
}

func runStats(dir string, o *statsOptions, stdout io.Writer) error {
	if o.threshold < 0 || o.threshold > 32 {
		return usagef("--threshold %d: want 0..32 bits of 64", o.threshold)
	}
	if o.workers < 1 || o.workers > 1024 {
		return usagef("--workers %d: want 1..1024", o.workers)
	}
	if err := checkFolder("", dir); err != nil {
		return err
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		return err
	}
	if len(d.Splits.Names) > 0 && !slices.Contains(d.Splits.Names, o.split) {
		return usagef("--split %s: the dataset's splits are %s", o.split, strings.Join(d.Splits.Names, ", "))
	}
	th := o.threshold
	if th == 0 {
		th = inspect.ExactOnly
	}
	st, err := inspect.Compute(dir, inspect.Options{Split: o.split, Threshold: th, Workers: o.workers})
	if err != nil {
		return err
	}
	if o.json {
		enc := json.NewEncoder(stdout)
		enc.SetEscapeHTML(false)
		enc.SetIndent("", "  ")
		return enc.Encode(statsJSONOut{Command: "stats", Stats: st})
	}
	printStats(stdout, d, st)
	return nil
}

// num prints a figure with up to 4 decimals and no trailing zeros
// (inspect.Figure): never float noise such as 32.62767203840939.
func num(f float64) string { return inspect.Figure(f) }

func printStats(w io.Writer, d *manifest.Dataset, st *inspect.Stats) {
	mode := d.Mode
	if mode == "" {
		mode = "?"
	}
	kind := "generated"
	if d.Augment != nil {
		kind = "augmented"
	}
	size := fmt.Sprintf("%dx%d", d.Width, d.Height)
	if d.Width <= 0 || d.Height <= 0 {
		size = "sizes vary"
	}
	fmt.Fprintf(w, "dataset %s: %s, %s %s, %s, seed %d\n\n", st.Dir, inspect.Plural(st.Samples, "sample"), size, mode, kind, d.Seed)
	table := func() *tabwriter.Writer { return tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight) }

	fmt.Fprintln(w, "splits:")
	tw := table()
	fmt.Fprintf(tw, "split\tsamples\tgroups\t\n")
	for _, s := range st.PerSplit {
		fmt.Fprintf(tw, "%s\t%d\t%d\t\n", s.Name, s.Samples, s.Groups)
	}
	tw.Flush()
	if len(st.Splits.Strata) > 0 {
		fmt.Fprintln(w)
		printSplitTable(w, st.Splits)
	}

	p := st.Pixels
	fmt.Fprintf(w, "\nnormalization over split %s (%s per channel, 0..255 units; std is the population std):\n", p.Split, inspect.Plural(int(p.Count), "value"))
	tw = table()
	fmt.Fprintf(tw, "channel\tmean\tstd\tmean/255\tstd/255\tnormalize\t\n")
	for c := range p.Mean {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t(x − %s) / %s\t\n", p.Names[c], num(p.Mean[c]), num(p.Std[c]),
			num(p.Mean[c]/255), num(p.Std[c]/255), num(p.Mean[c]), num(p.Std[c]))
	}
	tw.Flush()

	fmt.Fprintf(w, "\nclasses (mask pixels of split %s; %d labeled", p.Split, st.LabeledPixels)
	if st.IgnorePixels > 0 {
		fmt.Fprintf(w, ", %d ignore (255) left out", st.IgnorePixels)
	}
	fmt.Fprintln(w, "):")
	tw = table()
	fmt.Fprintf(tw, "id\tclass\tpixels\tfrequency\tweight 1/f\tweight median-f\t\n")
	for _, c := range st.Classes {
		fmt.Fprintf(tw, "%d\t%s\t%d\t%s\t%s\t%s\t\n", c.ID, c.Name, c.Pixels, num(c.Frequency), num(c.WeightInverse), num(c.WeightMedian))
	}
	tw.Flush()
	fmt.Fprintln(w, "  1/f: inverse frequency, mean 1 over the classes present; median-f: median frequency / frequency in the images containing the class (Eigen & Fergus 2015)")

	fmt.Fprintln(w, "\nobjects (all splits; area in mask pixels):")
	tw = table()
	fmt.Fprintf(tw, "class\tobjects\t%s\tarea min\tmedian\tmax\t\n", strings.Join(splitNames(st), "\t"))
	any := false
	for _, c := range st.Classes {
		if c.Objects == 0 {
			continue
		}
		any = true
		fmt.Fprintf(tw, "%s\t%d", c.Name, c.Objects)
		for _, s := range splitNames(st) {
			fmt.Fprintf(tw, "\t%d", c.ObjectsBySplit[s])
		}
		fmt.Fprintf(tw, "\t%d\t%s\t%d\t\n", c.AreaMin, num(c.AreaMedian), c.AreaMax)
	}
	tw.Flush()
	if !any {
		fmt.Fprintln(w, "  no objects")
	} else {
		fmt.Fprintln(w, "\nsamples by number of objects of the class (count:samples):")
		tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
		for _, c := range st.Classes {
			if c.Objects == 0 {
				continue
			}
			fmt.Fprintf(tw, "  %s\t%s\n", c.Name, perSample(c.PerSample))
		}
		tw.Flush()
	}

	if len(st.Targets) > 0 {
		fmt.Fprintf(w, "\ntargets (split %s; std is the population std):\n", p.Split)
		tw = table()
		fmt.Fprintf(tw, "target\ttype\tcount\tmin\tmax\tmean\tstd\tdistinct\t\n")
		for _, t := range st.Targets {
			if t.Numeric {
				fmt.Fprintf(tw, "%s\t%s\t%d\t%s\t%s\t%s\t%s\t%d\t\n", t.Name, t.Type(), t.Count, num(t.Min), num(t.Max), num(t.Mean), num(t.Std), t.Distinct)
			} else {
				fmt.Fprintf(tw, "%s\t%s\t%d\t–\t–\t–\t–\t%d\t\n", t.Name, t.Type(), t.Count, t.Distinct)
			}
		}
		tw.Flush()
	}
	printLossScales(w, st) // lossscale.go
	// The instruments a recipe planted: manifest/inspect/planted.go.
	st.Planted.WriteText(w)

	l := st.Leakage
	fmt.Fprintf(w, "\nleakage (64-bit dHash of %s, Hamming distance ≤ %d across splits, %s; %s, confirmed when %s):\n", inspect.Plural(l.Images, "image"), l.Threshold, l.Index, inspect.Plural(l.Candidates, "candidate"), l.Confirm)
	if l.PairsFound == 0 {
		fmt.Fprintln(w, "  no near-duplicate pairs across splits")
	} else {
		tw = table()
		fmt.Fprintf(tw, "a\tsplit\tb\tsplit\tdistance\tmean diff\tidentical\t\n")
		for i, pr := range l.Pairs {
			if i == maxLeakRows {
				break
			}
			same := "no"
			if pr.Identical {
				same = "yes"
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%d\t%.2f\t%s\t\n", pr.A, pr.SplitA, pr.B, pr.SplitB, pr.Distance, pr.MeanAbsDiff, same)
		}
		tw.Flush()
		if l.PairsFound > maxLeakRows {
			fmt.Fprintf(w, "  … %s in all (--json lists up to %d)\n", inspect.Plural(l.PairsFound, "pair"), inspect.MaxLeakPairs)
		}
		fmt.Fprintln(w, "  identical = the records give both images the same SHA-256")
	}
	if len(l.GroupsSpanned) == 0 {
		fmt.Fprintln(w, "  no group in more than one split")
	} else {
		fmt.Fprintf(w, "  groups in more than one split: %s\n", strings.Join(l.GroupsSpanned, ", "))
	}

	if len(st.Warnings) > 0 {
		fmt.Fprintln(w, "\nwarnings:")
		for _, s := range st.Warnings {
			fmt.Fprintf(w, "  - %s\n", s)
		}
	}
}

func splitNames(st *inspect.Stats) []string {
	out := make([]string, len(st.PerSplit))
	for i, s := range st.PerSplit {
		out[i] = s.Name
	}
	return out
}

// perSample prints "0:12 1:40 2:30" in numeric order.
func perSample(m map[string]int) string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool { return manifest.NaturalLess(keys[i], keys[j]) })
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = k + ":" + strconv.Itoa(m[k])
	}
	return strings.Join(parts, " ")
}
