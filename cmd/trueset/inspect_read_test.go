package main

import (
	"bytes"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// inspectCommands are stats, preview and report of dir, writing into out.
func inspectCommands(dir, out string) [][]string {
	return [][]string{
		{"stats", dir},
		{"preview", dir, "--split", "all", "--count", "64", "--out", filepath.Join(out, "sheet.png")},
		{"report", dir, "--out", filepath.Join(out, "report.html"), "--sheet-split", "all"},
	}
}

// pngWithHeader returns a valid 1×1 gray PNG whose IHDR then claims w×h
// (CRC recomputed, ISO/IEC 15948 §5.3: CRC-32 over chunk type and data),
// as a decompression bomb's header would.
func pngWithHeader(t *testing.T, w, h uint32) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := png.Encode(&buf, image.NewGray(image.Rect(0, 0, 1, 1))); err != nil {
		t.Fatal(err)
	}
	b := buf.Bytes()
	// Signature (8), IHDR length (4), "IHDR" (4), then width and height.
	binary.BigEndian.PutUint32(b[16:], w)
	binary.BigEndian.PutUint32(b[20:], h)
	binary.BigEndian.PutUint32(b[29:], crc32.ChecksumIEEE(b[12:29]))
	if cfg, err := png.DecodeConfig(bytes.NewReader(b)); err != nil || cfg.Width != int(w) || cfg.Height != int(h) {
		t.Fatalf("patched header reads %v, %v", cfg, err)
	}
	return b
}

// A dataset image replaced by a named pipe, by a link to /dev/zero, or by a
// PNG whose header claims 100000×100000: stats, preview and report refuse
// the record's file by name, exit 1, and do not hang or decode it.
func TestInspectHostileSampleFiles(t *testing.T) {
	pristine := filepath.Join(t.TempDir(), "set")
	wantCode(t, exitOK, "generate", "--out", pristine, "--count", "6", "--quiet")
	recs := readRecords(t, pristine)
	rel := recs[2].Image
	cases := []struct {
		name   string
		damage func(t *testing.T, p string)
		phrase string
	}{
		{"named pipe", func(t *testing.T, p string) {
			if err := syscall.Mkfifo(p, 0o644); err != nil {
				t.Fatal(err)
			}
		}, "named pipe"},
		{"link to /dev/zero", func(t *testing.T, p string) {
			if err := os.Symlink("/dev/zero", p); err != nil {
				t.Fatal(err)
			}
		}, "outside the dataset folder"},
		{"header claims 100000x100000", func(t *testing.T, p string) {
			if err := os.WriteFile(p, pngWithHeader(t, 100000, 100000), 0o644); err != nil {
				t.Fatal(err)
			}
		}, "is 100000x100000, the record says"},
	}
	for _, c := range cases {
		for _, args := range inspectCommands("DIR", "OUT") {
			t.Run(c.name+"/"+args[0], func(t *testing.T) {
				dir := filepath.Join(t.TempDir(), "set")
				copyTree(t, pristine, dir)
				p := filepath.Join(dir, rel)
				if err := os.Remove(p); err != nil {
					t.Fatal(err)
				}
				c.damage(t, p)
				out := t.TempDir()
				args := inspectCommands(dir, out)[map[string]int{"stats": 0, "preview": 1, "report": 2}[args[0]]]
				code, _, stderr := runBounded(t, args...) // badinput_test.go: bounds time and memory
				if code != exitFailure || !strings.Contains(stderr, rel) || !strings.Contains(stderr, c.phrase) {
					t.Errorf("exit %d, stderr %q; want 1 naming %s and %q", code, stderr, rel, c.phrase)
				}
				if strings.Contains(stderr, "goroutine ") {
					t.Errorf("a goroutine stack was printed: %s", stderr)
				}
			})
		}
	}
}
