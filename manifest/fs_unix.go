//go:build unix

package manifest

import (
	"path/filepath"
	"syscall"
)

// writeExclRename is writeAtomic's fast path on the real file system where
// O_TMPFILE is not to be had: four system calls (open, write, close,
// rename) where the os package's CreateTemp, Write, Close and Rename make
// ten (open with a random name, four fcntl and an epoll registration for the
// poller, write, close, an lstat of the target, rename). The temporary name
// is fixed, ".NAME.tmp"; O_EXCL makes sure it is ours. ok = false means the
// name was taken (a leftover, or another writer of the same file): the
// caller then takes the reference path, whose temporary names are random.
func writeExclRename(path string, b []byte) (ok bool, err error) {
	tmp := tempName(path)
	fd, err := openRetry(tmp)
	if err == syscall.EEXIST {
		return false, nil
	}
	if err != nil {
		return true, err
	}
	err = writeAll(fd, b)
	if cerr := syscall.Close(fd); err == nil {
		err = cerr
	}
	if err == nil {
		err = syscall.Rename(tmp, path)
	}
	if err != nil {
		syscall.Unlink(tmp)
	}
	return true, err
}

// tempName is the fixed temporary name of path: ".NAME.tmp" beside it.
func tempName(path string) string {
	return filepath.Join(filepath.Dir(path), "."+filepath.Base(path)+".tmp")
}

// writeAll writes b to fd, retrying interrupted and short writes.
func writeAll(fd int, b []byte) error {
	for len(b) > 0 {
		n, err := syscall.Write(fd, b)
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return err
		}
		if n == 0 {
			return syscall.EIO
		}
		b = b[n:]
	}
	return nil
}

func openRetry(p string) (int, error) {
	for {
		fd, err := syscall.Open(p, syscall.O_WRONLY|syscall.O_CREAT|syscall.O_EXCL|syscall.O_CLOEXEC, 0o644)
		if err != syscall.EINTR {
			return fd, err
		}
	}
}
