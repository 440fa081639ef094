//go:build unix

package manifest

import (
	"os"

	"golang.org/x/sys/unix"
)

// flock takes an exclusive flock(2) on f without waiting.
func flock(f *os.File) error {
	for {
		err := unix.Flock(int(f.Fd()), unix.LOCK_EX|unix.LOCK_NB)
		if err != unix.EINTR {
			return err
		}
	}
}
