package main

import (
	"bufio"
	"bytes"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/trueset/trueset/manifest"
)

// readRecords returns every record of dir's manifest.jsonl in order.
func readRecords(t *testing.T, dir string) []*manifest.Record {
	t.Helper()
	var recs []*manifest.Record
	if err := manifest.ReadManifest(dir, func(r *manifest.Record) error { recs = append(recs, r); return nil }); err != nil {
		t.Fatal(err)
	}
	return recs
}

// editRecord decodes the manifest line of record id as JSON, lets edit change
// it, and writes it back re-encoded; the other lines keep their bytes.
func editRecord(t *testing.T, dir, id string, edit func(r *manifest.Record)) {
	t.Helper()
	p := filepath.Join(dir, manifest.ManifestFile)
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	found := false
	sc := bufio.NewScanner(bytes.NewReader(b))
	sc.Buffer(nil, 16<<20)
	for sc.Scan() {
		line := sc.Bytes()
		err := manifest.DecodeManifest(bytes.NewReader(line), p, func(r *manifest.Record) error {
			if r.ID != id {
				return nil
			}
			found = true
			edit(r)
			nb, err := manifest.MarshalRecord(r)
			line = nb
			return err
		})
		if err != nil {
			t.Fatal(err)
		}
		out.Write(line)
		out.WriteByte('\n')
	}
	if !found {
		t.Fatalf("no record %s in %s", id, p)
	}
	if err := os.WriteFile(p, out.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// refreshManifestSum writes the manifest's new SHA-256 into dataset.json, as
// a careful forger would.
func refreshManifestSum(t *testing.T, dir string) {
	t.Helper()
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	mb, err := os.ReadFile(filepath.Join(dir, manifest.ManifestFile))
	if err != nil {
		t.Fatal(err)
	}
	d.ManifestSHA256 = manifest.SHA256Hex(mb)
	db, err := manifest.MarshalDataset(d)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, manifest.DatasetFile), db, 0o644); err != nil {
		t.Fatal(err)
	}
}

// firstWithObjects returns the first record at or after index from that
// holds an object.
func firstWithObjects(t *testing.T, recs []*manifest.Record, from int) *manifest.Record {
	t.Helper()
	for _, r := range recs[from:] {
		if len(r.Objects) > 0 {
			return r
		}
	}
	t.Fatalf("no record from %d on holds an object", from)
	return nil
}

// inSplit returns the first record in split s.
func inSplit(t *testing.T, recs []*manifest.Record, s string) *manifest.Record {
	t.Helper()
	for _, r := range recs {
		if r.Split == s {
			return r
		}
	}
	t.Fatalf("no record in split %s", s)
	return nil
}

func TestVerifyDamage(t *testing.T) {
	pristine := filepath.Join(t.TempDir(), "pristine")
	// The default preset: count targets per class and in all (parts).
	wantCode(t, exitOK, "generate", "--out", pristine, "--count", "12", "--quiet")
	recs := readRecords(t, pristine)
	train, val := inSplit(t, recs, "train"), inSplit(t, recs, "val")

	cases := []struct {
		name   string
		id     string // record the damage is in; "" for a dataset-wide problem
		phrase string // what the report must say
		damage func(t *testing.T, dir string)
	}{
		{"image byte flipped", recs[1].ID, "SHA-256", func(t *testing.T, dir string) {
			p := filepath.Join(dir, recs[1].Image)
			b, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			b[len(b)/2] ^= 0xff
			if err := os.WriteFile(p, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}},
		{"mask file missing", recs[2].ID, recs[2].Mask + ": does not exist", func(t *testing.T, dir string) {
			if err := os.Remove(filepath.Join(dir, recs[2].Mask)); err != nil {
				t.Fatal(err)
			}
		}},
		{"bbox edited", firstWithObjects(t, recs, 3).ID, "box", func(t *testing.T, dir string) {
			editRecord(t, dir, firstWithObjects(t, recs, 3).ID, func(r *manifest.Record) { r.Objects[0].Box[2]++ })
		}},
		// parts is a count target of every object (workshop-parts preset).
		{"count target disagrees with the instance mask", recs[4].ID, "target parts", func(t *testing.T, dir string) {
			editRecord(t, dir, recs[4].ID, func(r *manifest.Record) {
				r.Targets["parts"] = manifest.Number(r.Targets["parts"].Num + 1)
			})
		}},
		{"path with ..", recs[5].ID, "leaves the dataset folder", func(t *testing.T, dir string) {
			editRecord(t, dir, recs[5].ID, func(r *manifest.Record) { r.Image = "../" + r.Image })
		}},
		// Copies of one source must share a split (common practice: grouped
		// splits, so no source leaks between train and test).
		{"group split across splits", val.ID, "spans splits", func(t *testing.T, dir string) {
			editRecord(t, dir, val.ID, func(r *manifest.Record) { r.Group = train.Group })
		}},
		{"record moved to another split", train.ID, "is in split val, but seed 1's allocation", func(t *testing.T, dir string) {
			editRecord(t, dir, train.ID, func(r *manifest.Record) { r.Split = "val" })
		}},
		{"dataset.json missing (incomplete set)", "", "incomplete", func(t *testing.T, dir string) {
			if err := os.Remove(filepath.Join(dir, manifest.DatasetFile)); err != nil {
				t.Fatal(err)
			}
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "set")
			copyTree(t, pristine, dir)
			c.damage(t, dir)
			stdout, _ := wantCode(t, exitFailure, "verify", dir)
			for _, line := range strings.Split(stdout, "\n") {
				if strings.Contains(line, c.phrase) && (c.id == "" || strings.Contains(line, c.id)) {
					return
				}
			}
			t.Errorf("no report line names record %q and says %q:\n%s", c.id, c.phrase, stdout)
		})
	}
	t.Run("intact copy", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		stdout, _ := wantCode(t, exitOK, "verify", dir)
		if !strings.Contains(stdout, "12 samples") {
			t.Errorf("verify printed %q", stdout)
		}
	})
}

func TestVerifyRegenerate(t *testing.T) {
	pristine := filepath.Join(t.TempDir(), "pristine")
	wantCode(t, exitOK, "generate", "--out", pristine, "--count", "12", "--quiet")
	recs := readRecords(t, pristine)

	t.Run("intact", func(t *testing.T) {
		stdout, _ := wantCode(t, exitOK, "verify", "--regenerate", pristine)
		if !strings.Contains(stdout, "every byte identical") {
			t.Errorf("verify --regenerate printed %q", stdout)
		}
	})

	t.Run("changed byte stops before regenerating", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		p := filepath.Join(dir, recs[3].Image)
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		b[len(b)/2] ^= 0x01
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		stdout, _ := wantCode(t, exitFailure, "verify", "--regenerate", dir)
		if !strings.Contains(stdout, recs[3].ID) || strings.Contains(stdout, "regenerated") {
			t.Errorf("plain verify should fail on %s before any regeneration:\n%s", recs[3].ID, stdout)
		}
	})

	// A consistent forgery: one pixel changed, re-encoded as a valid PNG, the
	// record's SHA-256 and dataset.json's manifest checksum updated. Plain
	// verify cannot tell; regenerating from recipe and seed can.
	t.Run("consistent forgery", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		r := recs[6]
		p := filepath.Join(dir, r.Image)
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		m, err := png.Decode(f)
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		g, ok := m.(*image.Gray)
		if !ok {
			t.Fatalf("%s is a %T, want a gray image (workshop-parts is gray)", p, m)
		}
		g.Pix[0] ^= 0x80
		var buf bytes.Buffer
		if err := png.Encode(&buf, g); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		editRecord(t, dir, r.ID, func(rec *manifest.Record) { rec.SHA256["image"] = manifest.SHA256Hex(buf.Bytes()) })
		refreshManifestSum(t, dir)
		wantCode(t, exitOK, "verify", dir)
		_, stderr := wantCode(t, exitFailure, "verify", "--regenerate", dir)
		if !strings.Contains(stderr, "regenerated bytes differ") {
			t.Errorf("verify --regenerate said %q", stderr)
		}
	})

	// The comparison itself: the first differing file, in path order.
	t.Run("firstDifference", func(t *testing.T) {
		dir := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, dir)
		if got, err := firstDifference(pristine, dir); err != nil || got != "" {
			t.Fatalf("identical copies: firstDifference = %q, %v", got, err)
		}
		rel := recs[9].Mask
		b, err := os.ReadFile(filepath.Join(dir, rel))
		if err != nil {
			t.Fatal(err)
		}
		b[len(b)-1] ^= 0x01
		if err := os.WriteFile(filepath.Join(dir, rel), b, 0o644); err != nil {
			t.Fatal(err)
		}
		if got, err := firstDifference(pristine, dir); err != nil || got != rel {
			t.Errorf("one changed file: firstDifference = %q, %v; want %q", got, err, rel)
		}
		// A file only one side has is named with which side lacks it.
		extra := filepath.Join(t.TempDir(), "set")
		copyTree(t, pristine, extra)
		if err := os.WriteFile(filepath.Join(extra, "images", "zzz.png"), []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
		if got, _ := firstDifference(pristine, extra); !strings.HasPrefix(got, "images/zzz.png (missing here") {
			t.Errorf("file only in the regenerated folder: %q", got)
		}
		if got, _ := firstDifference(extra, pristine); !strings.HasPrefix(got, "images/zzz.png (extra") {
			t.Errorf("file only in the checked folder: %q", got)
		}
	})
}

// Flags that would unbound verify are refused as usage errors (exit 2)
// before anything is read.
func TestVerifyFlagBounds(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "set")
	wantCode(t, exitOK, "generate", "--out", dir, "--count", "4", "--quiet")
	for _, args := range [][]string{
		{"verify", "--regenerate", "-j", "100000000", dir},
		{"verify", "--regenerate", "-j", "1025", dir},
		{"verify", "-j", "-1", dir},
		{"verify", "--max-problems", "-1", dir},
	} {
		_, stderr := wantCode(t, exitUsage, args...)
		if !strings.Contains(stderr, "--workers") && !strings.Contains(stderr, "--max-problems") {
			t.Errorf("%v: %q names no flag", args, stderr)
		}
	}
	// A clean set never gets "… and N more", whatever --max-problems.
	for _, m := range []string{"0", "1", "50"} {
		stdout, _ := wantCode(t, exitOK, "verify", "--max-problems", m, dir)
		if strings.Contains(stdout, "more") {
			t.Errorf("--max-problems %s on a clean set printed %q", m, stdout)
		}
	}
}

// regenerateDirs lists the trueset-regenerate-* folders under root.
func regenerateDirs(t *testing.T, root string) []string {
	t.Helper()
	m, err := filepath.Glob(filepath.Join(root, regeneratePrefix+"*"))
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// The temporary copy lives in TMPDIR as trueset-regenerate-* and is gone
// after a run that succeeds and after one that finds a difference.
func TestVerifyRegenerateCleansUp(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "set")
	wantCode(t, exitOK, "generate", "--out", dir, "--count", "6", "--quiet")
	tmp := t.TempDir()
	t.Setenv("TMPDIR", tmp)
	wantCode(t, exitOK, "verify", "--regenerate", "-j", "2", dir)
	if d := regenerateDirs(t, tmp); len(d) != 0 {
		t.Errorf("after success: %v left", d)
	}
	// A file no record names passes plain verify; regenerating does not
	// make it, so the comparison fails (exit 1) after the copy was made.
	other := filepath.Join(t.TempDir(), "other")
	copyTree(t, dir, other)
	if err := os.WriteFile(filepath.Join(other, "images", "zzz.png"), []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, stderr := wantCode(t, exitFailure, "verify", "--regenerate", other)
	if !strings.Contains(stderr, "regenerated bytes differ") {
		t.Fatalf("the regeneration did not run: %q", stderr)
	}
	if d := regenerateDirs(t, tmp); len(d) != 0 {
		t.Errorf("after failure: %v left", d)
	}
}

// A folder a killed verify left is removed by the next run once it is an
// hour old and its owner is gone; younger folders, folders of a live
// process and folders without owner.pid are kept.
func TestRemoveStaleRegenerate(t *testing.T) {
	root := t.TempDir()
	// A process that has ended: its id names no running process (the
	// kernel may reuse it later, which only keeps a folder longer).
	done := exec.Command("go", "version")
	if err := done.Run(); err != nil {
		t.Fatal(err)
	}
	deadPID := done.Process.Pid
	mk := func(name string, pid int, age time.Duration) string {
		d := filepath.Join(root, name)
		if err := os.Mkdir(d, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(d, "set-file"), []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
		if pid != 0 {
			p := filepath.Join(d, regenerateOwner)
			if err := os.WriteFile(p, []byte(strconv.Itoa(pid)+"\n"), 0o644); err != nil {
				t.Fatal(err)
			}
			old := time.Now().Add(-age)
			if err := os.Chtimes(p, old, old); err != nil {
				t.Fatal(err)
			}
		}
		return d
	}
	stale := mk(regeneratePrefix+"stale", deadPID, 2*time.Hour)
	young := mk(regeneratePrefix+"young", deadPID, time.Minute)
	live := mk(regeneratePrefix+"live", os.Getppid(), 2*time.Hour)
	unowned := mk(regeneratePrefix+"unowned", 0, 0)
	other := mk("not-trueset-"+"stale", deadPID, 2*time.Hour)
	var msg bytes.Buffer
	removeStaleRegenerate(root, time.Now(), &msg)
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Errorf("stale folder of ended process %d kept", deadPID)
	}
	for _, d := range []string{young, live, unowned, other} {
		if _, err := os.Stat(d); err != nil {
			t.Errorf("%s removed: %v", filepath.Base(d), err)
		}
	}
	if !strings.Contains(msg.String(), stale) {
		t.Errorf("removal not said: %q", msg.String())
	}
}

// SIGINT during --regenerate removes the temporary copy (the binary is
// built and run as a user would).
func TestVerifyRegenerateInterrupted(t *testing.T) {
	bin := filepath.Join(t.TempDir(), "trueset")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	dir := filepath.Join(t.TempDir(), "set")
	wantCode(t, exitOK, "generate", "--out", dir, "--count", "3000", "--quiet")
	tmp := t.TempDir()
	cmd := exec.Command(bin, "verify", "--regenerate", "-j", "1", dir)
	cmd.Env = append(os.Environ(), "TMPDIR="+tmp)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	waited := make(chan error, 1)
	go func() { waited <- cmd.Wait() }()
	// Wait until the copy has files in it, then interrupt.
	deadline := time.Now().Add(5 * time.Minute) // detects a hang only
	seen := false
	for !seen && time.Now().Before(deadline) {
		for _, d := range regenerateDirs(t, tmp) {
			if m, _ := filepath.Glob(filepath.Join(d, "set", "images", "*.png")); len(m) > 0 {
				seen = true
			}
		}
		select {
		case err := <-waited:
			t.Fatalf("verify ended before it was interrupted (%v): %s", err, stderr.String())
		case <-time.After(5 * time.Millisecond):
		}
	}
	if !seen {
		t.Fatal("no regenerated image appeared")
	}
	if err := cmd.Process.Signal(os.Interrupt); err != nil {
		t.Fatal(err)
	}
	select {
	case err := <-waited:
		if err == nil {
			t.Errorf("interrupted verify exited 0")
		}
	case <-time.After(2 * time.Minute): // detects a hang only
		cmd.Process.Kill()
		t.Fatal("verify did not end after SIGINT")
	}
	if d := regenerateDirs(t, tmp); len(d) != 0 {
		t.Errorf("after SIGINT: %v left\n%s", d, stderr.String())
	}
}
