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
