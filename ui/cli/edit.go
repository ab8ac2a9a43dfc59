package cli

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"
	"github.com/mattn/go-isatty"
	"github.com/muesli/termenv"

	"stackfit/engine"
	"stackfit/engine/stackfile"
	"stackfit/keymap"
	"stackfit/ui/editor"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// interactive reports whether standard input and output are a terminal.
func interactive() bool {
	return isatty.IsTerminal(os.Stdin.Fd()) && isatty.IsTerminal(os.Stdout.Fd())
}

// environment is what the editor needs from the process's environment,
// read once, before it starts: the editor itself never reads it.
type environment struct {
	paths store.Paths
	color termenv.Profile // the colours the terminal gets
}

// readEnvironment reads $STACKFIT_KEYS, $XDG_CONFIG_HOME, $XDG_STATE_HOME,
// the home and temporary folders, and the terminal's colour support
// (lipgloss's detection, which honours NO_COLOR; NO_COLOR also forces
// plain text here).
func readEnvironment() environment {
	home, err := os.UserHomeDir()
	if err != nil {
		home = ""
	}
	env := environment{paths: store.Locate(os.Getenv, home, os.TempDir()), color: lipgloss.ColorProfile()}
	if os.Getenv("NO_COLOR") != "" {
		env.color = termenv.Ascii
	}
	return env
}

// runEditor opens the editor on path, or with path "" on the built-in
// example stack file builtin (not saved until the user picks a file).
func runEditor(path string, builtin []byte, std IO) int {
	env := readEnvironment()
	km, err := keymap.LoadFile(env.paths.Keys, keymap.DefaultKeyMap())
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit: %v\n(using the default keys; fix or remove the file)\n", err)
	}
	opt := editor.Options{Path: path, Keys: km, Styles: styles.DefaultStyles(), KeysPath: env.paths.Keys, Files: store.Disk{}}
	switch {
	case path == "":
		s, err := stackfile.Load(builtin)
		if err != nil {
			fmt.Fprintf(std.Err, "stackfit: built-in example: %v\n", err)
			return ExitUsage
		}
		opt.Stack = s
	default:
		s, data, err := store.Disk{}.Load(path)
		switch {
		case err == nil:
			opt.Stack, opt.Base = s, data
		case errors.Is(err, fs.ErrNotExist):
			opt.NewFile = true
			name := strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))
			opt.Stack = &engine.Stack{Name: name, Input: engine.Shape{C: 3, H: 224, W: 224}}
		default:
			fmt.Fprintf(std.Err, "stackfit: %v\n", err)
			return ExitUsage
		}
	}
	opt.JournalFor = func(p string) editor.Journal { return store.JournalFor(p, env.paths.State) }
	current := opt.Stack
	if opt.NewFile {
		current = nil
	}
	if rec, err := store.JournalFor(path, env.paths.State).Check(current); err != nil {
		opt.Notice = err.Error()
	} else if rec != nil {
		opt.Recovered, opt.RecoveredAt = rec.Stack, rec.At
	}
	lipgloss.SetColorProfile(env.color)
	m := editor.New(opt)
	p := tea.NewProgram(m, tea.WithAltScreen(), tea.WithInput(std.In), tea.WithOutput(std.Out))
	if _, err := p.Run(); err != nil {
		fmt.Fprintf(std.Err, "stackfit: %v\n", err)
		return ExitUsage
	}
	return ExitOK
}
