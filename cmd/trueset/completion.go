package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"
)

// completionOptions are the flags of `trueset completion`.
type completionOptions struct {
	noDesc bool
}

// completionShells are the shells `trueset completion` writes scripts for.
var completionShells = []string{"bash", "zsh", "fish"}

func newCompletionCmd(stdout io.Writer) *cobra.Command {
	o := &completionOptions{}
	cmd := &cobra.Command{
		Use:   "completion bash|zsh|fish",
		Short: "Print a shell completion script for bash, zsh or fish",
		Long: `Print a script that makes your shell complete trueset's commands, flags and
arguments when you press Tab. The script asks trueset itself what to offer,
so it stays right when trueset is upgraded.

bash needs the bash-completion package (apt-get install bash-completion, or
brew install bash-completion@2). zsh needs compinit to be enabled (most
set-ups do; else add "autoload -U compinit; compinit" to ~/.zshrc). fish needs
nothing more.`,
		Example: `  # bash, for this session
  source <(trueset completion bash)
  # bash, for every session (Linux; on macOS with Homebrew: $(brew --prefix)/etc/bash_completion.d/trueset)
  mkdir -p ~/.local/share/bash-completion/completions
  trueset completion bash > ~/.local/share/bash-completion/completions/trueset

  # zsh: into a folder on $fpath, then start a new shell
  mkdir -p ~/.zfunc && trueset completion zsh > ~/.zfunc/_trueset
  echo 'fpath=(~/.zfunc $fpath); autoload -U compinit; compinit' >> ~/.zshrc

  # fish
  mkdir -p ~/.config/fish/completions && trueset completion fish > ~/.config/fish/completions/trueset.fish`,
		ValidArgs: completionShells,
		Args: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return usagef("completion takes one shell: %s", strings.Join(completionShells, ", "))
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			return runCompletion(cmd.Root(), args[0], o, stdout)
		},
	}
	cmd.Flags().BoolVar(&o.noDesc, "no-descriptions", false, "offer names only, without a short description of each")
	return cmd
}

func runCompletion(root *cobra.Command, shell string, o *completionOptions, stdout io.Writer) error {
	desc := !o.noDesc
	switch shell {
	case "bash":
		return root.GenBashCompletionV2(stdout, desc)
	case "zsh":
		if desc {
			return root.GenZshCompletion(stdout)
		}
		return root.GenZshCompletionNoDesc(stdout)
	case "fish":
		return root.GenFishCompletion(stdout, desc)
	}
	return usageError{fmt.Errorf("completion: unknown shell %q; want one of %s", shell, strings.Join(completionShells, ", "))}
}
