package manifest

import (
	"fmt"
	"sort"
	"strings"
)

// Stratification keys:
//
//	NAME        the value of target NAME
//	class:NAME  the number of objects of class NAME
//	classes     the set of classes present, e.g. "nut+washer" ("none" if empty)
//	""          one stratum for everything ("all")
//
// StratumOf returns the stratum of a record under key.
func StratumOf(r *Record, key string) (string, error) {
	switch {
	case key == "":
		return "all", nil
	case key == "classes":
		set := map[string]bool{}
		for _, o := range r.Objects {
			set[o.ClassName] = true
		}
		if len(set) == 0 {
			return "none", nil
		}
		names := make([]string, 0, len(set))
		for n := range set {
			names = append(names, n)
		}
		sort.Strings(names)
		return strings.Join(names, "+"), nil
	case strings.HasPrefix(key, "class:"):
		name := strings.TrimPrefix(key, "class:")
		n := 0
		for _, o := range r.Objects {
			if o.ClassName == name {
				n++
			}
		}
		return fmt.Sprintf("%s=%d", name, n), nil
	}
	v, ok := r.Targets[key]
	if !ok {
		return "", &StratifyError{Key: key, Msg: fmt.Sprintf("record %s has no target %q to stratify by", r.ID, key)}
	}
	return key + "=" + v.String(), nil
}

// StratifyError is a stratification key that names no class or target of
// the dataset: the caller's mistake (the command line exits 2).
type StratifyError struct {
	Key string
	Msg string
}

func (e *StratifyError) Error() string { return fmt.Sprintf("stratify %q: %s", e.Key, e.Msg) }

// CheckStratify tells whether key names something a dataset with these
// classes (background, id 0, left out by the caller or not) and targets
// has: "", "classes", class:NAME for a known class, or a target name. Every
// command checks --stratify with it, so the message and exit code agree.
func CheckStratify(key string, classes, targets []string) error {
	switch {
	case key == "" || key == "classes":
		return nil
	case strings.HasPrefix(key, "class:"):
		name := strings.TrimPrefix(key, "class:")
		for _, c := range classes {
			if c == name {
				return nil
			}
		}
		return &StratifyError{Key: key, Msg: fmt.Sprintf("no class %q; the classes are %s", name, listOrNone(classes))}
	}
	for _, t := range targets {
		if t == key {
			return nil
		}
	}
	return &StratifyError{Key: key, Msg: fmt.Sprintf("no target %q; want a target name (%s), class:NAME (NAME one of %s) or classes", key, listOrNone(targets), listOrNone(classes))}
}

// ClassNames lists the names of the classes in a class table, background
// (id 0) left out.
func ClassNames(classes []Class) []string {
	var out []string
	for _, c := range classes {
		if c.ID != 0 {
			out = append(out, c.Name)
		}
	}
	return out
}

func listOrNone(names []string) string {
	if len(names) == 0 {
		return "none"
	}
	return strings.Join(names, ", ")
}

// Allocation is the outcome of a stratified split.
type Allocation struct {
	Split  []uint8 // split index per unit (group)
	Table  []Stratum
	Thin   []string // strata with fewer groups than splits of nonzero ratio
	Counts []int    // groups per split
}

// AllocateStrata deals units (groups) to splits. keys[u] is unit u's stratum.
// The strata × splits table is rounded by ControlledRound, so every cell and
// every split total is within ±1 of its exact share; with sp.Cover
// (--require-coverage) it is rounded by CoverRound instead, so every stratum
// with at least as many groups as splits of nonzero ratio is in every such
// split (the other bounds as CoverRound states them; thin strata are still
// listed in Thin and their empty cells by Uncovered, for the caller to
// refuse). Which units of a stratum go to which split is a seeded
// Fisher–Yates shuffle (stream "split" of seed). Strata are ordered by key;
// the result depends only on seed, keys and splits.
func AllocateStrata(seed uint64, keys []string, sp Splits) (*Allocation, error) {
	ids, names := StrataIDs(keys)
	return AllocateStrataIDs(seed, ids, names, sp)
}

// StrataIDs numbers string strata keys in order of first appearance.
func StrataIDs(keys []string) (ids []int32, names []string) {
	index := map[string]int32{}
	ids = make([]int32, len(keys))
	for u, k := range keys {
		id, ok := index[k]
		if !ok {
			id = int32(len(names))
			index[k] = id
			names = append(names, k)
		}
		ids[u] = id
	}
	return ids, names
}

// AllocateStrataIDs is AllocateStrata with the strata given as small
// integers: unit u is in stratum names[ids[u]] (names in any order, each
// once). It needs 4 bytes per unit where string keys need 16.
func AllocateStrataIDs(seed uint64, ids []int32, names []string, sp Splits) (*Allocation, error) {
	order := make([]int, len(names))
	for i := range order {
		order[i] = i
	}
	sort.Slice(order, func(a, b int) bool { return NaturalLess(names[order[a]], names[order[b]]) })
	rank := make([]int32, len(names)) // stratum id → position in natural key order
	sorted := make([]string, len(names))
	for pos, id := range order {
		rank[id] = int32(pos)
		sorted[pos] = names[id]
	}
	names = sorted
	counts := make([]int, len(names))
	for _, id := range ids {
		counts[rank[id]]++
	}
	members := make([][]int32, len(names))
	for s := range members {
		members[s] = make([]int32, 0, counts[s])
	}
	for u, id := range ids {
		s := rank[id]
		members[s] = append(members[s], int32(u))
	}
	sizes := make([]int, len(names))
	for s := range members {
		sizes[s] = len(members[s])
	}
	round := ControlledRound
	if sp.Cover {
		round = CoverRound
	}
	table, err := round(sizes, sp.Ratios)
	if err != nil {
		return nil, err
	}
	a := &Allocation{Split: make([]uint8, len(ids)), Counts: make([]int, len(sp.Names))}
	nonzero := 0
	for _, r := range sp.Ratios {
		if r > 0 {
			nonzero++
		}
	}
	for s, name := range names {
		m := members[s]
		rng := RNG(seed, 0x5011, uint64(s))
		for i := len(m) - 1; i > 0; i-- {
			j := rng.IntN(i + 1)
			m[i], m[j] = m[j], m[i]
		}
		st := Stratum{Key: name, Groups: len(m), Splits: map[string]int{}}
		k := 0
		for j, q := range table[s] {
			st.Splits[sp.Names[j]] = q
			a.Counts[j] += q
			for ; q > 0; q-- {
				a.Split[m[k]] = uint8(j)
				k++
			}
		}
		a.Table = append(a.Table, st)
		if len(m) < nonzero {
			a.Thin = append(a.Thin, name)
		}
	}
	return a, nil
}

// Uncovered lists "stratum in split" for every cell left empty although the
// split's ratio is above zero.
func (a *Allocation) Uncovered(sp Splits) []string {
	var out []string
	for _, st := range a.Table {
		for j, n := range sp.Names {
			if sp.Ratios[j] > 0 && st.Splits[n] == 0 {
				out = append(out, fmt.Sprintf("%s in %s", st.Key, n))
			}
		}
	}
	return out
}

// CoverageError is --require-coverage asked of strata that have fewer groups
// than there are splits of nonzero ratio: no allocation can put them in every
// split. It names them.
type CoverageError struct {
	Strata []string // "key (n groups)"
	Splits int      // splits of nonzero ratio
}

func (e *CoverageError) Error() string {
	return fmt.Sprintf("--require-coverage: %s fewer groups than the %d splits, so some split must lack %s: %s",
		Plural(len(e.Strata), "1 stratum has", fmt.Sprintf("%d strata have", len(e.Strata))), e.Splits,
		Plural(len(e.Strata), "it", "each"), strings.Join(e.Strata, ", "))
}

// CheckCoverage returns a *CoverageError naming the strata that cannot be in
// every split of nonzero ratio (fewer groups than those splits), or nil when
// every stratum can be — which, allocated with sp.Cover, every stratum is.
func (a *Allocation) CheckCoverage(sp Splits) error {
	nonzero := 0
	for _, r := range sp.Ratios {
		if r > 0 {
			nonzero++
		}
	}
	var thin []string
	for _, st := range a.Table {
		if st.Groups < nonzero {
			thin = append(thin, fmt.Sprintf("%s (%d %s)", st.Key, st.Groups, Plural(st.Groups, "group", "groups")))
		}
	}
	if len(thin) == 0 {
		return nil
	}
	return &CoverageError{Strata: thin, Splits: nonzero}
}

// NaturalLess orders strings with runs of digits compared as numbers, so
// "n=2" sorts before "n=10".
func NaturalLess(a, b string) bool {
	for a != "" && b != "" {
		da, db := digitRun(a), digitRun(b)
		if da > 0 && db > 0 {
			x, y := strings.TrimLeft(a[:da], "0"), strings.TrimLeft(b[:db], "0")
			if len(x) != len(y) {
				return len(x) < len(y)
			}
			if x != y {
				return x < y
			}
			if da != db {
				return da < db
			}
			a, b = a[da:], b[db:]
			continue
		}
		if a[0] != b[0] {
			return a[0] < b[0]
		}
		a, b = a[1:], b[1:]
	}
	return len(a) < len(b)
}

func digitRun(s string) int {
	i := 0
	for i < len(s) && s[i] >= '0' && s[i] <= '9' {
		i++
	}
	return i
}
