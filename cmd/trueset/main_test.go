package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/cobra"

	"github.com/trueset/trueset/gen"
	"github.com/trueset/trueset/manifest"
)

// runCLI drives the command tree in-process, without a shell.
func runCLI(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	code = run(args, &out, &errb)
	return code, out.String(), errb.String()
}

func wantCode(t *testing.T, want int, args ...string) (stdout, stderr string) {
	t.Helper()
	code, stdout, stderr := runCLI(t, args...)
	if code != want {
		t.Fatalf("trueset %s: exit %d, want %d\nstdout: %s\nstderr: %s", strings.Join(args, " "), code, want, stdout, stderr)
	}
	return stdout, stderr
}

func TestGenerateOK(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	stdout, _ := wantCode(t, exitOK, "generate", "--out", dir, "--count", "20", "--quiet")
	if stdout != "" {
		t.Errorf("--quiet printed %q", stdout)
	}
	d, err := manifest.ReadDataset(dir)
	if err != nil {
		t.Fatal(err)
	}
	if d.Count != 20 {
		t.Errorf("dataset.json count = %d, want 20", d.Count)
	}
	n := 0
	if err := manifest.ReadManifest(dir, func(*manifest.Record) error { n++; return nil }); err != nil {
		t.Fatal(err)
	}
	if n != 20 {
		t.Errorf("manifest.jsonl has %d records, want 20", n)
	}
}

func TestUsageErrors(t *testing.T) {
	tmp := t.TempDir()
	cases := []struct {
		name string
		args []string
	}{
		{"unknown flag", []string{"generate", "--out", filepath.Join(tmp, "a"), "--no-such-flag"}},
		{"unknown root flag", []string{"--no-such-flag"}},
		{"unknown preset", []string{"generate", "--preset", "nope", "--out", filepath.Join(tmp, "b")}},
		{"preset and recipe", []string{"generate", "--preset", gen.DefaultPreset, "--recipe", "x.yaml", "--out", filepath.Join(tmp, "c")}},
		{"unknown command", []string{"no-such-command"}},
		{"missing --out", []string{"generate"}},
		{"bad count", []string{"generate", "--out", filepath.Join(tmp, "d"), "--count", "0"}},
		{"bad ratios", []string{"generate", "--out", filepath.Join(tmp, "e"), "--ratios", "train"}},
		{"presets show without name", []string{"presets", "show"}},
		{"presets show unknown", []string{"presets", "show", "nope"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, stderr := wantCode(t, exitUsage, c.args...)
			if !strings.HasPrefix(stderr, "trueset: ") {
				t.Errorf("stderr %q does not start with \"trueset: \"", stderr)
			}
		})
	}
}

func TestRecipeErrorNamesFileAndLine(t *testing.T) {
	tmp := t.TempDir()
	recipe := filepath.Join(tmp, "bad.yaml")
	// Line 4 holds the bad value (a zero height).
	src := "name: bad\ncanvas:\n  width: 32\n  height: 0\nclasses:\n  - name: a\n    color: [1, 2, 3]\n"
	if err := os.WriteFile(recipe, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	_, stderr := wantCode(t, exitUsage, "generate", "--recipe", recipe, "--out", filepath.Join(tmp, "out"))
	if !strings.Contains(stderr, recipe+":4:") {
		t.Errorf("stderr %q does not name %s line 4", stderr, recipe)
	}
	if !strings.Contains(stderr, "canvas.height") {
		t.Errorf("stderr %q does not name the field canvas.height", stderr)
	}
}

func TestFailureWhileWorking(t *testing.T) {
	tmp := t.TempDir()
	file := filepath.Join(tmp, "plain-file")
	if err := os.WriteFile(file, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	// A folder cannot be created under a regular file.
	_, stderr := wantCode(t, exitFailure, "generate", "--out", filepath.Join(file, "sub"), "--count", "5", "--quiet")
	if stderr == "" {
		t.Error("no message on stderr")
	}
}

func TestNonEmptyOutIsUsageError(t *testing.T) {
	dir := t.TempDir()
	keep := filepath.Join(dir, "notes.txt")
	if err := os.WriteFile(keep, []byte("mine"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, stderr := wantCode(t, exitUsage, "generate", "--out", dir, "--count", "5", "--quiet")
	if !strings.Contains(stderr, "--force") {
		t.Errorf("stderr %q does not mention --force", stderr)
	}
	// Refused before anything was written.
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(ents) != 1 {
		t.Errorf("refused run left %d entries in the folder, want only notes.txt", len(ents))
	}
	wantCode(t, exitOK, "generate", "--out", dir, "--count", "5", "--quiet", "--force")
}

func TestPresetsListsEveryName(t *testing.T) {
	stdout, _ := wantCode(t, exitOK, "presets")
	names := gen.PresetNames()
	if len(names) == 0 {
		t.Fatal("no built-in presets")
	}
	for _, name := range names {
		if !strings.Contains(stdout, name) {
			t.Errorf("presets output lacks %q:\n%s", name, stdout)
		}
	}
}

func TestPresetsShowParses(t *testing.T) {
	for _, name := range gen.PresetNames() {
		t.Run(name, func(t *testing.T) {
			stdout, _ := wantCode(t, exitOK, "presets", "show", name)
			r, err := gen.ParseRecipe(name+".yaml", []byte(stdout))
			if err != nil {
				t.Fatalf("presets show %s does not parse: %v", name, err)
			}
			if r.Name != name {
				t.Errorf("recipe name %q, want %q", r.Name, name)
			}
		})
	}
}

func TestVersion(t *testing.T) {
	stdout, _ := wantCode(t, exitOK, "version")
	if !strings.Contains(stdout, version) {
		t.Errorf("version printed %q, want it to contain %q", stdout, version)
	}
}

// TestEveryCommandHasExample walks the tree newRoot builds. cobra adds its
// own help and completion commands only when the tree is executed, so they
// are not part of this walk.
func TestEveryCommandHasExample(t *testing.T) {
	var walk func(c *cobra.Command)
	seen := 0
	walk = func(c *cobra.Command) {
		seen++
		if strings.TrimSpace(c.Example) == "" {
			t.Errorf("%q has no Example in its help", c.CommandPath())
		}
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(newRoot(&bytes.Buffer{}, &bytes.Buffer{}))
	if seen < 5 {
		t.Errorf("walked %d commands, want at least root, generate, presets, presets show, version", seen)
	}
}
