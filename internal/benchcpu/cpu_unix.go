//go:build unix

package benchcpu

import (
	"syscall"
	"testing"
	"time"
)

// PerOp starts counting; the function it returns reports the process's CPU
// time per operation as "cpu-ns/op" (defer it).
func PerOp(b *testing.B) func() {
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

// Process is this process's user + system time so far (0 if unknown).
func Process() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
