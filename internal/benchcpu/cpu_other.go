//go:build !unix

package benchcpu

import "testing"

// PerOp reports nothing where getrusage is not available.
func PerOp(b *testing.B) func() { return func() {} }
