package safefile

import (
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

func TestReadRegular(t *testing.T) {
	p := filepath.Join(t.TempDir(), "r.yaml")
	if err := os.WriteFile(p, []byte("name: x\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	b, err := Read(p, "recipe", 100)
	if err != nil || string(b) != "name: x\n" {
		t.Fatalf("Read = %q, %v", b, err)
	}
	if _, err := Read(p, "recipe", 4); err == nil || !strings.Contains(err.Error(), "recipe is 8 bytes; at most 4 allowed") {
		t.Errorf("over the limit: %v", err)
	}
}

// A FIFO with no writer and a device whose Stat size is 0 are refused at
// once; neither is read (a read of /dev/zero would never end).
func TestRefusesPipesAndDevices(t *testing.T) {
	fifo := filepath.Join(t.TempDir(), "pipe")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Fatalf("mkfifo: %v", err)
	}
	done := make(chan error, 1)
	go func() { _, err := Read(fifo, "recipe", 1<<20); done <- err }()
	select {
	case err := <-done:
		if err == nil || !strings.Contains(err.Error(), "a named pipe, not a regular file") || !strings.Contains(err.Error(), fifo) {
			t.Errorf("fifo: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("Read blocked on a named pipe")
	}
	if _, err := Read("/dev/zero", "plan", 1<<20); err == nil || !strings.Contains(err.Error(), "a character device") {
		t.Errorf("/dev/zero: %v", err)
	}
	if _, err := Read(t.TempDir(), "plan", 1<<20); err == nil || !strings.Contains(err.Error(), "a folder") {
		t.Errorf("folder: %v", err)
	}
	if _, err := Read(filepath.Join(t.TempDir(), "nosuch.yaml"), "recipe", 10); err == nil || !strings.Contains(err.Error(), "nosuch.yaml: does not exist") {
		t.Errorf("missing: %v", err)
	}
}
