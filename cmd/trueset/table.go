package main

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"

	"github.com/trueset/trueset/manifest"
)

// maxTableRows bounds the strata printed; dataset.json keeps them all.
const maxTableRows = 30

// printSplitTable prints the strata × splits table, counted in groups, with
// the groups per split and, when they differ (augmented copies), the samples.
func printSplitTable(w io.Writer, t manifest.SplitTable) {
	if len(t.Strata) == 0 {
		return
	}
	key := t.Stratify
	if key == "" {
		key = "(not stratified)"
	}
	fmt.Fprintf(w, "split %s, stratified by %s:\n", t.Spec, key)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "stratum\t%s\ttotal\t\n", strings.Join(t.Names, "\t"))
	for i, st := range t.Strata {
		if i == maxTableRows {
			fmt.Fprintf(tw, "… %d more strata (all in dataset.json)\t\n", len(t.Strata)-maxTableRows)
			break
		}
		fmt.Fprintf(tw, "%s", st.Key)
		for _, n := range t.Names {
			fmt.Fprintf(tw, "\t%d", st.Splits[n])
		}
		fmt.Fprintf(tw, "\t%d\t\n", st.Groups)
	}
	groups := map[string]int{}
	for _, st := range t.Strata {
		for _, n := range t.Names {
			groups[n] += st.Splits[n]
		}
	}
	row := func(label string, per map[string]int) {
		fmt.Fprintf(tw, "%s", label)
		all := 0
		for _, n := range t.Names {
			fmt.Fprintf(tw, "\t%d", per[n])
			all += per[n]
		}
		fmt.Fprintf(tw, "\t%d\t\n", all)
	}
	row("groups", groups)
	differ := false
	for _, n := range t.Names {
		if groups[n] != t.Counts[n] {
			differ = true
		}
	}
	if differ {
		row("samples", t.Counts)
	}
	tw.Flush()
	if len(t.Thin) > 0 {
		fmt.Fprintf(w, "thin strata (fewer groups than splits, so some split lacks them): %s\n", strings.Join(t.Thin, ", "))
	}
}
