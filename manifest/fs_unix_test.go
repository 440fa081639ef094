//go:build unix

package manifest

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// writeAtomic's fast path (open with O_EXCL, write, close, rename) against
// its reference path (os.CreateTemp, Write, Close, Rename): the same file
// contents, no temporary file left, a taken temporary name falls back to a
// random one, and errors name the file being written.
func TestWriteAtomicFastPath(t *testing.T) {
	dir := t.TempDir()
	ref := struct{ FS }{OS} // not osFS: takes the reference path
	b := bytes.Repeat([]byte("trueset "), 1000)
	for _, c := range []struct {
		name string
		fsys FS
	}{{"fast", OS}, {"reference", ref}} {
		p := filepath.Join(dir, c.name+".png")
		if err := writeAtomic(c.fsys, p, b); err != nil {
			t.Fatal(err)
		}
		if err := writeAtomic(c.fsys, p, b[:10]); err != nil { // over an existing file
			t.Fatal(err)
		}
		got, err := os.ReadFile(p)
		if err != nil || !bytes.Equal(got, b[:10]) {
			t.Fatalf("%s: read back %q, %v", c.name, got, err)
		}
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 2 {
		t.Fatalf("%d entries left, want 2 (no temporary files)", len(ents))
	}

	// A leftover temporary name (someone else's) is never touched; the
	// write succeeds, on the fast path or, where the fixed temporary name is
	// needed (the target exists), through a random one.
	left := filepath.Join(dir, ".taken.png.tmp")
	if err := os.WriteFile(left, []byte("someone else's"), 0o644); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "taken.png")
	if ok, _ := writeExclRename(p, b); ok {
		t.Fatal("writeExclRename wrote through a temporary name it did not create")
	}
	for _, want := range [][]byte{b, b[:99]} { // new, then over an existing file
		if err := writeAtomic(OS, p, want); err != nil {
			t.Fatal(err)
		}
		if got, _ := os.ReadFile(p); !bytes.Equal(got, want) {
			t.Fatal("wrong bytes written")
		}
	}
	if got, _ := os.ReadFile(left); string(got) != "someone else's" {
		t.Fatal("a temporary file trueset did not create was changed")
	}
	os.Remove(left)
	ents, _ = os.ReadDir(dir)
	if len(ents) != 3 {
		t.Fatalf("%d entries left, want 3 (no temporary files)", len(ents))
	}
	// Files are created with mode 0644 less the umask, on every path.
	old := syscall.Umask(0o022)
	syscall.Umask(old)
	if fi, err := os.Stat(p); err != nil || fi.Mode().Perm() != 0o644&^os.FileMode(old) {
		t.Fatalf("mode %v (%v), want %v", fi.Mode().Perm(), err, 0o644&^os.FileMode(old))
	}

	// Errors name the target, not the temporary twin.
	missing := filepath.Join(dir, "no", "such", "folder", "x.png")
	err := writeAtomic(OS, missing, b)
	if err == nil || !strings.Contains(err.Error(), "write "+missing+": ") || strings.Contains(err.Error(), ".tmp") {
		t.Fatalf("error %v", err)
	}
	if !os.IsNotExist(err) && !strings.Contains(err.Error(), syscall.ENOENT.Error()) {
		t.Fatalf("error %v does not say the folder is missing", err)
	}
}
