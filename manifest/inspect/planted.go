package inspect

import (
	"fmt"
	"image"
	"io"
	"math"
	"sort"
	"strings"
	"text/tabwriter"

	"github.com/trueset/trueset/manifest"
)

// Planted reports what a dataset's instruments planted, per split, as read
// back from the written files: the label-noise rate, the held-out samples,
// and the correlation between the bait cue measured in the images and the
// target it baits.
type Planted struct {
	Noise   []NoiseRate `json:"noise,omitempty"`
	HeldOut []HeldOut   `json:"held_out,omitempty"`
	Bait    *BaitStats  `json:"bait,omitempty"`
}

// NoiseRate is one split's planted label noise: Noisy of Samples records
// carry a mislabel block (Rate = Noisy / Samples), by corruption kind.
type NoiseRate struct {
	Split   string         `json:"split"`
	Samples int            `json:"samples"`
	Noisy   int            `json:"noisy"`
	Rate    float64        `json:"rate"`
	Kinds   map[string]int `json:"kinds"`
	Planted bool           `json:"planted"` // the recipe plants noise in this split
}

// HeldOut is one split's samples showing a held-out combination.
type HeldOut struct {
	Split   string         `json:"split"`
	Samples int            `json:"samples"`
	Held    int            `json:"held_out"`
	Combos  map[string]int `json:"combos"`
}

// BaitStats is the bait cue measured in the written images against its
// target, per split.
type BaitStats struct {
	Cue     string      `json:"cue"`    // corner-mark, background or brightness
	Target  string      `json:"target"` // the baited target
	Above   float64     `json:"above"`  // the answer is target > above
	Measure string      `json:"measure"`
	Splits  []BaitSplit `json:"splits"`
	spec    *manifest.BaitSpec
	acc     map[string]*coMoments
	answers map[string]*coMoments
}

// BaitSplit is one split's Pearson correlation between the measured cue
// level and the answer (target > above, 1 or 0) and between the cue level
// and the target's value; 0 when either does not vary.
type BaitSplit struct {
	Split       string  `json:"split"`
	Samples     int     `json:"samples"`
	CueAnswer   float64 `json:"r_cue_answer"`
	CueTarget   float64 `json:"r_cue_target"`
	MeanCueOn   float64 `json:"mean_cue_answer_yes"` // mean measured level where the answer is yes
	MeanCueOff  float64 `json:"mean_cue_answer_no"`
	Baited      bool    `json:"baited"` // the cue agrees with the answer in this split by design
	AnswerShare float64 `json:"answer_share"`
}

// coMoments accumulates the means and co-moments of pairs (x, y) in one
// pass: Welford's update extended to the covariance (Welford 1962; the
// pairwise form in Chan, Golub & LeVeque 1983).
type coMoments struct {
	n                     int
	mx, my, sxx, syy, sxy float64
	sumXYes, sumXNo       float64 // the measured levels where the answer is yes, no
	nYes, nNo             int
}

func (c *coMoments) add(x, y float64) {
	c.n++
	dx := x - c.mx
	c.mx += dx / float64(c.n)
	dy := y - c.my
	c.my += dy / float64(c.n)
	c.sxx += dx * (x - c.mx)
	c.syy += dy * (y - c.my)
	c.sxy += dx * (y - c.my)
}

// r is Pearson's correlation coefficient, 0 when x or y does not vary.
func (c *coMoments) r() float64 {
	if c.sxx <= 0 || c.syy <= 0 {
		return 0
	}
	return c.sxy / math.Sqrt(c.sxx*c.syy)
}

// ComputePlanted reads DIR's records (and, for bait, decodes every image,
// and for a background cue its mask) and reports the instruments planted;
// nil when the recipe plants none.
func ComputePlanted(dir string, d *manifest.Dataset) (*Planted, error) {
	in, err := manifest.ReadInstruments(d.Recipe)
	if err != nil {
		return nil, err
	}
	if in.Mislabel == nil && in.HoldOut == nil && in.Bait == nil {
		return nil, nil
	}
	p := &Planted{}
	noise := map[string]*NoiseRate{}
	held := map[string]*HeldOut{}
	var b *BaitStats
	if in.Bait != nil {
		b = &BaitStats{Cue: in.Bait.Cue.Kind, Target: in.Bait.Target, Above: in.Bait.Above, spec: in.Bait,
			acc: map[string]*coMoments{}, answers: map[string]*coMoments{}}
		switch in.Bait.Cue.Kind {
		case "corner-mark":
			b.Measure = fmt.Sprintf("mean gray level of the %dx%d %s square", in.Bait.Cue.Size, in.Bait.Cue.Size, in.Bait.Cue.Corner)
		case "background":
			b.Measure = "mean gray level of the background pixels (mask value 0)"
		default:
			b.Measure = "mean gray level of the image"
		}
	}
	var order []string
	seen := map[string]bool{}
	err = manifest.ReadManifest(dir, func(r *manifest.Record) error {
		if !seen[r.Split] {
			seen[r.Split] = true
			order = append(order, r.Split)
		}
		if in.Mislabel != nil {
			n := noise[r.Split]
			if n == nil {
				n = &NoiseRate{Split: r.Split, Kinds: map[string]int{}}
				for _, s := range in.Mislabel.Splits {
					n.Planted = n.Planted || s == r.Split
				}
				noise[r.Split] = n
			}
			n.Samples++
			if r.Mislabel != nil {
				n.Noisy++
				n.Kinds[r.Mislabel.Kind]++
			}
		}
		if in.HoldOut != nil {
			h := held[r.Split]
			if h == nil {
				h = &HeldOut{Split: r.Split, Combos: map[string]int{}}
				held[r.Split] = h
			}
			h.Samples++
			if r.HeldOut != "" {
				h.Held++
				h.Combos[r.HeldOut]++
			}
		}
		if b != nil {
			return b.measure(dir, r)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	// Splits in dataset.json's order, then any others in record order.
	names := append([]string(nil), d.Splits.Names...)
	for _, s := range order {
		if !contains(names, s) {
			names = append(names, s)
		}
	}
	for _, s := range names {
		if n := noise[s]; n != nil {
			n.Rate = float64(n.Noisy) / float64(n.Samples)
			p.Noise = append(p.Noise, *n)
		}
		if h := held[s]; h != nil {
			p.HeldOut = append(p.HeldOut, *h)
		}
		if b != nil && b.acc[s] != nil {
			c, a := b.acc[s], b.answers[s]
			bs := BaitSplit{Split: s, Samples: c.n, CueAnswer: a.r(), CueTarget: c.r(), Baited: contains(b.spec.Splits, s)}
			if a.nYes > 0 {
				bs.MeanCueOn = a.sumXYes / float64(a.nYes)
			}
			if a.nNo > 0 {
				bs.MeanCueOff = a.sumXNo / float64(a.nNo)
			}
			bs.AnswerShare = float64(a.nYes) / float64(a.n)
			b.Splits = append(b.Splits, bs)
		}
	}
	p.Bait = b
	return p, nil
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func (b *BaitStats) measure(dir string, r *manifest.Record) error {
	t, ok := r.Targets[b.Target]
	if !ok || t.IsStr {
		return fmt.Errorf("record %s: no numeric target %s to measure the bait against", r.ID, b.Target)
	}
	// One sample at a time, through the same header-checked opening as
	// Compute (read.go): at most an image and its mask decoded at once.
	f, _, err := openImage(dir, r.Image, r.Width, r.Height)
	if err != nil {
		return fmt.Errorf("record %s: %w", r.ID, err)
	}
	img, err := decodeClose(f)
	if err != nil {
		return fmt.Errorf("record %s: %w", r.ID, err)
	}
	var mk image.Image
	if b.Cue == "background" {
		f, _, err := openMask(dir, r.Mask, r.Width, r.Height)
		if err != nil {
			return fmt.Errorf("record %s: %w", r.ID, err)
		}
		if mk, err = decodeClose(f); err != nil {
			return fmt.Errorf("record %s: %w", r.ID, err)
		}
	}
	x, ok := b.spec.Cue.MeasureCue(img, mk)
	if !ok {
		return nil // no background pixel to measure: left out
	}
	if b.acc[r.Split] == nil {
		b.acc[r.Split], b.answers[r.Split] = &coMoments{}, &coMoments{}
	}
	b.acc[r.Split].add(x, t.Num)
	a := b.answers[r.Split]
	yes := 0.0
	if t.Num > b.Above {
		yes = 1
		a.sumXYes += x
		a.nYes++
	} else {
		a.sumXNo += x
		a.nNo++
	}
	a.add(x, yes)
	return nil
}

// WriteText prints the instruments' tables for `trueset stats`.
func (p *Planted) WriteText(w io.Writer) {
	if p == nil {
		return
	}
	table := func() *tabwriter.Writer { return tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight) }
	if len(p.Noise) > 0 {
		var kinds []string
		for _, n := range p.Noise {
			for k := range n.Kinds {
				if !contains(kinds, k) {
					kinds = append(kinds, k)
				}
			}
		}
		sort.Strings(kinds)
		fmt.Fprintln(w, "\nplanted label noise (records with a mislabel block; true labels kept beside the noisy ones):")
		tw := table()
		fmt.Fprintf(tw, "split\tplanted\tsamples\tnoisy\trate\t%s\t\n", strings.Join(kinds, "\t"))
		for _, n := range p.Noise {
			fmt.Fprintf(tw, "%s\t%s\t%d\t%d\t%s\t", n.Split, yesNo(n.Planted), n.Samples, n.Noisy, Figure(n.Rate))
			for _, k := range kinds {
				fmt.Fprintf(tw, "%d\t", n.Kinds[k])
			}
			fmt.Fprintln(tw)
		}
		tw.Flush()
	}
	if len(p.HeldOut) > 0 {
		fmt.Fprintln(w, "\nheld-out combinations (samples showing one, per split):")
		tw := table()
		fmt.Fprintf(tw, "split\tsamples\theld out\tcombinations\t\n")
		for _, h := range p.HeldOut {
			var parts []string
			for _, c := range sortedKeys(h.Combos) {
				parts = append(parts, fmt.Sprintf("%s %d", c, h.Combos[c]))
			}
			fmt.Fprintf(tw, "%s\t%d\t%d\t%s\t\n", h.Split, h.Samples, h.Held, orDash(strings.Join(parts, ", ")))
		}
		tw.Flush()
	}
	if b := p.Bait; b != nil {
		fmt.Fprintf(w, "\nbait: %s cue against %s > %s, measured from the images (%s); Pearson r:\n", b.Cue, b.Target, Figure(b.Above), b.Measure)
		tw := table()
		fmt.Fprintf(tw, "split\tcue\tsamples\tr(cue, answer)\tr(cue, %s)\tcue | yes\tcue | no\tyes share\t\n", b.Target)
		for _, s := range b.Splits {
			fmt.Fprintf(tw, "%s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\t\n", s.Split, b.cueMode(s.Baited), s.Samples, Figure(s.CueAnswer), Figure(s.CueTarget), Figure(s.MeanCueOn), Figure(s.MeanCueOff), Figure(s.AnswerShare))
		}
		tw.Flush()
	}
}

// cueMode says how the cue relates to the answer in a split: baited (agrees
// by design), or the recipe's elsewhere (independent or reversed).
func (b *BaitStats) cueMode(baited bool) string {
	if baited {
		return "baited"
	}
	if b.spec != nil && b.spec.Elsewhere != "" {
		return b.spec.Elsewhere
	}
	return "independent"
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

func orDash(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

func sortedKeys(m map[string]int) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// repPlanted gives the report's instruments tables (plain cells: the
// figures are in stats --json under "planted").
func repPlanted(s *Stats) []repTable {
	p := s.Planted
	if p == nil {
		return nil
	}
	var out []repTable
	if len(p.Noise) > 0 {
		t := repTable{ID: "planted-noise", Head: []string{"split", "planted", "samples", "noisy", "rate"}}
		for _, n := range p.Noise {
			t.Rows = append(t.Rows, []repCell{repPlain(n.Split), repPlain(yesNo(n.Planted)), repPlainNum(fmt.Sprint(n.Samples)), repPlainNum(fmt.Sprint(n.Noisy)), repPlainNum(Figure(n.Rate))})
		}
		out = append(out, t)
	}
	if len(p.HeldOut) > 0 {
		t := repTable{ID: "planted-held-out", Head: []string{"split", "samples", "held out"}}
		for _, h := range p.HeldOut {
			t.Rows = append(t.Rows, []repCell{repPlain(h.Split), repPlainNum(fmt.Sprint(h.Samples)), repPlainNum(fmt.Sprint(h.Held))})
		}
		out = append(out, t)
	}
	if b := p.Bait; b != nil {
		t := repTable{ID: "planted-bait", Head: []string{"split", "cue", "samples", "r(cue, answer)", "r(cue, " + b.Target + ")"}}
		for _, s := range b.Splits {
			t.Rows = append(t.Rows, []repCell{repPlain(s.Split), repPlain(b.cueMode(s.Baited)), repPlainNum(fmt.Sprint(s.Samples)), repPlainNum(Figure(s.CueAnswer)), repPlainNum(Figure(s.CueTarget))})
		}
		out = append(out, t)
	}
	return out
}
