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
	"stackfit/engine/textsafe"
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
	opt, release, code := editorOptions(path, builtin, env, std)
	defer release()
	if code != ExitOK {
		return code
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

// editorOptions gathers what the editor starts with: the keys (the keys
// file's, or the defaults when it cannot be used — said on standard error
// and in the notice the editor shows at start, where the full screen does
// not hide it), the stack, the journals and what earlier sessions left.
// release lets go of the journals held; a status other than ExitOK means
// the editor must not start.
func editorOptions(path string, builtin []byte, env environment, std IO) (editor.Options, func(), int) {
	var held []*store.Journal
	release := func() {
		for _, j := range held {
			j.Release()
		}
	}
	km, err := keymap.LoadFile(env.paths.Keys, keymap.DefaultKeyMap())
	var keysNote string
	if err != nil {
		keysNote = keysNotice(err)
		fmt.Fprintf(std.Err, "stackfit: %s\n", textsafe.Text(keysNote))
	}
	opt := editor.Options{Path: path, Keys: km, Styles: stylesFor(env.color), KeysPath: env.paths.Keys, Files: store.Disk{}}
	var importNote string
	switch {
	case strings.EqualFold(filepath.Ext(path), ".onnx"):
		// An ONNX model opens as a new, unsaved stack named after it.
		s, note, err := importModel(path, true)
		if err != nil {
			fmt.Fprintf(std.Err, "stackfit: %s\n", textsafe.Text(err.Error()))
			return opt, release, ExitUsage
		}
		opt.Stack, opt.Path, importNote = s, "", note
		opt.SaveName = strings.TrimSuffix(path, filepath.Ext(path)) + ".yaml"
		path = ""
	case path == "":
		s, err := stackfile.Load(builtin)
		if err != nil {
			fmt.Fprintf(std.Err, "stackfit: built-in example: %v\n", err)
			return opt, release, ExitUsage
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
			return opt, release, ExitUsage
		}
	}
	opt.JournalFor = func(p string) editor.Journal {
		j := store.JournalFor(p, env.paths.State)
		j.Hold() // best effort: without it other sessions cannot see this one
		held = append(held, j)
		return j
	}
	opt.FoldsFor = func(p string) editor.FoldState { return store.FoldsFor(p, env.paths.State) }
	var notice string
	opt.Recovery, notice = recovery(path, env.paths.State, opt.Base, opt.Stack, opt.NewFile)
	opt.Notice = joinNotices(keysNote, importNote, notice)
	return opt, release, ExitOK
}

// stylesFor picks the editor's look for the terminal's colours: without
// any (NO_COLOR, or none supported) no attribute shows either, and the
// no-colour styles mark what only a style would.
func stylesFor(p termenv.Profile) styles.Styles {
	if p == termenv.Ascii {
		return styles.NoColorStyles()
	}
	return styles.DefaultStyles()
}

// keysNotice says that the keys file could not be used and the default
// keys apply instead. err comes from keymap.LoadFile, which names the file
// and the problem; what matters most comes first, since the editor's
// status line cuts a long message at the window's edge.
func keysNotice(err error) string {
	return "the default keys apply, not the keys file's: " + err.Error() + " — fix or remove the keys file"
}

// joinNotices joins the notices that are not empty, "; " between them.
func joinNotices(notes ...string) string {
	var out []string
	for _, n := range notes {
		if n != "" {
			out = append(out, n)
		}
	}
	return strings.Join(out, "; ")
}

// dumbTerminal reports whether term, the value of $TERM, names a terminal
// that cannot move the cursor ("dumb": Emacs shells, some CI consoles),
// where the full-screen editor would print its escape codes as text.
func dumbTerminal(term string) bool {
	return strings.EqualFold(strings.TrimSpace(term), "dumb")
}

// dumbRefusal is what stackfit says when TERM=dumb keeps the editor from
// starting on file.
func dumbRefusal(file string) string {
	f := textsafe.Line(file)
	return "TERM=dumb: this terminal cannot move the cursor, so the full-screen editor cannot run; " +
		"use a terminal that supports cursor control (e.g. TERM=xterm-256color), or stackfit report " + f +
		" or stackfit check " + f + " for plain output"
}

// recovery looks for what earlier sessions left of path: a live session is
// another editor on the file (said, never offered); of the others the
// newest is offered — as the file's unsaved edits when it is whole, of
// this file and made on the content now on disk, otherwise under a new
// name. A journal equal to the file is removed quietly.
func recovery(path, stateDir string, base []byte, current *engine.Stack, newFile bool) (*editor.Recovery, string) {
	var notes []string
	var offer *store.Found
	others := 0
	for _, f := range store.FindJournals(path, stateDir, base) {
		switch {
		case f.Live:
			notes = append(notes, fmt.Sprintf("another stackfit (process %d) is editing this file; a save here asks before overwriting its saves", f.PID))
		case f.Err != nil:
			notes = append(notes, f.Err.Error())
		case f.Trusted() && !newFile && sameStack(f.Stack, current):
			os.Remove(f.Path) // nothing unsaved after all
		case offer == nil:
			offer = &f
		default:
			others++
		}
	}
	if others > 0 {
		notes = append(notes, fmt.Sprintf("%d older recovery file(s) of this file are left beside it", others))
	}
	notice := strings.Join(notes, "; ")
	if offer == nil {
		return nil, notice
	}
	r := &editor.Recovery{Stack: offer.Stack, About: offer.Describe(), Discard: func() error {
		if err := os.Remove(offer.Path); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return err
		}
		os.Remove(offer.Path + ".lock") // its session has ended
		return nil
	}}
	if !offer.Trusted() {
		r.AsNew = recoveredName(path)
	}
	return r, notice
}

// sameStack reports whether two stacks save to the same file.
func sameStack(a, b *engine.Stack) bool {
	if a == nil || b == nil {
		return false
	}
	x, err1 := stackfile.Save(a)
	y, err2 := stackfile.Save(b)
	return err1 == nil && err2 == nil && string(x) == string(y)
}

// recoveredName is a name beside path that does not exist yet:
// NAME.recovered.yaml, then NAME.recovered-2.yaml, ...
func recoveredName(path string) string {
	if path == "" {
		path = "untitled.yaml"
	}
	ext := filepath.Ext(path)
	stem := strings.TrimSuffix(path, ext)
	if ext == "" {
		ext = ".yaml"
	}
	for i := 1; ; i++ {
		p := stem + ".recovered" + ext
		if i > 1 {
			p = fmt.Sprintf("%s.recovered-%d%s", stem, i, ext)
		}
		if _, err := os.Lstat(p); errors.Is(err, fs.ErrNotExist) || i > 999 {
			return p
		}
	}
}
