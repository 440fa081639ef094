//go:build unix

package manifest_test

import (
	"syscall"
	"testing"
)

// cpuPerOp reports the process's CPU time (user + system, from getrusage)
// per operation as "cpu-ns/op" when the returned function runs. On a
// machine shared with other jobs, a benchmark's wall time counts the time it
// waited for a core; its CPU time does not.
func cpuPerOp(b *testing.B) func() {
	cpu := func() int64 {
		var ru syscall.Rusage
		if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
			b.Fatal(err)
		}
		return ru.Utime.Nano() + ru.Stime.Nano()
	}
	start := cpu()
	return func() { b.ReportMetric(float64(cpu()-start)/float64(b.N), "cpu-ns/op") }
}
