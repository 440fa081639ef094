package main

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/spf13/cobra"
)

// Every example in every command's help must run as written. The examples
// come from the command constructors (newRoot's tree); each paragraph of an
// Example (lines between blank lines) runs in bash, in a fresh temporary
// folder that is also $HOME, with the trueset built from this package first
// on $PATH. Then every dataset the paragraph left behind must pass
// `trueset verify`.
//
// Two things are changed, both on purpose and both listed here:
//   - countSubstitutions: runs of many thousand samples get a small count;
//     the flags, presets and shapes of the command stay as written.
//   - exampleInputs: datasets and files an example reads but does not make
//     (demo, dice, my-labels, shard folders) are made first, by generating
//     them with small counts, before the paragraph runs.
//
// examples/ is linked into the folder, so examples/plans/light.yaml is the
// file the help names.

// countSubstitutions replaces long runs with short ones in examples and in
// the README's shell blocks: the command is the same, only the sample count
// shrinks so the test takes seconds, not minutes.
var countSubstitutions = map[string]string{
	"--count 20000": "--count 40",
	"--count 70000": "--count 70",
	"--count 5000":  "--count 50",
}

func substituteCounts(s string) string {
	for from, to := range countSubstitutions {
		s = strings.ReplaceAll(s, from, to)
	}
	return s
}

// exampleInputs are the inputs help examples read; an input is made when a
// paragraph matches use and does not itself match makes.
var exampleInputs = []struct {
	use, makes *regexp.Regexp
	prep       string
}{
	{regexp.MustCompile(`(stats|preview|report|verify|split) demo\b|--in demo\b`), regexp.MustCompile(`--out demo(?:\s|$)`),
		"trueset generate --count 60 --seed 2 --out demo --quiet"},
	{regexp.MustCompile(`(stats|preview|report|split) dice\b`), regexp.MustCompile(`--out dice(?:\s|$)`),
		"trueset generate --preset tabletop-dice --count 120 --out dice --quiet"},
	{regexp.MustCompile(`preview labels\b`), regexp.MustCompile(`--out labels(?:\s|$)`),
		"trueset generate --preset bin-labels --count 30 --out labels --quiet"},
	{regexp.MustCompile(`--recipe labels\.yaml`), regexp.MustCompile(`> labels\.yaml`),
		"trueset presets show bin-labels > labels.yaml"},
	// A plain labeled folder: a generated set's images, masks and instance
	// masks without its manifest and dataset.json.
	{regexp.MustCompile(`--in my-labels\b`), regexp.MustCompile(`--out my-labels(?:\s|$)`),
		"trueset generate --count 30 --out g --quiet && mkdir my-labels && cp -r g/images g/masks g/instances my-labels/ && rm -r g"},
	{regexp.MustCompile(`merge shards/\*`), regexp.MustCompile(`--out shards/`),
		"mkdir shards && for i in 0 1 2; do trueset generate --count 30 --shard $i/3 --out shards/part-$i --quiet; done"},
}

// shardPrep makes the part-K folders a `merge part-0 part-1 …` line reads
// and the paragraph does not write itself, as shards of the same run the
// paragraph's own `generate --shard` line describes (or a small default).
func shardPrep(script string) string {
	merge := regexp.MustCompile(`trueset merge ((?:part-\d+ )+)`).FindStringSubmatch(script)
	if merge == nil {
		return ""
	}
	parts := strings.Fields(merge[1])
	n := len(parts)
	base := fmt.Sprintf("trueset generate --count %d", 10*n)
	made := map[string]bool{}
	if g := regexp.MustCompile(`(trueset generate .*)--shard (\d+)/(\d+) --out (part-\d+)`).FindStringSubmatch(script); g != nil {
		base = strings.TrimSpace(g[1])
		made[g[4]] = true
	}
	var cmds []string
	for i, p := range parts {
		if !made[p] {
			cmds = append(cmds, fmt.Sprintf("%s --shard %d/%d --out %s --quiet", base, i, n, p))
		}
	}
	return strings.Join(cmds, "\n")
}

// binEnv builds trueset once and returns an environment with it first on
// PATH and home as $HOME, pagers that do not wait for a key.
func binEnv(t *testing.T, bin, home string) []string {
	t.Helper()
	return append(os.Environ(), "PATH="+filepath.Dir(bin)+string(os.PathListSeparator)+os.Getenv("PATH"),
		"HOME="+home, "MANPAGER=cat", "PAGER=cat", "MANPATH="+filepath.Join(home, ".local", "share", "man")+":")
}

// freshFolder is a new temporary folder with the repository's examples/ and
// testdata/ linked in, so paths in examples and the README resolve.
func freshFolder(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	for _, name := range []string{"examples", "testdata"} {
		abs, err := filepath.Abs(filepath.Join("..", "..", name))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.Symlink(abs, filepath.Join(dir, name)); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

// runScript runs script with bash -e in dir and fails the test on a
// non-zero exit.
func runScript(t *testing.T, what, script, dir string, env []string) {
	t.Helper()
	cmd := exec.Command("bash", "-e", "-o", "pipefail", "-c", script)
	cmd.Dir = dir
	cmd.Env = env
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Run(); err != nil {
		t.Fatalf("%s: %v\n--- script\n%s\n--- output\n%s", what, err, script, out.String())
	}
}

// verifyEverything runs trueset verify on every dataset under dir.
func verifyEverything(t *testing.T, dir string) int {
	t.Helper()
	n := 0
	filepath.WalkDir(dir, func(p string, e os.DirEntry, err error) error {
		if err != nil || e.Type()&os.ModeSymlink != 0 {
			return nil
		}
		if !e.IsDir() && e.Name() == "dataset.json" {
			n++
			if code, stdout, stderr := runCLI(t, "verify", filepath.Dir(p)); code != 0 {
				t.Errorf("verify %s: exit %d\n%s%s", filepath.Dir(p), code, stdout, stderr)
			}
		}
		return nil
	})
	return n
}

// exampleParagraphs splits an Example into paragraphs of lines, comments
// dropped.
func exampleParagraphs(example string) []string {
	var out []string
	for _, para := range regexp.MustCompile(`\n\s*\n`).Split(example, -1) {
		var lines []string
		for _, l := range strings.Split(para, "\n") {
			if l = strings.TrimSpace(l); l != "" && !strings.HasPrefix(l, "#") {
				lines = append(lines, l)
			}
		}
		if len(lines) > 0 {
			out = append(out, strings.Join(lines, "\n"))
		}
	}
	return out
}

func TestHelpExamplesRun(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: the help examples render datasets")
	}
	bin := buildBinary(t)
	var cmds []*cobra.Command
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		cmds = append(cmds, c)
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(newRoot(&bytes.Buffer{}, &bytes.Buffer{}))
	ran := 0
	for _, c := range cmds {
		for i, para := range exampleParagraphs(c.Example) {
			name := fmt.Sprintf("%s/%d", strings.ReplaceAll(c.CommandPath(), " ", "_"), i)
			t.Run(name, func(t *testing.T) {
				dir := freshFolder(t)
				env := binEnv(t, bin, dir)
				script := substituteCounts(para)
				var prep []string
				for _, in := range exampleInputs {
					if in.use.MatchString(script) && !in.makes.MatchString(script) {
						prep = append(prep, in.prep)
					}
				}
				if p := shardPrep(script); p != "" {
					prep = append(prep, p)
				}
				if len(prep) > 0 {
					runScript(t, "preparing the inputs of "+c.CommandPath()+"'s example", strings.Join(prep, "\n"), dir, env)
				}
				runScript(t, c.CommandPath()+"'s example", script, dir, env)
				verifyEverything(t, dir)
			})
			ran++
		}
	}
	if ran < 20 {
		t.Errorf("ran %d example paragraphs; the help has more", ran)
	}
}

// readmeSkips are README shell blocks the test does not run, each with its
// reason; a key that matches no block fails the test, so the list cannot
// go stale. Every other block runs.
var readmeSkips = map[string]string{
	"bash bench/run.sh": "the benchmark figures take about 10 minutes and 3 GB of scratch space; bench/ has its own checks",
}

// readmeSubstitutions are exact replacements made in README blocks before
// they run, each with its reason.
var readmeSubstitutions = []struct{ from, to, why string }{
	{"go run ./cmd/trueset ", "trueset ", "the binary under test, built once, rather than a second build by go run"},
	{"go test ./...\n", "", "the test suite would run this test again, recursively"},
	{"go build -o trueset ./cmd/trueset && export PATH=\"$PWD:$PATH\"\n", "", "the binary under test is built once and already on PATH (the folder here is not the source tree)"},
}

// TestReadmeShellBlocks runs every ```sh block of README.md, in order, in
// one fresh folder (the README reads as one session: later blocks use
// earlier blocks' datasets), with the trueset built from this package on
// PATH, countSubstitutions and readmeSubstitutions applied, and then
// verifies every dataset the README made.
func TestReadmeShellBlocks(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: the README's commands render datasets")
	}
	b, err := os.ReadFile(filepath.Join("..", "..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	blocks := regexp.MustCompile("(?ms)^```sh\n(.*?)^```").FindAllStringSubmatch(string(b), -1)
	if len(blocks) < 5 {
		t.Fatalf("README.md has %d sh blocks", len(blocks))
	}
	bin := buildBinary(t)
	dir := freshFolder(t)
	env := binEnv(t, bin, dir)
	used := map[string]bool{}
	for i, m := range blocks {
		block := m[1]
		skip := ""
		for key, why := range readmeSkips {
			if strings.Contains(block, key) {
				skip, used[key] = why, true
			}
		}
		if skip != "" {
			t.Logf("README block %d not run (%s):\n%s", i, skip, block)
			continue
		}
		for _, s := range readmeSubstitutions {
			if strings.Contains(block, s.from) {
				t.Logf("README block %d: %q replaced by %q: %s", i, s.from, s.to, s.why)
				block = strings.ReplaceAll(block, s.from, s.to)
			}
		}
		if sub := substituteCounts(block); sub != block {
			t.Logf("README block %d runs with smaller counts:\n%s", i, sub)
			block = sub
		}
		runScript(t, fmt.Sprintf("README block %d", i), block, dir, env)
	}
	for key := range readmeSkips {
		if !used[key] {
			t.Errorf("readmeSkips names %q, which no README block holds", key)
		}
	}
	if n := verifyEverything(t, dir); n < 3 {
		t.Errorf("the README made %d datasets", n)
	}
}
