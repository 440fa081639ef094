package main

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// Issue 11, two runs into one folder: while a run holds the output folder,
// every writing command refuses it with exit 2, naming the holder.
func TestLockedOutputFolderRefused(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	lk, err := manifest.LockDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer lk.Unlock()
	_, stderr := wantCode(t, exitUsage, "generate", "--count", "4", "--out", dir, "--quiet")
	if want := fmt.Sprintf("process %d", os.Getpid()); !strings.Contains(stderr, "being written by another trueset run") || !strings.Contains(stderr, want) {
		t.Errorf("stderr %q does not name the other run (%s)", stderr, want)
	}
	src := filepath.Join(t.TempDir(), "src")
	wantCode(t, exitOK, "generate", "--count", "4", "--out", src, "--quiet")
	_, stderr = wantCode(t, exitUsage, "augment", "--in", src, "--out", dir, "--plan", "../../examples/plans/light.yaml", "--quiet")
	if !strings.Contains(stderr, "being written by another trueset run") {
		t.Errorf("augment: %q", stderr)
	}
	if _, err := os.Stat(filepath.Join(dir, manifest.DatasetFile)); err == nil {
		t.Error("a refused run wrote dataset.json")
	}
}

// Two generate processes started at once into one empty folder: at most one
// finishes (exit 0), the other is refused with exit 2 (by the lock, or by
// the folder no longer being empty), and the folder verifies. Before the
// lock, both could exit 0 over a folder verify found hundreds of problems in.
func TestTwoRunsAtOnce(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the binary")
	}
	bin := buildBinary(t)
	for round := 0; round < 3; round++ {
		dir := filepath.Join(t.TempDir(), "race")
		var wg sync.WaitGroup
		codes := make([]int, 2)
		outs := make([]string, 2)
		for i := range codes {
			wg.Add(1)
			go func(i int) {
				defer wg.Done()
				var b bytes.Buffer
				cmd := exec.Command(bin, "generate", "--count", "300", "--workers", "1", "--seed", "5", "--out", dir, "--quiet")
				cmd.Stdout, cmd.Stderr = &b, &b
				err := cmd.Run()
				outs[i] = b.String()
				if ee, ok := err.(*exec.ExitError); ok {
					codes[i] = ee.ExitCode()
				} else if err != nil {
					t.Error(err)
				}
			}(i)
		}
		wg.Wait()
		ok := 0
		for i, c := range codes {
			switch c {
			case 0:
				ok++
			case 2:
				if !strings.Contains(outs[i], "being written by another trueset run") && !strings.Contains(outs[i], "is not empty") {
					t.Errorf("round %d: refused run says %q", round, outs[i])
				}
			default:
				t.Errorf("round %d: exit %d: %s", round, c, outs[i])
			}
		}
		if ok != 1 {
			t.Errorf("round %d: %d runs exited 0 (%v), want exactly 1", round, ok, outs)
		}
		wantCode(t, exitOK, "verify", dir)
	}
}

// Issue 11: an output folder that is, holds or lies inside an input is
// refused with exit 2 before anything is touched, in augment and merge.
func TestOutputOverlapsInput(t *testing.T) {
	root := t.TempDir()
	src := filepath.Join(root, "src")
	wantCode(t, exitOK, "generate", "--count", "6", "--out", src, "--quiet")
	s0, s1 := filepath.Join(root, "s0"), filepath.Join(root, "s1")
	wantCode(t, exitOK, "generate", "--count", "6", "--shard", "0/2", "--out", s0, "--quiet")
	wantCode(t, exitOK, "generate", "--count", "6", "--shard", "1/2", "--out", s1, "--quiet")
	before := treeDigest(t, root)
	plan := "../../examples/plans/light.yaml"
	for _, args := range [][]string{
		{"augment", "--in", src, "--out", src, "--plan", plan, "--force"},
		{"augment", "--in", src, "--out", filepath.Join(src, "images", "aug"), "--plan", plan},
		{"augment", "--in", src, "--out", root, "--plan", plan, "--force"},
		{"merge", s0, s1, "--out", s0, "--force"},
		{"merge", s0, s1, "--out", filepath.Join(s1, "m")},
		{"merge", s0, s1, "--out", root, "--force"},
	} {
		_, stderr := wantCode(t, exitUsage, args...)
		if !strings.Contains(stderr, "output folder") {
			t.Errorf("%v: %q", args, stderr)
		}
		if after := treeDigest(t, root); after != before {
			t.Fatalf("%v changed files under %s", args, root)
		}
	}
}

// treeDigest is every path under root with its size and SHA-256.
func treeDigest(t *testing.T, root string) string {
	t.Helper()
	var b strings.Builder
	err := filepath.Walk(root, func(p string, info os.FileInfo, err error) error {
		if err != nil {
			return err
		}
		fmt.Fprintf(&b, "%s %v %d", p, info.IsDir(), info.Size())
		if !info.IsDir() {
			c, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			b.WriteString(" " + manifest.SHA256Hex(c))
		}
		b.WriteByte('\n')
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return b.String()
}

// Augmenting a set built with instruments (planted noise, held-out
// combinations, bait) writes what verify accepts: copies carry none of the
// source's planted marks (their labels are measured from their own masks,
// and moves change a cue), keep a held-out source's hold-out split, and a
// re-split held-out set is dealt as verify deals it.
func TestAugmentInstrumentSets(t *testing.T) {
	plan := "../../examples/plans/light.yaml"
	for _, name := range []string{"noisy-sorting", "unseen-paint", "bead-bait"} {
		t.Run(name, func(t *testing.T) {
			root := t.TempDir()
			src, out := filepath.Join(root, "src"), filepath.Join(root, "aug")
			wantCode(t, exitOK, "generate", "--recipe", "../../examples/instruments/"+name+".yaml", "--count", "120", "--out", src, "--quiet")
			if name == "unseen-paint" {
				wantCode(t, exitOK, "split", src, "--ratios", "train=0.6,val=0.2,test=0.2", "--quiet")
			}
			wantCode(t, exitOK, "augment", "--in", src, "--out", out, "--plan", plan, "--split", "train,test", "--quiet")
			wantCode(t, exitOK, "verify", out)
			copies := 0
			err := manifest.ReadManifest(out, func(r *manifest.Record) error {
				if r.Lineage == nil {
					return nil
				}
				copies++
				if r.Mislabel != nil || r.Bait != nil || r.HeldOut != "" {
					t.Errorf("copy %s carries planted marks: mislabel %v, bait %v, held_out %q", r.ID, r.Mislabel, r.Bait, r.HeldOut)
				}
				return nil
			})
			if err != nil {
				t.Fatal(err)
			}
			if copies == 0 {
				t.Fatal("no copies were made")
			}
		})
	}
}

// A folder argument that does not exist, or is a file, gets one message and
// exit 2 from every command that reads or writes a dataset.
func TestMissingFolderSameEverywhere(t *testing.T) {
	tmp := t.TempDir()
	missing := filepath.Join(tmp, "nodir")
	file := filepath.Join(tmp, "file.txt")
	if err := os.WriteFile(file, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	plan := "../../examples/plans/light.yaml"
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"verify", missing}, missing + " does not exist"},
		{[]string{"stats", missing}, missing + " does not exist"},
		{[]string{"preview", missing, "--out", filepath.Join(tmp, "s.png")}, missing + " does not exist"},
		{[]string{"report", missing, "--out", filepath.Join(tmp, "r.html")}, missing + " does not exist"},
		{[]string{"split", missing}, missing + " does not exist"},
		{[]string{"readback", missing, filepath.Join(tmp, "b.npz")}, missing + " does not exist"},
		{[]string{"export", missing, "--format", "objects-json", "--out", filepath.Join(tmp, "o.json")}, missing + " does not exist"},
		{[]string{"augment", "--in", missing, "--out", filepath.Join(tmp, "a"), "--plan", plan}, "--in " + missing + " does not exist"},
		{[]string{"verify", file}, file + " is a file, not a folder"},
		{[]string{"generate", "--count", "2", "--out", file}, "--out " + file + " is a file, not a folder"},
	} {
		_, stderr := wantCode(t, exitUsage, c.args...)
		if !strings.Contains(stderr, c.want) {
			t.Errorf("trueset %s: %q lacks %q", strings.Join(c.args, " "), stderr, c.want)
		}
	}
}
