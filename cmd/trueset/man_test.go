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

// TestManPages writes the pages and checks there is one per command of the
// tree newRoot builds (and nothing else), each a roff page (.TH title line,
// NAME and SYNOPSIS sections, man(7)) carrying the command's Short text and
// its examples. Where man(1) is installed, it renders one.
func TestManPages(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "man1")
	stdout, _ := wantCode(t, exitOK, "man", "--out", dir)

	var want []string
	cmds := map[string]*cobra.Command{}
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		name := strings.ReplaceAll(c.CommandPath(), " ", "-") + ".1"
		want = append(want, name)
		cmds[name] = c
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(newRoot(&bytes.Buffer{}, &bytes.Buffer{}))
	sort.Strings(want)
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range ents {
		got = append(got, e.Name())
	}
	if !reflectEqual(got, want) {
		t.Fatalf("man pages %v, want one per command: %v", got, want)
	}
	for _, name := range []string{"trueset.1", "trueset-generate.1", "trueset-presets-show.1", "trueset-completion.1", "trueset-man.1"} {
		if !contains(got, name) {
			t.Errorf("no %s", name)
		}
	}
	if !strings.Contains(stdout, "wrote "+itoa(len(want))+" man pages") {
		t.Errorf("stdout %q", stdout)
	}
	// roff escapes '-' as '\-'; compare with that undone.
	unroff := strings.NewReplacer(`\-`, "-", `\&`, "", `\\`, `\`)
	for _, name := range want {
		b, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		page := unroff.Replace(string(b))
		c := cmds[name]
		for _, w := range []string{".TH ", ".SH NAME", ".SH SYNOPSIS", ".SH EXAMPLE", "trueset " + version, strings.Fields(c.Short)[0]} {
			if !strings.Contains(page, w) {
				t.Errorf("%s lacks %q", name, w)
			}
		}
		if strings.Contains(page, "Auto generated") {
			t.Errorf("%s carries cobra's auto-generated history section", name)
		}
	}

	manBin, err := exec.LookPath("man")
	if err != nil {
		t.Log("man is not installed: the pages are not rendered")
		return
	}
	cmd := exec.Command(manBin, "-P", "cat", "-l", filepath.Join(dir, "trueset-generate.1"))
	cmd.Env = append(os.Environ(), "MANWIDTH=100", "LC_ALL=C", "MAN_KEEP_FORMATTING=")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("man -l trueset-generate.1: %v\n%s", err, out)
	}
	text := string(out)
	for _, w := range []string{"NAME", "SYNOPSIS", "trueset generate", "--preset", "EXAMPLE", "--require-coverage"} {
		if !strings.Contains(text, w) {
			t.Errorf("man -l output lacks %q:\n%s", w, text)
		}
	}
	if strings.Contains(text, "warning") {
		t.Errorf("man -l warned:\n%s", text)
	}
}

func TestManUsage(t *testing.T) {
	wantCode(t, exitUsage, "man")
	wantCode(t, exitUsage, "man", "--out", t.TempDir(), "extra")
}
