// Command kernels prints figure 4 of the speed issue: the augmentation
// kernels (flip + rotate + crop-and-resize + Gaussian noise on an RGB image
// and its class and instance masks) done our way against the same steps
// composed from disintegration/imaging and golang.org/x/image/draw, at 64×64
// and 512×512 (bench/kernels has both paths). Both are timed in the same run,
// alternating in rounds, and the figure is the ratio of their medians, since
// absolute times on a shared machine drift. It also prints Plan.Copy (ours
// plus drawing the steps and measuring the labels again) against the same
// comparator.
//
//	go run ./bench/cmd/kernels [-rounds 7] [-round 200ms]
//
// The same paths as Go benchmarks: go test -run '^$' -bench Kernels ./augment/
package main

import (
	"flag"
	"fmt"
	"os"
	"runtime"
	"sort"
	"time"

	"github.com/trueset/trueset/bench/kernels"
)

func main() {
	rounds := flag.Int("rounds", 7, "timed rounds per path and size (the median is reported)")
	round := flag.Duration("round", 200*time.Millisecond, "target length of one round")
	flag.Parse()
	for _, n := range []int{64, 512} {
		c, err := kernels.NewCase(n)
		if err != nil {
			fmt.Fprintln(os.Stderr, "kernels:", err)
			os.Exit(1)
		}
		paths := []func(int){
			func(i int) { c.Ours(i) },
			func(i int) { c.Composed(i, true) },
			func(i int) {
				if _, err := c.Copy(i); err != nil {
					fmt.Fprintln(os.Stderr, "kernels:", err)
					os.Exit(1)
				}
			},
		}
		iters := make([]int, len(paths))
		for p, f := range paths {
			iters[p] = calibrate(f, *round)
		}
		per := make([][]float64, len(paths)) // ns/op of each round
		for r := 0; r < *rounds; r++ {
			for p, f := range paths {
				runtime.GC()
				start := time.Now()
				for i := 0; i < iters[p]; i++ {
					f(i)
				}
				per[p] = append(per[p], float64(time.Since(start).Nanoseconds())/float64(iters[p]))
			}
		}
		ours, comp, cp := median(per[0]), median(per[1]), median(per[2])
		fmt.Printf("figure 4, %d×%d: ours %.0f µs, composed %.0f µs, ratio %.2f× (goal ≥ 3×)\n", n, n, ours/1e3, comp/1e3, comp/ours)
		fmt.Printf("figure 4, %d×%d, with labels: Plan.Copy %.0f µs, composed %.0f µs, ratio %.2f×\n", n, n, cp/1e3, comp/1e3, comp/cp)
	}
	fmt.Printf("reproduce: go run ./bench/cmd/kernels -rounds %d -round %v; go test -run '^$' -bench Kernels ./augment/\n", *rounds, *round)
}

// calibrate returns how many calls of f take about d.
func calibrate(f func(int), d time.Duration) int {
	n := 1
	for {
		start := time.Now()
		for i := 0; i < n; i++ {
			f(i)
		}
		el := time.Since(start)
		if el >= d/4 || n >= 1<<20 {
			k := int(float64(n) * float64(d) / float64(max(el, time.Microsecond)))
			return max(k, 1)
		}
		n *= 2
	}
}

func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}
