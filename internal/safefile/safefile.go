package safefile

import (
	"fmt"
	"io"
	"io/fs"
	"os"
	"syscall"
)

// Error is a refused input file.
type Error struct {
	Path string
	Msg  string
	Err  error // the system's error, if any (errors.Is(err, fs.ErrNotExist) works)
}

func (e *Error) Error() string { return e.Path + ": " + e.Msg }

func (e *Error) Unwrap() error { return e.Err }

// kindOf names what a non-regular file is.
func kindOf(m fs.FileMode) string {
	switch {
	case m&fs.ModeNamedPipe != 0:
		return "a named pipe"
	case m&fs.ModeCharDevice != 0:
		return "a character device"
	case m&fs.ModeDevice != 0:
		return "a device"
	case m&fs.ModeSocket != 0:
		return "a socket"
	case m.IsDir():
		return "a folder"
	}
	return "not a regular file"
}

// Open opens path for reading if it is a regular file (symbolic links are
// followed). The open itself never blocks: O_NONBLOCK keeps a FIFO without
// a writer from hanging it, and the type is checked on the open descriptor,
// so nothing can swap the file between the check and the read.
func Open(path string) (*os.File, error) {
	f, err := os.OpenFile(path, os.O_RDONLY|syscall.O_NONBLOCK, 0)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, &Error{Path: path, Msg: "does not exist", Err: err}
		}
		return nil, &Error{Path: path, Msg: unwrap(err), Err: err}
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, &Error{Path: path, Msg: unwrap(err)}
	}
	if !st.Mode().IsRegular() {
		f.Close()
		return nil, &Error{Path: path, Msg: kindOf(st.Mode()) + ", not a regular file; trueset reads only regular files"}
	}
	return f, nil
}

// Read returns the content of the regular file at path, refusing it when it
// holds more than limit bytes. what names the kind of input in the message
// ("recipe", "labels table").
func Read(path, what string, limit int64) ([]byte, error) {
	f, err := Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ReadFrom(f, path, what, limit)
}

// ReadFrom reads at most limit bytes from an opened file; a file that turns
// out longer (it grew, or Stat lied) is refused as well.
func ReadFrom(f *os.File, path, what string, limit int64) ([]byte, error) {
	if st, err := f.Stat(); err == nil && st.Size() > limit {
		return nil, tooLarge(path, what, st.Size(), limit)
	}
	b, err := io.ReadAll(io.LimitReader(f, limit+1))
	if err != nil {
		return nil, &Error{Path: path, Msg: unwrap(err)}
	}
	if int64(len(b)) > limit {
		return nil, tooLarge(path, what, -1, limit)
	}
	return b, nil
}

func tooLarge(path, what string, size, limit int64) error {
	if size >= 0 {
		return &Error{Path: path, Msg: fmt.Sprintf("%s is %d bytes; at most %d allowed", what, size, limit)}
	}
	return &Error{Path: path, Msg: fmt.Sprintf("%s is over %d bytes, the most allowed", what, limit)}
}

// Msg is err's message without the path, for callers whose own error type
// names the file already.
func Msg(err error) string {
	if e, ok := err.(*Error); ok {
		return e.Msg
	}
	return err.Error()
}

// unwrap drops the "open PATH: " prefix of a *PathError, since Error names
// the path already.
func unwrap(err error) string {
	if pe, ok := err.(*fs.PathError); ok {
		return pe.Err.Error()
	}
	return err.Error()
}
