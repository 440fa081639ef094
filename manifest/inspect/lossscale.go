package inspect

import (
	"fmt"
	"math"
	"sort"

	"github.com/trueset/trueset/manifest"
)

// LossScale is one task's loss before any learning: the loss of the best
// constant prediction, from the dataset alone.
//
//   - A numeric target under squared error: the best constant is the mean,
//     and its mean squared error is the variance (population, over the
//     split).
//   - A text target, or the semantic mask per pixel, under cross-entropy
//     (log loss, natural logarithm): the best constant prediction is the
//     class frequencies, and its cross-entropy is their entropy
//     −Σ p·ln p (nats); the ignore id 255 is left out.
//
// Both are standard results (C. M. Bishop, "Pattern Recognition and
// Machine Learning", Springer 2006, §1.5.5 for the squared loss and §1.6
// for entropy; from memory). Weight is 1 / ConstantLoss, which puts every
// task's starting loss at 1 so that no loss swamps the others in a
// multitask sum (common practice; a fixed weighting, not a learned one).
type LossScale struct {
	Task         string  `json:"task"`          // a target's name, or "mask"
	Loss         string  `json:"loss"`          // "squared error" or "cross-entropy"
	Predictor    string  `json:"predictor"`     // the best constant: "mean" or "class frequencies"
	ConstantLoss float64 `json:"constant_loss"` // its loss: variance, or entropy in nats
	// Weight is 1 / ConstantLoss; 0 when the loss is 0 (a constant target
	// or a one-class mask: nothing to learn, no weight).
	Weight  float64 `json:"weight"`
	Classes int     `json:"classes,omitempty"` // distinct values or classes, for cross-entropy
	Split   string  `json:"split"`
}

// LossScaleMethod is the one-line citation printed beside the table.
const LossScaleMethod = "loss of the best constant prediction: variance for squared error, entropy of the class frequencies (nats) for cross-entropy (Bishop 2006, §1.5.5, §1.6); weight = 1 / that loss puts every task's starting loss at 1 (common practice)"

// lossScales computes the loss scales of the split's numeric targets
// (from the target statistics), text targets (from their value frequencies
// in the manifest) and the mask (from the class pixel frequencies).
func lossScales(dir string, st *Stats) ([]LossScale, error) {
	split := st.Pixels.Split
	out := []LossScale{}
	texts := map[string]map[string]int{}
	for _, t := range st.Targets {
		if t.Count > 0 && !t.Numeric {
			texts[t.Name] = map[string]int{}
		}
	}
	if len(texts) > 0 {
		err := manifest.ReadManifest(dir, func(r *manifest.Record) error {
			if r.Split != split {
				return nil
			}
			for name, m := range texts {
				if v, ok := r.Targets[name]; ok {
					m[v.String()]++
				}
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	for _, t := range st.Targets {
		switch {
		case t.Count == 0:
			continue
		case t.Numeric:
			l := t.Std * t.Std
			out = append(out, LossScale{Task: t.Name, Loss: "squared error", Predictor: "mean", ConstantLoss: l, Weight: inverse(l), Split: split})
		default:
			counts := make([]int64, 0, len(texts[t.Name]))
			for _, c := range texts[t.Name] {
				counts = append(counts, int64(c))
			}
			h := Entropy(counts)
			out = append(out, LossScale{Task: t.Name, Loss: "cross-entropy", Predictor: "class frequencies", ConstantLoss: h, Weight: inverse(h), Classes: len(counts), Split: split})
		}
	}
	var px []int64
	for _, c := range st.Classes {
		if c.Pixels > 0 {
			px = append(px, c.Pixels)
		}
	}
	if len(px) > 0 {
		h := Entropy(px)
		out = append(out, LossScale{Task: "mask", Loss: "cross-entropy", Predictor: "class frequencies", ConstantLoss: h, Weight: inverse(h), Classes: len(px), Split: split})
	}
	return out, nil
}

func inverse(l float64) float64 {
	if l <= 0 || math.IsNaN(l) {
		return 0
	}
	return 1 / l
}

// Entropy is −Σ p·ln p of the frequencies p = counts / Σ counts, in nats,
// summed from the smallest term up for a sum that does not depend on the
// order of counts.
func Entropy(counts []int64) float64 {
	var n int64
	for _, c := range counts {
		n += c
	}
	if n == 0 {
		return 0
	}
	terms := make([]float64, 0, len(counts))
	for _, c := range counts {
		if c > 0 {
			p := float64(c) / float64(n)
			terms = append(terms, -p*math.Log(p))
		}
	}
	sort.Float64s(terms)
	h := 0.0
	for _, t := range terms {
		h += t
	}
	return h
}

// repLossScales is the report's table of LossScales, beside the targets.
func repLossScales(s *Stats) repTable {
	t := repTable{ID: "loss-scales", Empty: "No targets or mask pixels.", Head: []string{"task", "loss", "best constant", "its loss", "weight 1/loss"}}
	for i, l := range s.LossScales {
		p := fmt.Sprintf("loss_scales.%d.", i)
		t.Rows = append(t.Rows, []repCell{repText(p+"task", l.Task), repText(p+"loss", l.Loss), repText(p+"predictor", l.Predictor),
			repNum(p+"constant_loss", l.ConstantLoss, 4), repNum(p+"weight", l.Weight, 4)})
	}
	return t
}
