package manifest_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// verifySet generates a small dataset of the default preset (12 samples,
// each its own group) and returns its folder.
func verifySet(t *testing.T) string {
	t.Helper()
	r, err := gen.Preset(gen.DefaultPreset)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "set")
	if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: dir, Count: 12, Seed: 1, Workers: 2, Version: "test"}); err != nil {
		t.Fatal(err)
	}
	return dir
}

// verifyAll runs Verify with a time bound that detects a hang, and returns
// its problems.
func verifyAll(t *testing.T, dir string) (int, []manifest.Problem) {
	t.Helper()
	type result struct {
		n   int
		ps  []manifest.Problem
		err error
	}
	done := make(chan result, 1)
	go func() {
		var ps []manifest.Problem
		n, err := manifest.Verify(dir, func(p manifest.Problem) { ps = append(ps, p) })
		done <- result{n, ps, err}
	}()
	select {
	case r := <-done:
		if r.err != nil {
			t.Fatal(r.err)
		}
		return r.n, r.ps
	case <-time.After(60 * time.Second): // detects a hang, not a speed check
		t.Fatal("Verify did not return within 60 s")
	}
	return 0, nil
}

// manifestLines returns the manifest's lines (without newlines).
func manifestLines(t *testing.T, dir string) [][]byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, manifest.ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	return bytes.Split(bytes.TrimSuffix(b, []byte("\n")), []byte("\n"))
}

// writeManifest writes lines as the manifest and records its SHA-256 in
// dataset.json (a consistent edit), with edit applied to dataset.json.
func writeManifest(t *testing.T, dir string, lines [][]byte, edit func(d *manifest.Dataset)) {
	t.Helper()
	b := append(bytes.Join(lines, []byte("\n")), '\n')
	if err := os.WriteFile(filepath.Join(dir, manifest.ManifestFile), b, 0o644); err != nil {
		t.Fatal(err)
	}
	editDataset(t, dir, func(d *manifest.Dataset) {
		d.ManifestSHA256 = manifest.SHA256Hex(b)
		if edit != nil {
			edit(d)
		}
	})
}

func editDataset(t *testing.T, dir string, edit func(d *manifest.Dataset)) {
	t.Helper()
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	edit(d)
	b, err := manifest.MarshalDataset(d)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// setLine replaces field key of line i with v.
func setField(t *testing.T, line []byte, key string, v any) []byte {
	t.Helper()
	var m map[string]any
	if err := json.Unmarshal(line, &m); err != nil {
		t.Fatal(err)
	}
	m[key] = v
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func kinds(ps []manifest.Problem) map[string]int {
	k := map[string]int{}
	for _, p := range ps {
		k[p.Check]++
	}
	return k
}

func copyDir(t *testing.T, src string) string {
	t.Helper()
	dst := filepath.Join(t.TempDir(), "copy")
	if err := os.CopyFS(dst, os.DirFS(src)); err != nil {
		t.Fatal(err)
	}
	return dst
}

func TestVerifyIntactSet(t *testing.T) {
	dir := verifySet(t)
	n, ps := verifyAll(t, dir)
	if n != 12 || len(ps) != 0 {
		t.Fatalf("intact set: %d records, problems %v", n, ps)
	}
}

// The masks are 8-bit: class values 0..255, with 255 the ignore value
// (manifest.IgnoreID; the PNG bit depth is 8, ISO/IEC 15948 IHDR), and id
// 0 is background (the project's design: "Class id 0 is background").
func TestVerifyClassTable(t *testing.T) {
	pristine := verifySet(t)
	cases := []struct {
		name   string
		edit   func(cs []manifest.Class) []manifest.Class
		phrase string
	}{
		{"id 300 does not fit a byte", func(cs []manifest.Class) []manifest.Class { cs[1].ID = 300; return cs }, "class ids are 0..254"},
		{"negative id", func(cs []manifest.Class) []manifest.Class { cs[1].ID = -1; return cs }, "class ids are 0..254"},
		{"id 255 is ignore", func(cs []manifest.Class) []manifest.Class { cs[1].ID = 255; return cs }, "ignore value"},
		{"duplicate id", func(cs []manifest.Class) []manifest.Class { cs[2].ID = cs[1].ID; return cs }, "listed twice"},
		{"duplicate name", func(cs []manifest.Class) []manifest.Class { cs[2].Name = cs[1].Name; return cs }, "listed twice"},
		{"id 0 not background", func(cs []manifest.Class) []manifest.Class { cs[0].Name = "floor"; return cs }, "id 0 is background"},
		{"empty name", func(cs []manifest.Class) []manifest.Class { cs[1].Name = ""; return cs }, "name is empty"},
		{"name over 64 bytes", func(cs []manifest.Class) []manifest.Class { cs[1].Name = strings.Repeat("n", 65); return cs }, "at most 64"},
		{"control character", func(cs []manifest.Class) []manifest.Class { cs[1].Name = "bolt\x1b[2J"; return cs }, "control character"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := copyDir(t, pristine)
			editDataset(t, dir, func(d *manifest.Dataset) {
				if d.Classes[0].ID != 0 || len(d.Classes) < 3 {
					t.Fatalf("the preset's class table is %v; want background first and two more", d.Classes)
				}
				d.Classes = c.edit(d.Classes)
			})
			_, ps := verifyAll(t, dir)
			for _, p := range ps {
				if p.Check == manifest.KindClassTable && p.File == manifest.DatasetFile && strings.Contains(p.Msg, c.phrase) && strings.Contains(p.Msg, "classes[") {
					return
				}
			}
			t.Errorf("no class-table problem saying %q: %v", c.phrase, ps)
		})
	}
}

// dataset.json's format field is read: another or no format is a format
// problem of dataset.json.
func TestVerifyFormatField(t *testing.T) {
	pristine := verifySet(t)
	for _, f := range []string{"trueset-dataset/1", "", "trueset-dataset/99"} {
		t.Run(f, func(t *testing.T) {
			dir := copyDir(t, pristine)
			p := filepath.Join(dir, manifest.DatasetFile)
			var m map[string]any
			b, _ := os.ReadFile(p)
			if err := json.Unmarshal(b, &m); err != nil {
				t.Fatal(err)
			}
			if f == "" {
				delete(m, "format")
			} else {
				m["format"] = f
			}
			b, _ = json.Marshal(m)
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
			_, ps := verifyAll(t, dir)
			if len(ps) != 1 || ps[0].Check != manifest.KindFormat || ps[0].File != manifest.DatasetFile || !strings.Contains(ps[0].Msg, "format") {
				t.Errorf("format %q: %v", f, ps)
			}
		})
	}
}

// An unsafe record id is a path problem naming the line; the id itself is
// not put in the record column, where a terminal would print it raw.
func TestVerifyUnsafeRecordID(t *testing.T) {
	pristine := verifySet(t)
	for _, id := range []string{"../../victim", "/abs", "a\\b", "\x1b[2Jx", ".hidden", "-rf"} {
		t.Run(id, func(t *testing.T) {
			dir := copyDir(t, pristine)
			lines := manifestLines(t, dir)
			lines[3] = setField(t, lines[3], "id", id)
			writeManifest(t, dir, lines, nil)
			n, ps := verifyAll(t, dir)
			found := false
			for _, p := range ps {
				if p.Check == manifest.KindPath && p.ID == "" && strings.Contains(p.Msg, "manifest.jsonl:4:") && strings.Contains(p.Msg, "not a safe file name") {
					found = true
				}
				if p.ID != "" && strings.ContainsAny(p.ID, "/\\\x1b") {
					t.Errorf("problem names unsafe id raw: %+v", p)
				}
			}
			if !found || n != 12 {
				t.Errorf("id %q: %d records, problems %v", id, n, ps)
			}
		})
	}
}

// Out-of-order manifests take the second pass (hash sets); the result is
// the same as for the ordered one: nothing on an intact set, and a
// duplicate id, a group spanning splits and a record in the wrong split
// named once each. The records stay in index order (the allocation deals
// groups in the order they first appear, as generate does), but ids and
// groups are renamed to decrease.
func TestVerifyUnorderedManifest(t *testing.T) {
	pristine := verifySet(t)
	reversed := func(t *testing.T) (string, [][]byte) {
		dir := copyDir(t, pristine)
		lines := manifestLines(t, dir)
		for i := range lines {
			lines[i] = setField(t, lines[i], "id", fmt.Sprintf("r%03d", 999-i))
			lines[i] = setField(t, lines[i], "group", fmt.Sprintf("g%03d", 999-i))
		}
		return dir, lines
	}
	t.Run("intact reversed", func(t *testing.T) {
		dir, lines := reversed(t)
		writeManifest(t, dir, lines, nil)
		if n, ps := verifyAll(t, dir); n != 12 || len(ps) != 0 {
			t.Errorf("reversed intact manifest: %d records, %v", n, ps)
		}
	})
	t.Run("duplicate id", func(t *testing.T) {
		dir, lines := reversed(t)
		// Line 10 (was record 2) takes record 7's id; the count stays 12.
		var r7 struct{ ID string }
		json.Unmarshal(lines[4], &r7)
		lines[9] = setField(t, lines[9], "id", r7.ID)
		writeManifest(t, dir, lines, nil)
		_, ps := verifyAll(t, dir)
		if k := kinds(ps); k[manifest.KindDuplicateID] != 1 {
			t.Errorf("want one duplicate-id problem: %v", ps)
		}
	})
	t.Run("duplicate id, ordered", func(t *testing.T) {
		dir := copyDir(t, pristine)
		lines := manifestLines(t, dir)
		var r4 struct{ ID string }
		json.Unmarshal(lines[4], &r4)
		lines[5] = setField(t, lines[5], "id", r4.ID)
		writeManifest(t, dir, lines, nil)
		_, ps := verifyAll(t, dir)
		if k := kinds(ps); k[manifest.KindDuplicateID] != 1 {
			t.Errorf("want one duplicate-id problem: %v", ps)
		}
	})
	for _, order := range []string{"ordered", "reversed"} {
		t.Run("group spans splits, "+order, func(t *testing.T) {
			var dir string
			var lines [][]byte
			if order == "reversed" {
				dir, lines = reversed(t)
			} else {
				dir = copyDir(t, pristine)
				lines = manifestLines(t, dir)
			}
			var a, b struct{ Group, Split string }
			ia, ib := -1, -1
			for i, l := range lines {
				var r struct{ Group, Split string }
				json.Unmarshal(l, &r)
				if ia < 0 {
					ia, a = i, r
				} else if ib < 0 && r.Split != a.Split {
					ib, b = i, r
				}
			}
			if ib < 0 {
				t.Fatal("the set has one split only")
			}
			lines[ib] = setField(t, lines[ib], "group", a.Group)
			writeManifest(t, dir, lines, nil)
			_, ps := verifyAll(t, dir)
			if k := kinds(ps); k[manifest.KindGroupLeak] != 1 {
				t.Errorf("want one group-leak problem (group %s in %s and %s): %v", a.Group, a.Split, b.Split, ps)
			}
		})
	}
	t.Run("record in the wrong split, reversed", func(t *testing.T) {
		dir, lines := reversed(t)
		var r struct{ ID, Split string }
		json.Unmarshal(lines[2], &r)
		other := "val"
		if r.Split == "val" {
			other = "train"
		}
		lines[2] = setField(t, lines[2], "split", other)
		writeManifest(t, dir, lines, nil)
		_, ps := verifyAll(t, dir)
		named := false
		for _, p := range ps {
			if p.Check == manifest.KindSplit && p.ID == r.ID && strings.Contains(p.Msg, "allocation") {
				named = true
			}
		}
		if !named {
			t.Errorf("record %s moved to %s not named: %v", r.ID, other, ps)
		}
	})
}

// A line over MaxRecordBytes is named and skipped, never held; the records
// after it are still read.
func TestVerifyOverlongLine(t *testing.T) {
	dir := verifySet(t)
	lines := manifestLines(t, dir)
	long := append([]byte(`{"id":"`), bytes.Repeat([]byte("x"), manifest.MaxRecordBytes)...)
	lines = append(lines[:2], append([][]byte{long}, lines[2:]...)...)
	writeManifest(t, dir, lines, nil)
	n, ps := verifyAll(t, dir)
	if n != 12 {
		t.Errorf("read %d records around the long line, want 12", n)
	}
	ok := false
	for _, p := range ps {
		if p.Check == manifest.KindFormat && strings.Contains(p.Msg, "manifest.jsonl:3:") && strings.Contains(p.Msg, "over") {
			ok = true
		}
	}
	if !ok {
		t.Errorf("long line 3 not named: %v", ps)
	}
}

// A named pipe in place of a sample file is refused without opening it for
// a read that would wait forever (no writer ever comes).
func TestVerifyNamedPipeImage(t *testing.T) {
	dir := verifySet(t)
	var r struct{ ID, Image string }
	json.Unmarshal(manifestLines(t, dir)[1], &r)
	p := filepath.Join(dir, r.Image)
	os.Remove(p)
	if err := syscall.Mkfifo(p, 0o644); err != nil {
		t.Fatalf("mkfifo: %v", err)
	}
	_, ps := verifyAll(t, dir)
	for _, q := range ps {
		if q.ID == r.ID && q.Check == manifest.KindMissing && strings.Contains(q.Msg, "named pipe") {
			return
		}
	}
	t.Errorf("pipe at %s not refused: %v", r.Image, ps)
}

// CheckClassTable accepts the tables trueset writes.
func TestCheckClassTableAcceptsPresets(t *testing.T) {
	for _, name := range gen.PresetNames() {
		r, err := gen.Preset(name)
		if err != nil {
			t.Fatal(err)
		}
		d := t.TempDir()
		out := filepath.Join(d, "set")
		if _, err := gen.Run(context.Background(), gen.RunOptions{Recipe: r, Out: out, Count: 1, Seed: 3, Workers: 1, Version: "test"}); err != nil {
			t.Fatal(err)
		}
		ds, err := manifest.ReadDataset(out)
		if err != nil {
			t.Fatal(err)
		}
		manifest.CheckClassTable(ds.Classes, func(msg string) { t.Errorf("preset %s: %s", name, msg) })
	}
}
