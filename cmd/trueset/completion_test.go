package main

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"github.com/spf13/cobra"
)

// subcommandNames are the names of the root's commands as newRoot builds them.
func subcommandNames() []string {
	var names []string
	for _, c := range newRoot(&bytes.Buffer{}, &bytes.Buffer{}).Commands() {
		if c.IsAvailableCommand() {
			names = append(names, c.Name())
		}
	}
	sort.Strings(names)
	return names
}

// cobra's scripts (bash v2, zsh, fish) hold no command list of their own:
// on Tab they run `trueset __complete WORDS…` and offer what it prints. So
// each script must name trueset and that request, and the request must
// offer every subcommand.
func TestCompletionScripts(t *testing.T) {
	subs := subcommandNames()
	for _, want := range []string{"generate", "augment", "verify", "completion", "man"} {
		if !contains(subs, want) {
			t.Fatalf("root has no %q command: %v", want, subs)
		}
	}
	for _, shell := range completionShells {
		for _, flags := range [][]string{nil, {"--no-descriptions"}} {
			stdout, _ := wantCode(t, exitOK, append([]string{"completion", shell}, flags...)...)
			if len(stdout) < 500 {
				t.Errorf("%s %v: script of %d bytes", shell, flags, len(stdout))
			}
			for _, want := range []string{"trueset", cobra.ShellCompRequestCmd} {
				if !strings.Contains(stdout, want) {
					t.Errorf("%s %v: script never mentions %q", shell, flags, want)
				}
			}
		}
	}
	stdout, _ := wantCode(t, exitOK, cobra.ShellCompRequestCmd, "")
	for _, sub := range subs {
		if !strings.Contains(stdout, "\n"+sub+"\t") && !strings.HasPrefix(stdout, sub+"\t") {
			t.Errorf("`trueset __complete ''` does not offer %q:\n%s", sub, stdout)
		}
	}
	stdout, _ = wantCode(t, exitOK, cobra.ShellCompRequestCmd, "completion", "")
	for _, shell := range completionShells {
		if !strings.Contains(stdout, shell) {
			t.Errorf("`trueset __complete completion ''` does not offer %q:\n%s", shell, stdout)
		}
	}
	wantCode(t, exitUsage, "completion")
	wantCode(t, exitUsage, "completion", "tcsh")
}

// TestCompletionInBash sources the bash script in a real bash with the
// trueset binary on PATH and presses Tab: after "trueset " every subcommand
// is offered, after "trueset completion " every shell. The script calls
// bash-completion's _get_comp_words_by_ref; where that package is not
// installed a minimal stand-in (the words as bash split them) is defined.
func TestCompletionInBash(t *testing.T) {
	bash, err := exec.LookPath("bash")
	if err != nil {
		t.Fatal("bash is needed to run the completion script")
	}
	bin := buildBinary(t)
	script := filepath.Join(t.TempDir(), "trueset.bash")
	stdout, _ := wantCode(t, exitOK, "completion", "bash")
	if err := os.WriteFile(script, []byte(stdout), 0o644); err != nil {
		t.Fatal(err)
	}
	press := func(words ...string) []string {
		t.Helper()
		prog := `
if ! declare -F _get_comp_words_by_ref >/dev/null; then
  _get_comp_words_by_ref() { cur=${COMP_WORDS[COMP_CWORD]}; prev=${COMP_WORDS[COMP_CWORD-1]}; words=("${COMP_WORDS[@]}"); cword=$COMP_CWORD; }
fi
compopt() { :; }
source "$1"; shift
COMP_WORDS=("$@"); COMP_CWORD=$(($# - 1)); COMP_LINE="$*"; COMP_POINT=${#COMP_LINE}
__start_trueset
printf '%s\n' "${COMPREPLY[@]}"`
		cmd := exec.Command(bash, append([]string{"-c", prog, "bash", script}, words...)...)
		cmd.Env = append(os.Environ(), "PATH="+filepath.Dir(bin)+string(os.PathListSeparator)+os.Getenv("PATH"))
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("bash completion of %q: %v\n%s", words, err, out)
		}
		return strings.Fields(string(out))
	}
	got := press("trueset", "")
	for _, sub := range subcommandNames() {
		if !contains(got, sub) {
			t.Errorf("Tab after `trueset ` offers %v, not %q", got, sub)
		}
	}
	if got := press("trueset", "completion", ""); !reflectEqual(got, completionShells) {
		t.Errorf("Tab after `trueset completion ` offers %v, want %v", got, completionShells)
	}
	if got := press("trueset", "gen"); !reflectEqual(got, []string{"generate"}) {
		t.Errorf("Tab after `trueset gen` offers %v, want [generate]", got)
	}
	if got := press("trueset", "verify", "--rege"); !reflectEqual(got, []string{"--regenerate"}) {
		t.Errorf("Tab after `trueset verify --rege` offers %v, want [--regenerate]", got)
	}
}

// TestCompletionZshFish has zsh and fish parse their scripts where they are
// installed (zsh -n, fish --no-execute), and asks fish what it offers after
// "trueset " and "trueset completion " (complete -C prints the candidates
// without a terminal). zsh's completion functions run only inside its line
// editor, so its script is only parsed.
func TestCompletionZshFish(t *testing.T) {
	var bin string
	for _, shell := range []string{"zsh", "fish"} {
		path, err := exec.LookPath(shell)
		if err != nil {
			t.Logf("%s is not installed: its script is not checked", shell)
			continue
		}
		stdout, _ := wantCode(t, exitOK, "completion", shell)
		script := filepath.Join(t.TempDir(), "trueset."+shell)
		if err := os.WriteFile(script, []byte(stdout), 0o644); err != nil {
			t.Fatal(err)
		}
		parse := map[string]string{"zsh": "-n", "fish": "--no-execute"}[shell]
		if out, err := exec.Command(path, parse, script).CombinedOutput(); err != nil {
			t.Errorf("%s %s: %v\n%s", shell, parse, err, out)
		}
		if shell != "fish" {
			continue
		}
		if bin == "" {
			bin = buildBinary(t)
		}
		offer := func(line string) []string {
			t.Helper()
			cmd := exec.Command(path, "--no-config", "-c", `source $argv[1]; complete -C $argv[2]`, script, line)
			cmd.Env = append(os.Environ(), "PATH="+filepath.Dir(bin)+string(os.PathListSeparator)+os.Getenv("PATH"))
			out, err := cmd.CombinedOutput()
			if err != nil {
				t.Fatalf("fish complete -C %q: %v\n%s", line, err, out)
			}
			var names []string
			for _, l := range strings.Split(strings.TrimSpace(string(out)), "\n") {
				names = append(names, strings.SplitN(l, "\t", 2)[0])
			}
			return names
		}
		got := offer("trueset ")
		for _, sub := range subcommandNames() {
			if !contains(got, sub) {
				t.Errorf("fish offers %v after `trueset `, not %q", got, sub)
			}
		}
		if got := offer("trueset completion "); !reflectEqual(got, []string{"bash", "fish", "zsh"}) {
			t.Errorf("fish offers %v after `trueset completion `, want bash fish zsh", got)
		}
	}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func reflectEqual(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}
