package main

import (
	"fmt"
	"io"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

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
	if t.Stratify == "" {
		fmt.Fprintf(w, "split %s, not stratified (one stratum, counted in groups):\n", t.Spec)
	} else {
		fmt.Fprintf(w, "split %s, stratified by %s (counted in groups):\n", t.Spec, t.Stratify)
	}
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

// seconds writes a duration in seconds with as many decimals as are worth
// reading: 0.42 s, 3.7 s, 33 s.
func seconds(secs float64) string {
	switch {
	case secs < 10:
		return fmt.Sprintf("%.2f s", secs)
	case secs < 100:
		return fmt.Sprintf("%.1f s", secs)
	}
	return fmt.Sprintf("%.0f s", secs)
}

// rate writes n per secs, rounded to a whole number, or "" when the time is
// too short to say.
func rate(n int, secs float64, unit string) string {
	if secs <= 0 {
		return ""
	}
	return fmt.Sprintf("%.0f %s/s", float64(n)/secs, unit)
}

// progress draws one status line on a terminal, redrawn in place:
//
//	generating tabletop-dice 12000/20000 60% elapsed 20s, left 13s, 600 samples/s
//
// The rate and the time left appear only once the run has gone on for
// progressSettle and done a few units, when they mean something; the line
// is cut to fit the terminal and cleared when the run ends.
type progress struct {
	mu    sync.Mutex
	w     io.Writer
	what  string
	unit  string
	total int
	width int
	start time.Time
	last  time.Time
	drawn int // width of the line on screen
}

// progressSettle is how long a run goes before its rate is shown.
const progressSettle = time.Second

func newProgress(w io.Writer, what, unit string, total, width int) *progress {
	if width <= 0 {
		width = 80
	}
	return &progress{w: w, what: what, unit: unit, total: total, width: width, start: time.Now()}
}

// set draws done of total, at most ten times a second.
func (p *progress) set(done int) {
	if p == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	now := time.Now()
	if now.Sub(p.last) < 100*time.Millisecond && done < p.total {
		return
	}
	p.last = now
	line := progressText(p.what, p.unit, done, p.total, now.Sub(p.start))
	if r := []rune(line); len(r) > p.width-1 {
		line = string(r[:p.width-1])
	}
	n := len([]rune(line))
	pad := ""
	if n < p.drawn {
		pad = strings.Repeat(" ", p.drawn-n)
	}
	fmt.Fprintf(p.w, "\r%s%s", line, pad)
	p.drawn = n
}

// finish clears the line.
func (p *progress) finish() {
	if p == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.drawn > 0 {
		fmt.Fprintf(p.w, "\r%s\r", strings.Repeat(" ", p.drawn))
		p.drawn = 0
	}
}

// progressText is the status line for done of total after elapsed.
func progressText(what, unit string, done, total int, elapsed time.Duration) string {
	pct := 0
	if total > 0 {
		pct = int(100 * int64(done) / int64(total))
	}
	s := fmt.Sprintf("%s %d/%d %d%% elapsed %s", what, done, total, pct, clock(elapsed))
	if elapsed >= progressSettle && done >= 4 {
		per := float64(done) / elapsed.Seconds()
		left := time.Duration(float64(total-done) / per * float64(time.Second))
		s += fmt.Sprintf(", left %s, %.0f %s/s", clock(left), per, unit)
	}
	return s
}

// clock writes a duration as 7s, 2m05s or 1h02m.
func clock(d time.Duration) string {
	s := int(d.Round(time.Second).Seconds())
	switch {
	case s < 60:
		return fmt.Sprintf("%ds", s)
	case s < 3600:
		return fmt.Sprintf("%dm%02ds", s/60, s%60)
	}
	return fmt.Sprintf("%dh%02dm", s/3600, s%3600/60)
}
