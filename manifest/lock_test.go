package manifest

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Issue 11: two runs into one folder. The second Create (or Resume) while
// the first holds the folder is refused with a LockedError naming the
// first run's process; once the first finishes, the lock file is gone and
// the folder can be written again.
func TestOutputFolderLock(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	w, err := CreateWith(dir, CreateOptions{Marker: []byte(`{"run":1}`)})
	if err != nil {
		t.Fatal(err)
	}
	for name, second := range map[string]func() error{
		"create": func() error { _, err := CreateWith(dir, CreateOptions{Force: true}); return err },
		"resume": func() error { _, _, err := Resume(dir, CreateOptions{Marker: []byte(`{"run":1}`)}, nil); return err },
	} {
		err := second()
		var le *LockedError
		if !errors.As(err, &le) {
			t.Fatalf("%s while locked: got %v, want a LockedError", name, err)
		}
		if want := fmt.Sprintf("process %d", os.Getpid()); !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), dir) {
			t.Errorf("%s: %q does not name %s and the folder", name, err, want)
		}
	}
	if _, err := w.Finish(&Dataset{}); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(dir, LockFile)); !os.IsNotExist(err) {
		t.Errorf("lock file left after Finish: %v", err)
	}
	w2, err := CreateWith(dir, CreateOptions{Force: true})
	if err != nil {
		t.Fatalf("after Finish: %v", err)
	}
	w2.Abort()
	// A lock file left by a killed run (the kernel dropped its lock) does
	// not make a folder "not empty" and does not block the next run.
	stale := filepath.Join(t.TempDir(), "stale")
	os.MkdirAll(stale, 0o755)
	os.WriteFile(filepath.Join(stale, LockFile), []byte(`{"pid":1}`), 0o644)
	w3, err := CreateWith(stale, CreateOptions{})
	if err != nil {
		t.Fatalf("stale lock file: %v", err)
	}
	w3.Abort()
}
