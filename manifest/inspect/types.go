package inspect

import (
	"math"
	"strconv"
	"strings"

	"github.com/trueset/trueset/manifest"
)

// Stats is everything `trueset stats` reports; `--json` prints it as is
// (after "command": "stats"). Its keys follow the --json summaries of the
// other commands: "dir", "samples", and the split table under "splits" in
// exactly dataset.json's shape (manifest.SplitTable).
type Stats struct {
	Dir      string              `json:"dir"`       // the dataset folder
	Samples  int                 `json:"samples"`   // samples in all (manifest records)
	Splits   manifest.SplitTable `json:"splits"`    // dataset.json's split table: names, ratios, counts, strata
	PerSplit []SplitStats        `json:"per_split"` // samples and groups counted in the manifest, in split order
	Pixels   PixelStats          `json:"pixels"`    // normalization, over the train split
	Classes  []ClassStats        `json:"classes"`   // in class-id order, background included
	Targets  []TargetStats       `json:"targets"`   // in dataset.json's target order
	Leakage  Leakage             `json:"leakage"`   // near-duplicates across splits
	Warnings []string            `json:"warnings"`  // anything a user should look at

	// The recipe's instruments as written (planted.go); absent without any.
	Planted *Planted `json:"planted,omitempty"`

	// LossScales is each task's loss of the best constant prediction and
	// the weight that puts it at 1 (lossscale.go).
	LossScales []LossScale `json:"loss_scales"`

	// LabeledPixels and IgnorePixels count the mask pixels of the train
	// split with a class id and with the ignore id 255.
	LabeledPixels int64 `json:"labeled_pixels"`
	IgnorePixels  int64 `json:"ignore_pixels"`
}

// SplitStats counts one split's samples and groups in the manifest.
type SplitStats struct {
	Name    string `json:"name"`
	Samples int    `json:"samples"`
	Groups  int    `json:"groups"`
}

// PixelStats is the per-channel mean and standard deviation of the image
// intensities of one split (the train split), in 0..255 units, computed in
// one streaming pass (Welford). Normalize a pixel v of channel c as
// (v − Mean[c]) / Std[c] to reach mean 0 and variance 1. Std is the
// population standard deviation (divided by Count, not Count − 1).
type PixelStats struct {
	Split    string    `json:"split"`
	Channels int       `json:"channels"`
	Count    int64     `json:"count"` // values per channel
	Mean     []float64 `json:"mean"`
	Std      []float64 `json:"std"`

	Names     []string `json:"names"`     // "gray", or "R", "G", "B"
	Estimator string   `json:"estimator"` // "population"
}

// ClassStats is one class's share of the mask pixels and its objects.
type ClassStats struct {
	ID        int     `json:"id"`
	Name      string  `json:"name"`
	Pixels    int64   `json:"pixels"`    // mask pixels of this class (train split)
	Frequency float64 `json:"frequency"` // Pixels / all labeled pixels (ignore excluded)
	// WeightInverse is 1/Frequency, normalized so the weights of classes
	// present average 1; WeightMedian is median-frequency balancing
	// (Eigen & Fergus 2015): median(freq_c) / freq_c, with freq_c the
	// class's pixels over the pixels of the images where it appears.
	WeightInverse float64        `json:"weight_inverse"`
	WeightMedian  float64        `json:"weight_median"`
	Objects       int            `json:"objects"`  // instances in all splits
	AreaMin       int            `json:"area_min"` // object areas in pixels
	AreaMedian    float64        `json:"area_median"`
	AreaMax       int            `json:"area_max"`
	PerSample     map[string]int `json:"per_sample"` // samples by number of objects of this class ("0", "1", …)

	PresentPixels  int64          `json:"present_pixels"`   // labeled pixels of the train images containing the class
	ObjectsBySplit map[string]int `json:"objects_by_split"` // instances per split
}

// TargetStats describes one target over the samples of one split (the
// train split): Count samples carry it with Distinct values; Min, Max, Mean
// and Std (population, Welford) are over its numeric values.
type TargetStats struct {
	Name     string  `json:"name"`
	Numeric  bool    `json:"numeric"`
	Count    int     `json:"count"`
	Min      float64 `json:"min"`
	Max      float64 `json:"max"`
	Mean     float64 `json:"mean"`
	Std      float64 `json:"std"`
	Distinct int     `json:"distinct"` // distinct values (text targets)

	Split string `json:"split"`
}

// Type says how a target's values read, in the words `trueset stats` and
// the report both use: "numeric" when every value is a number (Numeric),
// "text" when any is text, "none" when no sample of the split carries it.
// (Not "number": that is a recipe target kind.)
func (t TargetStats) Type() string {
	switch {
	case t.Count == 0:
		return "none"
	case t.Numeric:
		return "numeric"
	}
	return "text"
}

// Figure prints a measured value for reading: rounded to 4 decimals with
// trailing zeros dropped ("32.6277", "0.5", "12"), never float noise such
// as 32.62767203840939. JSON keeps the exact value.
func Figure(f float64) string {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return strconv.FormatFloat(f, 'f', -1, 64)
	}
	s := strconv.FormatFloat(f, 'f', 4, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}

// Plural is "1 pair", "2 pairs", "0 pairs": n and the noun, with "s" unless
// n is 1 (or the plural form given, for nouns such as "stratum").
func Plural(n int, noun string, plural ...string) string {
	if n == 1 {
		return strconv.Itoa(n) + " " + noun
	}
	if len(plural) > 0 {
		return strconv.Itoa(n) + " " + plural[0]
	}
	return strconv.Itoa(n) + " " + noun + "s"
}

// Leakage reports identical or near-identical images in different splits —
// candidates by a 64-bit difference hash (dHash) within a Hamming-distance
// threshold, each confirmed by comparing the two images at full size — and
// groups that span splits.
type Leakage struct {
	Method        string     `json:"method"`    // "dhash-64"
	Threshold     int        `json:"threshold"` // pairs at distance ≤ Threshold are reported
	Pairs         []LeakPair `json:"pairs"`
	GroupsSpanned []string   `json:"groups_spanning_splits"`

	Index      string `json:"index"`       // the search: "all pairs" or the pigeonhole multi-index
	Images     int    `json:"images"`      // images hashed (all splits)
	PairsFound int    `json:"pairs_found"` // confirmed pairs; Pairs lists the first MaxLeakPairs, in record order

	Candidates int    `json:"candidates"` // pairs within the dHash threshold, before confirmation
	Confirm    string `json:"confirm"`    // the full-size test a candidate must pass
}

// LeakPair is one near-duplicate pair across splits.
type LeakPair struct {
	A        string `json:"a"`
	SplitA   string `json:"split_a"`
	B        string `json:"b"`
	SplitB   string `json:"split_b"`
	Distance int    `json:"distance"`

	Identical   bool    `json:"identical"`     // the records give both images the same SHA-256
	MeanAbsDiff float64 `json:"mean_abs_diff"` // mean absolute gray difference at full size
}
