package manifest

import (
	"fmt"
	"math"
	"math/big"
	"strconv"
	"strings"
)

// DefaultSplits is the split used when none is given (train 80%, val 10%,
// test 10%: common practice).
const DefaultSplits = "train=0.8,val=0.1,test=0.1"

// Splits is an ordered list of named split ratios that sum to 1. Spec is the
// list as it was written (each pair trimmed of spaces), kept so a dataset
// stores "train=0.7,val=0.15,test=0.15" rather than a float's rendering.
type Splits struct {
	Names  []string
	Ratios []float64
	Spec   string
	Cover  bool // coverage first (--require-coverage): AllocateStrata rounds with CoverRound
}

// RatioSumTolerance is how far from 1 the written ratios may add up: they
// are summed exactly as decimals, so only ratios written with more digits
// than anyone types (1/3 as 0.3333333333) get near it.
const RatioSumTolerance = 1e-9

// ParseSplits reads "name=ratio,name=ratio,…". The ratios must add up to 1
// (summed exactly, as the decimals they are written as); they are kept as
// written, never rescaled, so no float noise such as 0.12500000000000003
// enters a dataset.
func ParseSplits(s string) (Splits, error) {
	var sp Splits
	seen := map[string]bool{}
	total := new(big.Rat)
	var parts []string // as written, trimmed
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		name, val, ok := strings.Cut(part, "=")
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
		r, rok := new(big.Rat).SetString(val)
		if err != nil || !rok || f < 0 || math.IsInf(f, 0) || f != f {
			return sp, fmt.Errorf("split %s: ratio %q is not a number ≥ 0", name, val)
		}
		seen[name] = true
		sp.Names = append(sp.Names, name)
		sp.Ratios = append(sp.Ratios, f)
		total.Add(total, r)
		parts = append(parts, part)
	}
	sum, _ := total.Float64()
	if math.Abs(sum-1) > RatioSumTolerance {
		return sp, fmt.Errorf("the ratios add up to %s, not 1; give each split its share, e.g. %s", ratString(total), DefaultSplits)
	}
	sp.Spec = strings.Join(parts, ",")
	return sp, nil
}

// ratString writes an exact decimal sum without trailing zeros.
func ratString(r *big.Rat) string {
	s := r.FloatString(12)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	return s
}

// String writes the splits back: the spec as written when it was parsed,
// else name=ratio pairs.
func (sp Splits) String() string {
	if sp.Spec != "" {
		return sp.Spec
	}
	parts := make([]string, len(sp.Names))
	for i, n := range sp.Names {
		parts[i] = n + "=" + strconv.FormatFloat(sp.Ratios[i], 'g', -1, 64)
	}
	return strings.Join(parts, ",")
}
