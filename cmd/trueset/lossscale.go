package main

import (
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/trueset/trueset/manifest/inspect"
)

// printLossScales prints the loss-scale table of `trueset stats`: each
// task's loss of the best constant prediction and the weight that puts it
// at 1 (inspect.LossScale).
func printLossScales(w io.Writer, st *inspect.Stats) {
	if len(st.LossScales) == 0 {
		return
	}
	fmt.Fprintf(w, "\nloss scales (split %s; the loss before any learning, and weights that start every task at 1):\n", st.Pixels.Split)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "task\tloss\tbest constant\tits loss\tweight 1/loss\t\n")
	for _, l := range st.LossScales {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t\n", l.Task, l.Loss, l.Predictor, num(l.ConstantLoss), num(l.Weight))
	}
	tw.Flush()
	for _, line := range wrapText(inspect.LossScaleMethod, 76) {
		fmt.Fprintf(w, "  %s\n", line)
	}
}
