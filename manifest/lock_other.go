//go:build !unix

package manifest

import "os"

// flock is a no-op where flock(2) does not exist: there a second run into
// the same folder is not detected (README, Robustness).
func flock(*os.File) error { return nil }
