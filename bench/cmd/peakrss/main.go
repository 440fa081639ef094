// Command peakrss runs a command and prints its wall time and peak resident
// set size: the child's rusage ru_maxrss (kilobytes on Linux, getrusage(2)),
// which is the VmHWM the kernel keeps for it. Usage:
//
//	peakrss COMMAND [ARG...]
//
// It prints one line, seconds=… cpu_seconds=… maxrss_kb=… (cpu: the child's
// user + system time), to standard error after the command's own output,
// and exits with the command's status.
//go:build linux

package main

import (
	"errors"
	"fmt"
	"os"
	"os/exec"
	"syscall"
	"time"
)

func main() {
	if len(os.Args) < 2 {
		fmt.Fprintln(os.Stderr, "usage: peakrss COMMAND [ARG...]")
		os.Exit(2)
	}
	cmd := exec.Command(os.Args[1], os.Args[2:]...)
	cmd.Stdin, cmd.Stdout, cmd.Stderr = os.Stdin, os.Stdout, os.Stderr
	start := time.Now()
	err := cmd.Run()
	wall := time.Since(start)
	var ee *exec.ExitError
	if err != nil && !errors.As(err, &ee) {
		fmt.Fprintln(os.Stderr, "peakrss:", err)
		os.Exit(1)
	}
	var maxrss int64
	if ru, ok := cmd.ProcessState.SysUsage().(*syscall.Rusage); ok {
		maxrss = int64(ru.Maxrss)
	}
	cpu := cmd.ProcessState.UserTime() + cmd.ProcessState.SystemTime()
	fmt.Fprintf(os.Stderr, "seconds=%.3f cpu_seconds=%.3f maxrss_kb=%d\n", wall.Seconds(), cpu.Seconds(), maxrss)
	os.Exit(cmd.ProcessState.ExitCode())
}
