package manifest

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// LockFile is the advisory lock a writing command holds on its output
// folder for the whole run; a second run into the same folder is refused.
const LockFile = ".trueset-lock"

// LockedError is a refusal to write into a folder another run is writing.
type LockedError struct {
	Dir   string
	Other string // who holds it, as that run wrote it in the lock file
}

func (e *LockedError) Error() string {
	return fmt.Sprintf("%s is being written by another trueset run (%s); wait for it to end, or write to another folder", e.Dir, e.Other)
}

// Lock is a held lock on an output folder.
type Lock struct {
	f    *os.File
	path string
}

// LockDir creates dir if need be and takes an exclusive advisory lock on
// it (flock(2) on DIR/.trueset-lock, not waiting), writing this run's
// process id, start time and command line into the file so that a refused
// run can name the holder. The lock is the kernel's: it ends with the
// process however it ends, and a lock file left by a killed run is simply
// taken again. On network file systems flock may be local to one machine
// (README, Robustness).
func LockDir(dir string) (*Lock, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	p := filepath.Join(dir, LockFile)
	f, err := os.OpenFile(p, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, err
	}
	if err := flock(f); err != nil {
		other := holder(f)
		f.Close()
		return nil, &LockedError{Dir: dir, Other: other}
	}
	info, _ := json.Marshal(map[string]any{
		"pid":     os.Getpid(),
		"started": time.Now().UTC().Format(time.RFC3339),
		"command": strings.Join(os.Args, " "),
	})
	if err := f.Truncate(0); err == nil {
		f.WriteAt(append(info, '\n'), 0)
	}
	return &Lock{f: f, path: p}, nil
}

// holder describes the run holding a lock file, from what it wrote there.
func holder(f *os.File) string {
	b := make([]byte, 4096)
	n, _ := f.ReadAt(b, 0)
	var who struct {
		PID     int    `json:"pid"`
		Started string `json:"started"`
		Command string `json:"command"`
	}
	if json.Unmarshal(b[:n], &who) == nil && who.PID > 0 {
		return fmt.Sprintf("process %d, started %s: %s", who.PID, who.Started, who.Command)
	}
	return "its lock file says nothing more"
}

// Unlock removes the lock file and releases the lock. Safe on nil.
func (l *Lock) Unlock() {
	if l == nil || l.f == nil {
		return
	}
	os.Remove(l.path)
	l.f.Close()
	l.f = nil
}

// CheckUnlocked reports a LockedError when another run holds dir, without
// taking the lock or creating anything (for checks before a run starts).
func CheckUnlocked(dir string) error {
	f, err := os.OpenFile(filepath.Join(dir, LockFile), os.O_RDWR, 0)
	if err != nil {
		return nil // no lock file: nobody holds it
	}
	defer f.Close()
	if flock(f) != nil {
		return &LockedError{Dir: dir, Other: holder(f)}
	}
	return nil // the flock is dropped with f
}

// HasEntries reports whether dir exists and holds anything besides a lock
// file (which a killed run may leave behind).
func HasEntries(dir string) bool {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return false
	}
	for _, e := range ents {
		if e.Name() != LockFile {
			return true
		}
	}
	return false
}
