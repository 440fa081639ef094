//go:build !unix

package gen

import "testing"

// cpuPerOp reports nothing where getrusage is not available.
func cpuPerOp(b *testing.B) func() { return func() {} }
