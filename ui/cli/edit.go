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
	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
	"stackfit/keymap"
	"stackfit/ui/editor"
	"stackfit/ui/styles"
)

// interactive reports whether standard input and output are a terminal.
func interactive() bool {
	return isatty.IsTerminal(os.Stdin.Fd()) && isatty.IsTerminal(os.Stdout.Fd())
}

// runEditor opens the editor on path ("" for the built-in example).
func runEditor(path string, std IO) int {
	km, err := keymap.LoadFile(keymap.DefaultPath(), keymap.DefaultKeyMap())
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit: %v\n(using the default keys; fix or remove the file)\n", err)
	}
	opt := editor.Options{Path: path, Keys: km, Styles: styles.DefaultStyles()}
	switch {
	case path == "":
		s, err := stackfile.Load(examples.FruitGrader())
		if err != nil {
			fmt.Fprintf(std.Err, "stackfit: built-in example: %v\n", err)
			return ExitUsage
		}
		opt.Stack = s
	default:
		s, err := stackfile.LoadFile(path)
		switch {
		case err == nil:
			opt.Stack = s
		case errors.Is(err, fs.ErrNotExist):
			opt.NewFile = true
			name := strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))
			opt.Stack = &engine.Stack{Name: name, Input: engine.Shape{C: 3, H: 224, W: 224}}
		default:
			fmt.Fprintf(std.Err, "stackfit: %v\n", err)
			return ExitUsage
		}
	}
	opt.JournalFor = func(p string) editor.Journal { return stackfile.JournalFor(p, stackfile.StateDir()) }
	current := opt.Stack
	if opt.NewFile {
		current = nil
	}
	if rec, err := stackfile.JournalFor(path, stackfile.StateDir()).Check(current); err != nil {
		opt.Notice = err.Error()
	} else if rec != nil {
		opt.Recovered, opt.RecoveredAt = rec.Stack, rec.At
	}
	if os.Getenv("NO_COLOR") != "" {
		lipgloss.SetColorProfile(termenv.Ascii)
	}
	m := editor.New(opt)
	p := tea.NewProgram(m, tea.WithAltScreen(), tea.WithInput(std.In), tea.WithOutput(std.Out))
	if _, err := p.Run(); err != nil {
		fmt.Fprintf(std.Err, "stackfit: %v\n", err)
		return ExitUsage
	}
	return ExitOK
}
