// Package benchcpu reports a benchmark's CPU time per operation
// ("cpu-ns/op", user + system from getrusage): on a machine shared with
// other jobs a benchmark's wall time counts the time it waited for a core,
// its CPU time does not. Where getrusage is missing it reports nothing.
//
// Process is the same CPU time for a program that times itself.
//
// It imports nothing of ours; only benchmarks and bench/cmd use it.
package benchcpu
