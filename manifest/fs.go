package manifest

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sync"
	"sync/atomic"
	"syscall"
)

// FS is the file-system layer a Writer writes through. OS is the real one;
// tests inject failures (FailAfter) to check that a failed write stops the run
// with the path named and never leaves a complete-looking dataset.
type FS interface {
	MkdirAll(path string, perm os.FileMode) error
	// CreateTemp creates a new temporary file in dir (os.CreateTemp rules).
	CreateTemp(dir, pattern string) (File, error)
	// OpenFile opens a file (os.OpenFile rules).
	OpenFile(path string, flag int, perm os.FileMode) (File, error)
	Rename(oldpath, newpath string) error
	Remove(path string) error
}

// File is the part of *os.File a Writer uses.
type File interface {
	io.Writer
	Name() string
	Sync() error
	Close() error
	Truncate(size int64) error
	Seek(offset int64, whence int) (int64, error)
}

// OS is the operating system's file system.
var OS FS = osFS{}

type osFS struct{}

func (osFS) MkdirAll(p string, perm os.FileMode) error { return os.MkdirAll(p, perm) }
func (osFS) CreateTemp(dir, pattern string) (File, error) {
	return os.CreateTemp(dir, pattern)
}
func (osFS) OpenFile(p string, flag int, perm os.FileMode) (File, error) {
	return os.OpenFile(p, flag, perm)
}
func (osFS) Rename(a, b string) error { return os.Rename(a, b) }
func (osFS) Remove(p string) error    { return os.Remove(p) }

// FailAfter returns a file system that behaves like inner until n bytes in
// all have been written, then fails every write with ENOSPC ("no space left
// on device"), as a full disk does.
func FailAfter(inner FS, n int64) FS { return &failFS{inner: inner, left: n} }

type failFS struct {
	inner FS
	mu    sync.Mutex
	left  int64
}

type failFile struct {
	File
	fs *failFS
}

func (f *failFS) MkdirAll(p string, perm os.FileMode) error { return f.inner.MkdirAll(p, perm) }
func (f *failFS) CreateTemp(dir, pattern string) (File, error) {
	fl, err := f.inner.CreateTemp(dir, pattern)
	if err != nil {
		return nil, err
	}
	return failFile{fl, f}, nil
}
func (f *failFS) OpenFile(p string, flag int, perm os.FileMode) (File, error) {
	fl, err := f.inner.OpenFile(p, flag, perm)
	if err != nil {
		return nil, err
	}
	return failFile{fl, f}, nil
}
func (f *failFS) Rename(a, b string) error { return f.inner.Rename(a, b) }
func (f *failFS) Remove(p string) error    { return f.inner.Remove(p) }

func (w failFile) Write(b []byte) (int, error) {
	w.fs.mu.Lock()
	allow := int64(len(b))
	if allow > w.fs.left {
		allow = w.fs.left
	}
	w.fs.left -= allow
	w.fs.mu.Unlock()
	n, err := w.File.Write(b[:allow])
	if err == nil && int64(n) < int64(len(b)) {
		err = &os.PathError{Op: "write", Path: w.Name(), Err: syscall.ENOSPC}
	}
	return n, err
}

// writeAtomic writes b to path through a temporary file in the same folder
// and renames it into place, so a reader never sees a half-written file.
// Temporary names start with "." and contain ".tmp", which resume cleans up.
// On the real file system it takes the fast path (writeFileAtomic, fewer
// system calls); through any other FS, or when that path's temporary name is
// taken, the reference path below (os.CreateTemp rules).
func writeAtomic(fsys FS, path string, b []byte) error {
	if _, real := fsys.(osFS); real {
		if ok, err := writeFileAtomic(path, b); ok {
			if err != nil {
				return fmt.Errorf("write %s: %w", path, err)
			}
			return nil
		}
	}
	return writeAtomicReference(fsys, path, b)
}

// writeAtomicReference is writeAtomic through the FS interface.
func writeAtomicReference(fsys FS, path string, b []byte) error {
	f, err := createTemp(fsys, path)
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	tmp := f.Name()
	_, werr := f.Write(b)
	cerr := f.Close()
	if err := errors.Join(werr, cerr); err != nil {
		fsys.Remove(tmp)
		return fmt.Errorf("write %s: %w", path, unwrapPath(err))
	}
	if err := fsys.Rename(tmp, path); err != nil {
		fsys.Remove(tmp)
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}

// tempSeq numbers this process's temporary files.
var tempSeq atomic.Uint64

// createTemp creates ".NAME.tmp<pid>-<n>" beside path with mode 0644 less
// the umask, as os.WriteFile would; os.CreateTemp's 0600 would leave every
// dataset file unreadable to the rest of a team.
func createTemp(fsys FS, path string) (File, error) {
	dir, base := filepath.Split(path)
	for {
		tmp := filepath.Join(dir, fmt.Sprintf(".%s.tmp%d-%d", base, os.Getpid(), tempSeq.Add(1)))
		f, err := fsys.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
		if !errors.Is(err, fs.ErrExist) {
			return f, err
		}
	}
}

// unwrapPath drops an *os.PathError's own path (a temporary name) so the
// message names the file being written, not its temporary twin.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}
