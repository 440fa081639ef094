package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

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

// No flag usage holds backquotes: pflag takes a `quoted` word of a usage
// as the value's placeholder, so "see `trueset presets`" showed as
// "--preset trueset presets" in the help.
func TestNoBackquotesInFlagUsage(t *testing.T) {
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		c.Flags().VisitAll(func(f *pflag.Flag) {
			if strings.Contains(f.Usage, "`") {
				t.Errorf("%s --%s: usage %q holds a backquote", c.CommandPath(), f.Name, f.Usage)
			}
		})
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(newRoot(&bytes.Buffer{}, &bytes.Buffer{}))
	stdout, _ := wantCode(t, exitOK, "generate", "--help")
	if !regexp.MustCompile(`--preset string\s`).MatchString(stdout) {
		t.Errorf("generate --help does not show --preset string:\n%s", stdout)
	}
}

// Flag errors name the flag and what it takes, never Go's parser; a file
// flag names the missing file; a misspelled or renamed flag gets a
// suggestion. All exit 2.
func TestFlagErrorMessages(t *testing.T) {
	tmp := t.TempDir()
	out := filepath.Join(tmp, "o")
	cases := []struct {
		args []string
		want []string
	}{
		{[]string{"generate", "--out", out, "--count", "ten"}, []string{"--count ten", "whole number"}},
		{[]string{"generate", "--out", out, "--seed", "-3"}, []string{"--seed -3", "whole number ≥ 0"}},
		{[]string{"generate", "--out", out, "--quiet=maybe"}, []string{"--quiet maybe", "true or false"}},
		{[]string{"generate", "--out"}, []string{"--out needs a value"}},
		{[]string{"generate", "--recipe", filepath.Join(tmp, "nosuch.yaml"), "--out", out}, []string{"--recipe " + filepath.Join(tmp, "nosuch.yaml"), "does not exist"}},
		{[]string{"augment", "--in", tmp, "--out", t.TempDir(), "--plan", filepath.Join(tmp, "nosuch.yaml")}, []string{"--plan", "does not exist"}},
		{[]string{"generate", "--out", out, "--cuont", "5"}, []string{"unknown flag --cuont", "did you mean --count?"}},
		{[]string{"generate", "--out", out, "--stratfy", "dice"}, []string{"did you mean --stratify?"}},
		{[]string{"generate", "--out", out, "--split", "train=1"}, []string{"unknown flag --split", "did you mean --ratios?"}},
		{[]string{"split", tmp, "--split", "train=1"}, []string{"did you mean --ratios?"}},
		{[]string{"augment", "--splits", "train"}, []string{"unknown flag --splits", "did you mean --split?"}},
		{[]string{"verify", tmp, "--max-problem", "3"}, []string{"did you mean --max-problems?"}},
		{[]string{"generate", "--out", out, "--count", "-5"}, []string{"--count -5"}},
		{[]string{"generate", "--out", out, "--workers", "-1"}, []string{"--workers -1"}},
		{[]string{"verify", tmp, "--max-problems", "-1"}, []string{"--max-problems -1"}},
		{[]string{"verify", tmp, "--workers", "-2"}, []string{"--workers -2"}},
		{[]string{"augment", "--in", tmp, "--out", out, "--plan", "x.yaml", "--max-pixels", "-1"}, []string{"--max-pixels -1"}},
		{[]string{"augment", "--in", tmp, "--out", out, "--plan", "x.yaml", "--workers", "-1"}, []string{"--workers -1"}},
		{[]string{"augment", "--in", tmp, "--out", out, "--plan", "x.yaml", "--split", "train=0.8,val=0.2"}, []string{"--ratios"}},
	}
	for _, c := range cases {
		_, stderr := wantCode(t, exitUsage, c.args...)
		for _, w := range c.want {
			if !strings.Contains(stderr, w) {
				t.Errorf("trueset %s: stderr %q lacks %q", strings.Join(c.args, " "), stderr, w)
			}
		}
		for _, bad := range []string{"strconv", "invalid argument", "stat "} {
			if strings.Contains(stderr, bad) {
				t.Errorf("trueset %s: stderr %q shows Go's %q", strings.Join(c.args, " "), stderr, bad)
			}
		}
	}
}

func TestNearestFlag(t *testing.T) {
	c := newGenerateCmd(&bytes.Buffer{}, &bytes.Buffer{})
	for in, want := range map[string]string{"cuont": "count", "wokers": "workers", "res": "resume", "recipes": "recipe", "zzzzzz": "", "x": ""} {
		if got := nearestFlag(c, in); got != want {
			t.Errorf("nearestFlag(%q) = %q, want %q", in, got, want)
		}
	}
	// Levenshtein distances worked by hand: kitten → sitting is 3
	// (the classic example), flaw → lawn is 2.
	if d := editDistance("kitten", "sitting"); d != 3 {
		t.Errorf("kitten/sitting: %d", d)
	}
	if d := editDistance("flaw", "lawn"); d != 2 {
		t.Errorf("flaw/lawn: %d", d)
	}
}

func TestVersionFlag(t *testing.T) {
	flag, _ := wantCode(t, exitOK, "--version")
	cmd, _ := wantCode(t, exitOK, "version")
	if flag != cmd || !strings.HasPrefix(flag, "trueset "+version+" ") {
		t.Errorf("--version printed %q, version printed %q", flag, cmd)
	}
}

// Plurals, rounded numbers and a summary that fits 80 columns.
func TestWording(t *testing.T) {
	if got := (errFound{1}).Error(); got != "1 problem found" {
		t.Errorf("%q", got)
	}
	if got := (errFound{2}).Error(); got != "2 problems found" {
		t.Errorf("%q", got)
	}
	for secs, want := range map[float64]string{0.4237: "0.42 s", 32.62767203840939: "32.6 s", 312.5: "312 s"} {
		if got := seconds(secs); got != want {
			t.Errorf("seconds(%v) = %q, want %q", secs, got, want)
		}
	}
	table := manifest.SplitTable{Names: []string{"train", "val", "test"}, Spec: "train=0.8,val=0.1,test=0.1",
		Counts: map[string]int{"train": 16000, "val": 2000, "test": 2000}, Stratify: "dice"}
	for k := 1; k <= 4; k++ {
		table.Strata = append(table.Strata, manifest.Stratum{Key: fmt.Sprintf("dice=%d", k), Groups: 5000,
			Splits: map[string]int{"train": 4000, "val": 500, "test": 500}})
	}
	var buf bytes.Buffer
	printGenerateSummary(&buf, gen.Summary{Samples: 20000, Elapsed: 32627672038 * time.Nanosecond, Bytes: 136_791_234, Splits: table},
		"tabletop-dice", "dice", 7, 0, 0, "")
	text := buf.String()
	for _, line := range strings.Split(strings.TrimSpace(text), "\n") {
		if n := utf8.RuneCountInString(line); n > 80 {
			t.Errorf("summary line of %d columns: %q", n, line)
		}
	}
	for _, want := range []string{"wrote 20000 samples of tabletop-dice to dice", "32.6 s", "613 samples/s", "130.5 MiB", "stratified by dice", "groups"} {
		if !strings.Contains(text, want) {
			t.Errorf("summary lacks %q:\n%s", want, text)
		}
	}
	buf.Reset()
	table.Stratify = ""
	printSplitTable(&buf, table)
	if s := buf.String(); strings.Contains(s, "(not stratified)") || !strings.Contains(s, "not stratified (one stratum") {
		t.Errorf("unstratified table heading: %q", s)
	}
}

// The progress line shows no rate until the run has gone on for a second,
// labels its times, and fits 80 columns at 20,000 samples.
func TestProgressText(t *testing.T) {
	early := progressText("generating tabletop-dice", "samples", 12, 20000, 40*time.Millisecond)
	if strings.Contains(early, "/s") || strings.Contains(early, "left") || !strings.Contains(early, "elapsed 0s") {
		t.Errorf("after 40 ms: %q", early)
	}
	late := progressText("generating tabletop-dice", "samples", 12000, 20000, 20*time.Second)
	for _, want := range []string{"12000/20000", "60%", "elapsed 20s", "left 13s", "600 samples/s"} {
		if !strings.Contains(late, want) {
			t.Errorf("%q lacks %q", late, want)
		}
	}
	if n := utf8.RuneCountInString(late); n > 79 {
		t.Errorf("%d columns: %q", n, late)
	}
	if got := clock(125 * time.Second); got != "2m05s" {
		t.Errorf("clock: %q", got)
	}
	var buf bytes.Buffer
	p := newProgress(&buf, "generating x", "samples", 10, 30)
	p.set(10)
	p.finish()
	if s := buf.String(); !strings.HasPrefix(s, "\r") || !strings.HasSuffix(s, "\r") || strings.Contains(s, "\n") {
		t.Errorf("progress wrote %q", s)
	}
	for _, line := range strings.Split(buf.String(), "\r") {
		if utf8.RuneCountInString(line) > 29 {
			t.Errorf("line %q is wider than the 30-column terminal", line)
		}
	}
}
