package manifest

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// DefaultSplits is the split used when none is given (train 80%, val 10%,
// test 10%: common practice).
const DefaultSplits = "train=0.8,val=0.1,test=0.1"

// Splits is an ordered list of named split ratios that sum to 1.
type Splits struct {
	Names  []string
	Ratios []float64
}

// ParseSplits reads "name=ratio,name=ratio,…". Ratios are normalized to sum 1.
func ParseSplits(s string) (Splits, error) {
	var sp Splits
	seen := map[string]bool{}
	total := 0.0
	for _, part := range strings.Split(s, ",") {
		name, val, ok := strings.Cut(strings.TrimSpace(part), "=")
		if !ok || name == "" {
			return sp, fmt.Errorf("split %q: want name=ratio, e.g. %s", part, DefaultSplits)
		}
		if seen[name] {
			return sp, fmt.Errorf("split %q is named twice", name)
		}
		if strings.ContainsAny(name, " /\\") {
			return sp, fmt.Errorf("split name %q: no spaces or slashes", name)
		}
		f, err := strconv.ParseFloat(val, 64)
		if err != nil || f < 0 || math.IsInf(f, 0) || f != f {
			return sp, fmt.Errorf("split %s: ratio %q is not a number ≥ 0", name, val)
		}
		seen[name] = true
		sp.Names = append(sp.Names, name)
		sp.Ratios = append(sp.Ratios, f)
		total += f
	}
	if total <= 0 {
		return sp, fmt.Errorf("split ratios %q add up to 0", s)
	}
	for i := range sp.Ratios {
		sp.Ratios[i] /= total
	}
	return sp, nil
}

// String writes the splits back as name=ratio pairs (normalized ratios).
func (sp Splits) String() string {
	parts := make([]string, len(sp.Names))
	for i, n := range sp.Names {
		parts[i] = n + "=" + strconv.FormatFloat(sp.Ratios[i], 'g', -1, 64)
	}
	return strings.Join(parts, ",")
}
