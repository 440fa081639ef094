package main

import (
	"bytes"
	"errors"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/trueset/trueset/manifest"
)

// TestKillAndResume runs the real binary, kills it with SIGKILL at points
// chosen from how far manifest.jsonl has got (so the kill lands mid-run on a
// fast or a slow machine), resumes with --resume, and checks that the folder
// is byte for byte the folder of an uninterrupted run, that verify passes,
// and that no temporary file or run marker is left. SIGINT, a resume with
// another seed and a resume of a finished dataset are checked on the way.
func TestKillAndResume(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the binary")
	}
	tmp := t.TempDir()
	bin := filepath.Join(tmp, "trueset")
	build := exec.Command("go", "build", "-o", bin, ".")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}

	genArgs := func(out string) []string {
		return []string{"generate", "--count", "1500", "--workers", "2", "--quiet", "--out", out}
	}
	genRef := filepath.Join(tmp, "gen-ref")
	killRun(t, bin, genArgs(genRef), nil)
	genSize := killSize(filepath.Join(genRef, manifest.ManifestFile))

	t.Run("generate", func(t *testing.T) {
		for _, c := range []killCase{
			{name: "manifest-empty", at: killWhenEmpty("images/000002.png"), empty: true},
			{name: "after-300KB", at: killWhenSize(300_000)},
			{name: "after-1.2MB-then-1.9MB", at: killWhenSize(1_200_000), again: killWhenSize(1_900_000), verify: true},
		} {
			t.Run(c.name, func(t *testing.T) {
				c.run(t, bin, genArgs, genRef, genSize, filepath.Join(tmp, "gen-"+c.name))
			})
		}
	})

	// The packed layout: the kill lands while packs, index and manifest
	// are each partly written (their buffers reach the disk at different
	// moments); the resumed folder must still equal an uninterrupted run.
	t.Run("generate-packed", func(t *testing.T) {
		packArgs := func(out string) []string {
			return append(genArgs(out), "--layout", "packed", "--pack-size", "96KiB")
		}
		ref := filepath.Join(tmp, "pack-ref")
		killRun(t, bin, packArgs(ref), nil)
		size := killSize(filepath.Join(ref, manifest.ManifestFile))
		for _, c := range []killCase{
			{name: "manifest-empty", at: killWhenEmpty("packs/index.jsonl"), empty: true},
			{name: "after-300KB", at: killWhenSize(300_000)},
			{name: "after-1.2MB-then-1.9MB", at: killWhenSize(1_200_000), again: killWhenSize(1_900_000), verify: true},
		} {
			t.Run(c.name, func(t *testing.T) {
				c.run(t, bin, packArgs, ref, size, filepath.Join(tmp, "pack-"+c.name))
			})
		}
	})

	t.Run("augment", func(t *testing.T) {
		in := filepath.Join(tmp, "aug-in")
		killRun(t, bin, []string{"generate", "--count", "300", "--workers", "2", "--quiet", "--out", in}, nil)
		plan := filepath.Join("..", "..", "testdata", "plans", "every-step.yaml")
		augArgs := func(out string) []string {
			return []string{"augment", "--in", in, "--out", out, "--plan", plan, "--copies", "4", "--workers", "2", "--quiet"}
		}
		ref := filepath.Join(tmp, "aug-ref")
		killRun(t, bin, augArgs(ref), nil)
		size := killSize(filepath.Join(ref, manifest.ManifestFile))
		for _, c := range []killCase{
			{name: "manifest-empty", at: killWhenEmpty("images/000001.png"), empty: true},
			{name: "after-200KB-then-1.6MB", at: killWhenSize(200_000), again: killWhenSize(1_600_000), verify: true},
			{name: "after-1.5MB", at: killWhenSize(1_500_000)},
		} {
			t.Run(c.name, func(t *testing.T) {
				c.run(t, bin, augArgs, ref, size, filepath.Join(tmp, "aug-"+c.name))
			})
		}
		t.Run("finished", func(t *testing.T) {
			killResumeFinished(t, bin, augArgs(ref), ref)
		})
	})

	t.Run("Interrupt", func(t *testing.T) {
		out := filepath.Join(tmp, "gen-sigint")
		args := genArgs(out)
		cmd, done, stderr := killStart(t, bin, args)
		mp := filepath.Join(out, manifest.ManifestFile)
		if !killPoll(done, func() bool { return killSize(mp) >= 200_000 }) {
			t.Fatalf("the run ended (%v) before it could be interrupted", <-done)
		}
		if err := cmd.Process.Signal(os.Interrupt); err != nil {
			t.Fatal(err)
		}
		err := <-done
		var ee *exec.ExitError
		if !errors.As(err, &ee) || ee.ExitCode() != exitFailure {
			t.Fatalf("after SIGINT: %v, want exit %d; stderr:\n%s", err, exitFailure, stderr.String())
		}
		msg := stderr.String()
		for _, want := range []string{"interrupted after", "has no dataset.json yet", "Resume with:", "--resume"} {
			if !strings.Contains(msg, want) {
				t.Errorf("stderr lacks %q:\n%s", want, msg)
			}
		}
		if _, err := os.Stat(filepath.Join(out, manifest.DatasetFile)); err == nil {
			t.Fatal("an interrupted run wrote dataset.json")
		}
		// A clean stop: whole records only, each with its files, and no
		// temporary file left.
		b, err := os.ReadFile(mp)
		if err != nil || len(b) == 0 || b[len(b)-1] != '\n' {
			t.Errorf("after SIGINT manifest.jsonl has %d bytes and a torn last line (err %v)", len(b), err)
		}
		recs := readRecords(t, out)
		for _, r := range recs {
			for key, rel := range map[string]string{"image": r.Image, "mask": r.Mask, "instances": r.Instances} {
				fb, err := os.ReadFile(filepath.Join(out, rel))
				if err != nil || manifest.SHA256Hex(fb) != r.SHA256[key] {
					t.Errorf("after SIGINT record %s names %s, which is missing or altered", r.ID, rel)
				}
			}
		}
		for p := range killSnapshot(t, out) {
			if base := filepath.Base(p); strings.HasPrefix(base, ".") && strings.Contains(base, ".tmp") {
				t.Errorf("after SIGINT a temporary file is left: %s", p)
			}
		}
		if !strings.Contains(msg, "interrupted after "+strconv.Itoa(len(recs))+" samples") {
			t.Errorf("stderr does not say %d samples were kept:\n%s", len(recs), msg)
		}

		t.Run("ResumeOtherSeed", func(t *testing.T) {
			before := killSnapshot(t, out)
			_, stderr := wantCode(t, exitUsage, append(genArgs(out), "--resume", "--seed", "2")...)
			if !strings.Contains(stderr, "seed is 1 there, 2 now") || !strings.Contains(stderr, "different run") {
				t.Errorf("stderr does not name the differing seed:\n%s", stderr)
			}
			if strings.Contains(stderr, "resume with: trueset") {
				t.Errorf("a refused resume suggests resuming again:\n%s", stderr)
			}
			killSameSnapshot(t, out, before, killSnapshot(t, out))
		})

		// The command the message printed continues the run.
		var resume []string
		for _, line := range strings.Split(msg, "\n") {
			if l := strings.TrimSpace(line); strings.HasPrefix(l, "trueset ") {
				resume = strings.Fields(l)[1:]
			}
		}
		if resume == nil {
			t.Fatalf("no resume command in:\n%s", msg)
		}
		killRun(t, bin, resume, nil)
		killSameTree(t, genRef, out)
	})

	t.Run("ResumeFinished", func(t *testing.T) {
		killResumeFinished(t, bin, genArgs(genRef), genRef)
	})

	t.Run("ResumeStaleMarker", func(t *testing.T) {
		// Killed after dataset.json was renamed into place but before the
		// marker was removed: resuming finds it complete and tidies up.
		small := func(out string) []string {
			return []string{"generate", "--count", "20", "--workers", "2", "--quiet", "--out", out}
		}
		ref := filepath.Join(tmp, "gen-stale-ref")
		killRun(t, bin, small(ref), nil)
		dir := filepath.Join(tmp, "gen-stale")
		killCopyTree(t, ref, dir)
		if err := os.WriteFile(filepath.Join(dir, manifest.RunMarkerFile), []byte(`{"run":"generate"}`), 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, "images", ".000007.png.tmp99-1"), []byte("half"), 0o644); err != nil {
			t.Fatal(err)
		}
		stdout, _ := wantCode(t, exitOK, append(small(dir), "--resume")...)
		if !strings.Contains(stdout, "nothing to resume") {
			t.Errorf("stdout %q does not say there is nothing to resume", stdout)
		}
		killSameTree(t, ref, dir)
	})

	t.Run("ResumeNoRun", func(t *testing.T) {
		dir := filepath.Join(tmp, "gen-none")
		_, stderr := wantCode(t, exitUsage, append(genArgs(dir), "--resume")...)
		if !strings.Contains(stderr, "holds no interrupted trueset run") {
			t.Errorf("stderr: %s", stderr)
		}
	})
}

// killCase is one kill point, and optionally a second one in the resumed run.
type killCase struct {
	name      string
	at, again func(dir string) bool
	empty     bool // the kill must land while manifest.jsonl is still empty
	// verify runs trueset verify on the result. Every case's result is byte
	// for byte the uninterrupted run's, so one verify per command speaks
	// for all of them.
	verify bool
}

func (c killCase) run(t *testing.T, bin string, args func(string) []string, ref string, refSize int64, dir string) {
	mp := filepath.Join(dir, manifest.ManifestFile)
	check := func(round int) {
		size := killSize(mp)
		switch {
		case size < 0:
			t.Fatalf("round %d: no manifest.jsonl after the kill", round)
		case c.empty && round == 1 && size != 0:
			t.Fatalf("round %d: the kill landed with %d bytes in manifest.jsonl, want it still empty", round, size)
		case !c.empty && size == 0 || size >= refSize:
			t.Fatalf("round %d: the kill landed with %d of %d bytes in manifest.jsonl, want it partly written", round, size, refSize)
		}
		if _, err := os.Stat(filepath.Join(dir, manifest.DatasetFile)); err == nil {
			t.Fatalf("round %d: a killed run left dataset.json", round)
		}
		b, _ := os.ReadFile(mp)
		t.Logf("round %d: killed with %d bytes of manifest.jsonl (torn last line: %v)", round, size, len(b) > 0 && b[len(b)-1] != '\n')
	}
	start := time.Now()
	lap := func(what string) {
		t.Logf("%s: %v", what, time.Since(start).Round(time.Millisecond))
		start = time.Now()
	}
	killRun(t, bin, args(dir), func() bool { return c.at(dir) })
	check(1)
	lap("run until killed")
	if c.again != nil {
		killRun(t, bin, append(args(dir), "--resume"), func() bool { return c.again(dir) })
		check(2)
		lap("resume until killed again")
	}
	killRun(t, bin, append(args(dir), "--resume"), nil)
	lap("resume to the end")
	killSameTree(t, ref, dir)
	lap("compare with the uninterrupted run")
	if c.verify {
		wantCode(t, exitOK, "verify", dir)
		lap("verify")
	}
}

// killResumeFinished resumes a finished dataset: exit 0, "nothing to
// resume", not a byte changed.
func killResumeFinished(t *testing.T, bin string, args []string, dir string) {
	before := killSnapshot(t, dir)
	cmd := killCommand(bin, append(args, "--resume"))
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("--resume of a finished dataset: %v", err)
	}
	if !strings.Contains(string(out), "nothing to resume") {
		t.Errorf("stdout %q does not say there is nothing to resume", out)
	}
	killSameSnapshot(t, dir, before, killSnapshot(t, dir))
}

func killCommand(bin string, args []string) *exec.Cmd {
	cmd := exec.Command(bin, args...)
	// A batch engine's variables would turn the run into a shard.
	for _, kv := range os.Environ() {
		if !strings.HasPrefix(kv, "JOB_COMPLETION_INDEX=") && !strings.HasPrefix(kv, "SLURM_ARRAY_") {
			cmd.Env = append(cmd.Env, kv)
		}
	}
	return cmd
}

// killStart starts the binary; the channel gives Wait's result.
func killStart(t *testing.T, bin string, args []string) (*exec.Cmd, chan error, *bytes.Buffer) {
	t.Helper()
	cmd := killCommand(bin, args)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	return cmd, done, &stderr
}

// killPoll waits until at reports true (true) or the process ends (false;
// its Wait result is then put back on done).
func killPoll(done chan error, at func() bool) bool {
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		if at() {
			return true
		}
		select {
		case err := <-done:
			done <- err
			return false
		default:
		}
		time.Sleep(time.Millisecond)
	}
	return false
}

// killRun runs the binary; with at set it kills it (SIGKILL) as soon as at
// reports true, and fails if the run ended first. Without at it wants exit 0.
func killRun(t *testing.T, bin string, args []string, at func() bool) {
	t.Helper()
	cmd, done, stderr := killStart(t, bin, args)
	if at == nil {
		if err := <-done; err != nil {
			t.Fatalf("trueset %s: %v\n%s", strings.Join(args, " "), err, stderr.String())
		}
		return
	}
	if !killPoll(done, at) {
		err := <-done
		t.Fatalf("trueset %s ended (%v) before the kill point; stderr: %s", strings.Join(args, " "), err, stderr.String())
	}
	if err := cmd.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	err := <-done
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
		t.Fatalf("trueset %s: %v, want killed by SIGKILL (stderr: %s)", strings.Join(args, " "), err, stderr.String())
	}
}

// killWhenEmpty is true once the run has started (its marker is there) and
// sample file rel exists while manifest.jsonl is still empty: the first
// records sit in the manifest's write buffer.
func killWhenEmpty(rel string) func(string) bool {
	return func(dir string) bool {
		if _, err := os.Stat(filepath.Join(dir, manifest.RunMarkerFile)); err != nil {
			return false
		}
		if _, err := os.Stat(filepath.Join(dir, rel)); err != nil {
			return false
		}
		return killSize(filepath.Join(dir, manifest.ManifestFile)) == 0
	}
}

// killWhenSize is true once manifest.jsonl holds at least n bytes.
func killWhenSize(n int64) func(string) bool {
	return func(dir string) bool { return killSize(filepath.Join(dir, manifest.ManifestFile)) >= n }
}

// killSize is a file's size, -1 when it does not exist.
func killSize(p string) int64 {
	st, err := os.Stat(p)
	if err != nil {
		return -1
	}
	return st.Size()
}

// killEntry is one entry of a folder tree: its kind and, for a file, bytes.
type killEntry struct {
	mode fs.FileMode
	data string
}

func killSnapshot(t *testing.T, root string) map[string]killEntry {
	t.Helper()
	m := map[string]killEntry{}
	err := filepath.WalkDir(root, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, p)
		ent := killEntry{mode: e.Type()}
		switch {
		case e.Type()&fs.ModeSymlink != 0:
			target, err := os.Readlink(p)
			if err != nil {
				return err
			}
			ent.data = target
		case e.Type().IsRegular():
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			ent.data = string(b)
		}
		m[filepath.ToSlash(rel)] = ent
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func killSameSnapshot(t *testing.T, what string, want, got map[string]killEntry) {
	t.Helper()
	n := 0
	for p, w := range want {
		g, ok := got[p]
		switch {
		case !ok:
			t.Errorf("%s: %s is missing", what, p)
		case g.mode != w.mode:
			t.Errorf("%s: %s changed kind (%v, want %v)", what, p, g.mode, w.mode)
		case g.data != w.data:
			t.Errorf("%s: %s differs (%d bytes, want %d)", what, p, len(g.data), len(w.data))
		default:
			continue
		}
		if n++; n > 10 {
			t.Fatalf("%s: too many differences", what)
		}
	}
	for p := range got {
		if _, ok := want[p]; !ok {
			t.Errorf("%s: %s is extra", what, p)
			if n++; n > 10 {
				t.Fatalf("%s: too many differences", what)
			}
		}
	}
}

// killSameTree wants dir byte for byte equal to ref, with no temporary file
// and no run marker.
func killSameTree(t *testing.T, ref, dir string) {
	t.Helper()
	got := killSnapshot(t, dir)
	for p := range got {
		if base := filepath.Base(p); base == manifest.RunMarkerFile || strings.HasPrefix(base, ".") && strings.Contains(base, ".tmp") {
			t.Errorf("%s: leftover %s", dir, p)
		}
	}
	killSameSnapshot(t, dir, killSnapshot(t, ref), got)
}

func killCopyTree(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		q := filepath.Join(dst, rel)
		if e.IsDir() {
			return os.MkdirAll(q, 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(q, b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}
