//go:build !unix

package benchcpu

import (
	"testing"
	"time"
)

// PerOp reports nothing where getrusage is not available.
func PerOp(b *testing.B) func() { return func() {} }

// Process is 0 where getrusage is not available.
func Process() time.Duration { return 0 }
