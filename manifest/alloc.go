package manifest

import (
	"fmt"
	"math"
	"sort"
)

// ControlledRound rounds the strata × splits table of exact shares
// x[i][j] = sizes[i]·ratios[j] (ratios sum to 1) to integers so that at once:
//
//   - every cell is ⌊x[i][j]⌋ or ⌈x[i][j]⌉ (within ±1 of its share);
//   - every stratum's row adds up to sizes[i] exactly;
//   - every split's column adds up to ⌊Σᵢx[i][j]⌋ or ⌈Σᵢx[i][j]⌉ (within ±1
//     of the split's exact share).
//
// This is controlled rounding of a two-way table, which Cox & Ernst
// ("Controlled rounding", INFOR 20(4), 1982) show always exists and can be
// found as an integral network flow. Here: each cell starts at its floor; the
// leftover fractional parts fᵢⱼ must become whole units. A source sends
// Rᵢ = Σⱼ fᵢⱼ units (an integer, because sizes[i] is) to stratum i; stratum i
// may pass one unit to split j when fᵢⱼ > 0; split j passes between
// ⌊Cⱼ⌋ and ⌈Cⱼ⌉ units to the sink, Cⱼ = Σᵢ fᵢⱼ. The fractional parts
// themselves are a feasible flow, so an integral one exists (integrality of
// max-flow). It is found in two phases of Dinic's algorithm: first with split
// capacities ⌊Cⱼ⌋, which a scaled copy of f shows is reachable, then with
// ⌈Cⱼ⌉; augmenting paths never lower a flow into the sink, so the lower
// bounds survive the second phase.
func ControlledRound(sizes []int, ratios []float64) ([][]int, error) {
	S, K := len(sizes), len(ratios)
	out := make([][]int, S)
	frac := make([][]float64, S)
	colFrac := make([]float64, K)
	const eps = 1e-9
	for i, n := range sizes {
		if n < 0 {
			return nil, fmt.Errorf("stratum %d has negative size %d", i, n)
		}
		out[i] = make([]int, K)
		frac[i] = make([]float64, K)
		for j, r := range ratios {
			x := float64(n) * r
			fl := math.Floor(x + eps)
			out[i][j] = int(fl)
			if f := x - fl; f > eps {
				frac[i][j] = f
				colFrac[j] += f
			}
		}
	}
	// Flow network: 0 = source, 1..S strata, S+1..S+K splits, S+K+1 sink.
	g := newFlow(S + K + 2)
	src, sink := 0, S+K+1
	cell := make([][]int, S) // edge index of cell (i, j), or -1
	for i := range sizes {
		need := 0
		for j := range ratios {
			need += out[i][j]
		}
		rowLeft := sizes[i] - need
		if rowLeft > 0 {
			g.add(src, 1+i, rowLeft)
		}
		cell[i] = make([]int, K)
		for j := range ratios {
			cell[i][j] = -1
		}
		// Edges are tried last-added first: add them by rising fractional
		// part, so a unit goes where the share's remainder is largest (ties:
		// the earlier split) whenever the totals allow it — which makes a
		// one-stratum table exactly largest-remainder rounding.
		order := make([]int, 0, K)
		for j := range ratios {
			if frac[i][j] > 0 {
				order = append(order, j)
			}
		}
		sort.Slice(order, func(a, b int) bool {
			fa, fb := frac[i][order[a]], frac[i][order[b]]
			if fa != fb {
				return fa < fb
			}
			return order[a] > order[b] // ties go to the earlier split
		})
		for _, j := range order {
			cell[i][j] = g.add(1+i, 1+S+j, 1)
		}
	}
	colEdge := make([]int, K)
	for j := range ratios {
		colEdge[j] = g.add(1+S+j, sink, int(math.Floor(colFrac[j]+eps)))
	}
	g.maxflow(src, sink)
	for j := range ratios {
		g.cap[colEdge[j]] += int(math.Ceil(colFrac[j]-eps)) - int(math.Floor(colFrac[j]+eps))
	}
	g.maxflow(src, sink)
	for i := range sizes {
		for j := range ratios {
			if e := cell[i][j]; e >= 0 && g.flow[e] == 1 {
				out[i][j]++
			}
		}
		sum := 0
		for j := range ratios {
			sum += out[i][j]
		}
		if sum != sizes[i] {
			return nil, fmt.Errorf("internal: controlled rounding left stratum %d at %d of %d", i, sum, sizes[i])
		}
	}
	return out, nil
}

// flow is a small Dinic max-flow graph with paired forward/backward edges.
type flow struct {
	head, next, to, cap, flow []int
	level, it                 []int
}

func newFlow(n int) *flow {
	f := &flow{head: make([]int, n), level: make([]int, n), it: make([]int, n)}
	for i := range f.head {
		f.head[i] = -1
	}
	return f
}

// add inserts edge u→v with capacity c and returns its index.
func (f *flow) add(u, v, c int) int {
	e := len(f.to)
	f.to = append(f.to, v, u)
	f.cap = append(f.cap, c, 0)
	f.flow = append(f.flow, 0, 0)
	f.next = append(f.next, f.head[u], f.head[v])
	f.head[u], f.head[v] = e, e+1
	return e
}

func (f *flow) residual(e int) int { return f.cap[e] - f.flow[e] }

func (f *flow) bfs(s, t int) bool {
	for i := range f.level {
		f.level[i] = -1
	}
	f.level[s] = 0
	q := []int{s}
	for len(q) > 0 {
		u := q[0]
		q = q[1:]
		for e := f.head[u]; e >= 0; e = f.next[e] {
			if v := f.to[e]; f.level[v] < 0 && f.residual(e) > 0 {
				f.level[v] = f.level[u] + 1
				q = append(q, v)
			}
		}
	}
	return f.level[t] >= 0
}

func (f *flow) dfs(u, t, pushed int) int {
	if u == t {
		return pushed
	}
	for ; f.it[u] >= 0; f.it[u] = f.next[f.it[u]] {
		e := f.it[u]
		v := f.to[e]
		if f.level[v] != f.level[u]+1 || f.residual(e) <= 0 {
			continue
		}
		if d := f.dfs(v, t, min(pushed, f.residual(e))); d > 0 {
			f.flow[e] += d
			f.flow[e^1] -= d
			return d
		}
	}
	return 0
}

func (f *flow) maxflow(s, t int) int {
	total := 0
	for f.bfs(s, t) {
		copy(f.it, f.head)
		for {
			d := f.dfs(s, t, math.MaxInt)
			if d == 0 {
				break
			}
			total += d
		}
	}
	return total
}

// CoverRound is ControlledRound with coverage first: every stratum with at
// least as many members as there are splits of nonzero ratio ("covered") gets
// at least 1 in every such split. A stratum with fewer members ("thin") is
// rounded by the plain rules below and may be left out of some split; the
// caller refuses those (see CoverageError). With x[i][j] = sizes[i]·ratios[j]
// and C[j] = Σᵢ x[i][j], the result satisfies, in this order of priority:
//
//  1. every stratum's row adds up to sizes[i] exactly, and a split of ratio 0
//     gets nothing;
//  2. every cell of a covered stratum in a split of nonzero ratio is ≥ 1;
//  3. a cell whose share is below 1 in a covered stratum is exactly 1 (which
//     is ⌈x⌉, so within ±1); every other cell is ⌊x⌋ or ⌈x⌉, except in a
//     covered stratum whose small cells need more members than rounding up
//     leaves over (Σⱼ⌊x[i][j]⌋ + the number of cells raised to 1 > sizes[i]).
//     There the cells that are not raised are rounded down, and the missing
//     members are taken one at a time from the cell furthest above its share
//     (largest cell − share; ties: the larger share, then the earlier split),
//     never below 1. That stratum's row is then fully determined, e.g. 3
//     members at 0.8/0.1/0.1 (shares 2.4/0.3/0.3) give 1/1/1;
//  4. split totals: the members by which split totals fall short of ⌊C[j]⌋,
//     added over the splits, are as few as any table meeting 1–3 allows, and
//     then so are those by which they exceed ⌈C[j]⌉. So whenever a table
//     meeting 1–3 has every split total within ±1 of its share, this one has.
//
// When no covered stratum has a share below 1 in a split of nonzero ratio,
// rules 2–3 add nothing and the result equals ControlledRound's.
//
// The construction is that of ControlledRound (Cox & Ernst, "Controlled
// rounding", INFOR 20(4), 1982, from memory: controlled rounding of a
// two-way table as an integral network flow) with the cell bounds of rule 3:
// each cell starts at its lower bound lo, a source sends each stratum its
// leftover sizes[i] − Σⱼ lo units, a stratum passes one unit to split j where
// the cell's upper bound is lo + 1, and split j passes units to the sink in
// three phases of max flow: up to ⌊C[j]⌋ − base, then up to ⌈C[j]⌉ − base,
// then without limit (base = Σᵢ lo in split j). Max flow in phase 1 makes the
// total shortfall the least possible, phase 2 makes the total excess the least
// possible, and augmenting paths never lower a flow into the sink, so each
// phase keeps what the earlier ones reached (rule 4).
func CoverRound(sizes []int, ratios []float64) ([][]int, error) {
	S, K := len(sizes), len(ratios)
	const eps = 1e-9
	nonzero := 0
	for _, r := range ratios {
		if r > 0 {
			nonzero++
		}
	}
	lo := make([][]int, S)
	up := make([][]bool, S) // cell may take lo+1
	frac := make([][]float64, S)
	colFloor := make([]int, K) // Σᵢ⌊x⌋, then + ⌊Σᵢ frac⌋: ⌊C[j]⌋ without summing large floats
	colFrac := make([]float64, K)
	base := make([]int, K)
	left := make([]int, S)
	for i, n := range sizes {
		if n < 0 {
			return nil, fmt.Errorf("stratum %d has negative size %d", i, n)
		}
		lo[i], up[i], frac[i] = make([]int, K), make([]bool, K), make([]float64, K)
		x := make([]float64, K)
		raised := make([]bool, K)
		covered := n > 0 && n >= nonzero
		sum := 0
		for j, r := range ratios {
			x[j] = float64(n) * r
			fl := math.Floor(x[j] + eps)
			lo[i][j] = int(fl)
			colFloor[j] += int(fl)
			if f := x[j] - fl; f > eps {
				frac[i][j] = f
				colFrac[j] += f
				up[i][j] = true
			}
			if covered && r > 0 && lo[i][j] == 0 {
				lo[i][j], up[i][j], raised[j] = 1, false, true
			}
			sum += lo[i][j]
		}
		// Rule 3: members the raised cells need beyond the row's leftover
		// come from the cell furthest above its share, never below 1.
		for ; sum > n; sum-- {
			best := -1
			for j := range ratios {
				if raised[j] || lo[i][j] <= 1 {
					continue
				}
				if best < 0 {
					best = j
					continue
				}
				d, db := float64(lo[i][j])-x[j], float64(lo[i][best])-x[best]
				if d > db+eps || (math.Abs(d-db) <= eps && x[j] > x[best]+eps) {
					best = j
				}
			}
			if best < 0 {
				return nil, fmt.Errorf("internal: coverage cannot be met in stratum %d of %d", i, n)
			}
			lo[i][best]--
		}
		if sum == n {
			for j := range up[i] {
				up[i][j] = false // the row is fully determined
			}
		}
		left[i] = n - sum
		for j := range ratios {
			base[j] += lo[i][j]
		}
	}
	g := newFlow(S + K + 2)
	src, sink := 0, S+K+1
	cell := make([][]int, S)
	for i := range sizes {
		if left[i] > 0 {
			g.add(src, 1+i, left[i])
		}
		cell[i] = make([]int, K)
		order := make([]int, 0, K)
		for j := range ratios {
			cell[i][j] = -1
			if up[i][j] {
				order = append(order, j)
			}
		}
		// As in ControlledRound: edges are tried last-added first, so add
		// them by rising fractional part (ties: the later split first).
		sort.Slice(order, func(a, b int) bool {
			fa, fb := frac[i][order[a]], frac[i][order[b]]
			if fa != fb {
				return fa < fb
			}
			return order[a] > order[b]
		})
		for _, j := range order {
			cell[i][j] = g.add(1+i, 1+S+j, 1)
		}
	}
	colCeil := make([]int, K)
	for j := range ratios {
		colCeil[j] = colFloor[j] + int(math.Ceil(colFrac[j]-eps))
		colFloor[j] += int(math.Floor(colFrac[j] + eps))
	}
	total := 0
	for _, l := range left {
		total += l
	}
	colEdge := make([]int, K)
	for j := range ratios {
		colEdge[j] = g.add(1+S+j, sink, max(0, colFloor[j]-base[j]))
	}
	g.maxflow(src, sink)
	for j := range ratios {
		g.cap[colEdge[j]] = max(g.cap[colEdge[j]], colCeil[j]-base[j])
	}
	g.maxflow(src, sink)
	for j := range ratios {
		g.cap[colEdge[j]] = max(g.cap[colEdge[j]], total)
	}
	g.maxflow(src, sink)
	out := make([][]int, S)
	for i := range sizes {
		out[i] = lo[i]
		sum := 0
		for j := range ratios {
			if e := cell[i][j]; e >= 0 && g.flow[e] == 1 {
				out[i][j]++
			}
			sum += out[i][j]
		}
		if sum != sizes[i] {
			return nil, fmt.Errorf("internal: coverage-first rounding left stratum %d at %d of %d", i, sum, sizes[i])
		}
	}
	return out, nil
}
