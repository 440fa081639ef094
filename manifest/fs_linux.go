//go:build linux

package manifest

import (
	"path/filepath"
	"strconv"
	"sync/atomic"
	"syscall"

	"golang.org/x/sys/unix"
)

// noTmpfile is set once O_TMPFILE or linking through /proc/self/fd has
// failed for want of support; later writes go straight to writeExclRename.
var noTmpfile atomic.Bool

// writeFileAtomic is writeAtomic's fast path on Linux: the file is written
// as an unnamed inode in the target's folder (open(2) with O_TMPFILE) and
// then given its name with linkat(2), the method open(2)'s manual gives
// for creating a file atomically. A reader sees the whole file or none, as
// with a temporary name and rename, but the folder is changed once, not
// three times (add a temporary name, add the real one, drop the temporary
// one), and folder changes are what file creation costs most (README,
// Performance). Where the target exists (--force, resume) it is linked
// under its temporary name and renamed over the target; where O_TMPFILE or
// /proc is not available, writeExclRename does the work.
func writeFileAtomic(path string, b []byte) (ok bool, err error) {
	if noTmpfile.Load() {
		return writeExclRename(path, b)
	}
	dir := filepath.Dir(path)
	fd, err := openTmpfile(dir)
	switch err {
	case nil:
	case unix.EOPNOTSUPP, unix.EISDIR, unix.EINVAL:
		noTmpfile.Store(true)
		return writeExclRename(path, b)
	default:
		return true, err
	}
	defer syscall.Close(fd)
	if err := writeAll(fd, b); err != nil {
		return true, err
	}
	proc := "/proc/self/fd/" + strconv.Itoa(fd)
	err = linkRetry(proc, path)
	if err == unix.EEXIST {
		tmp := tempName(path)
		if err = linkRetry(proc, tmp); err == unix.EEXIST {
			return false, nil // the temporary name is taken: the reference path
		}
		if err == nil {
			if err = syscall.Rename(tmp, path); err != nil {
				syscall.Unlink(tmp)
			}
		}
		return true, err
	}
	if err == unix.ENOENT && !exists(dir) {
		return true, err
	}
	if err == unix.ENOENT || err == unix.EPERM || err == unix.EACCES {
		// No /proc, or linking an unnamed file is refused here.
		noTmpfile.Store(true)
		return writeExclRename(path, b)
	}
	return true, err
}

func openTmpfile(dir string) (int, error) {
	for {
		fd, err := unix.Open(dir, unix.O_TMPFILE|unix.O_WRONLY|unix.O_CLOEXEC, 0o644)
		if err != unix.EINTR {
			return fd, err
		}
	}
}

func linkRetry(proc, path string) error {
	for {
		err := unix.Linkat(unix.AT_FDCWD, proc, unix.AT_FDCWD, path, unix.AT_SYMLINK_FOLLOW)
		if err != unix.EINTR {
			return err
		}
	}
}

func exists(p string) bool {
	var st syscall.Stat_t
	return syscall.Stat(p, &st) == nil
}
