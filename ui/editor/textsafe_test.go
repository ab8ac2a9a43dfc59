package editor

import (
	"regexp"
	"strings"
	"testing"
	"unicode/utf8"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"
	"github.com/muesli/termenv"

	"stackfit/engine"
	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// Text a terminal would act on (ECMA-48 and xterm's control sequences, from
// memory): xterm's window-title command OSC 0 ; text BEL, erase display
// CSI 2 J, a bell, backspaces, a carriage return, the 8-bit CSI byte and
// its UTF-8 form U+009B, and bytes that are not UTF-8.
const (
	evilTitle = "net\x1b]0;pwned\x07\x1b[2J"
	evilLayer = "stem\x1b[31m\b\b\rX\x9b2J\u009b1m\xff"
	evilFrom  = "gone\x1b]0;pwned\x07"
	evilPath  = "/tmp/a\x1b[2J\x07.yaml"
)

// evilModel is an editor on a stack whose every name is hostile: the stack,
// a layer, a merge reading it, a merge reading an unknown name (an error
// diagnostic quoting it), and the file name, the keys file and the start
// notice too.
func evilModel(t *testing.T, w, h int) *Model {
	t.Helper()
	s := &engine.Stack{
		Name:  evilTitle,
		Note:  "note\x1b]0;pwned\x07",
		Input: engine.Shape{C: 3, H: 16, W: 16},
		Layers: []engine.Layer{
			{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Name: evilLayer},
			{Kind: engine.KindConcat, From: evilLayer, Name: "cat\x1b[2J"},
			{Kind: engine.KindAdd, From: evilFrom},
			{Kind: engine.KindBlock, Repeat: 2, Name: "blk\x07\x1b]0;x\x07", Body: []engine.Layer{{Kind: engine.KindAct}}},
		},
	}
	m := New(Options{Stack: s, Path: evilPath, Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(),
		KeysPath: "/k\x1b]0;pwned\x07.yaml", Files: store.Disk{}, Notice: "could not read " + evilPath + ": \x1b[2Jbad\r\n"})
	m.Update(tea.WindowSizeMsg{Width: w, Height: h})
	return m
}

// evilScreens renders the editor in each place user text reaches: the
// list and detail panel on each layer, the form, the help screen, the
// quick-entry prompt with its hint, a question, and the status line.
func evilScreens(t *testing.T) map[string]string {
	t.Helper()
	out := map[string]string{}
	m := evilModel(t, 200, 30)
	out["start"] = m.View()
	for i, name := range []string{"concat", "add", "block"} {
		press(m, "j")
		out[name] = m.View()
		if i == 0 {
			press(m, "enter")
			out["form"] = m.View()
			press(m, "esc")
		}
	}
	press(m, "?")
	out["help"] = m.View()
	press(m, "esc")
	press(m, ":")
	typeText(m, "concat \x1b[2J"+evilFrom)
	out["prompt"] = m.View()
	press(m, "esc")
	m.setStatus("saved "+evilPath, statusInfo)
	out["status"] = m.View()
	m.ask("overwrite "+evilPath+"?", func() tea.Cmd { return nil }, func() tea.Cmd { return nil })
	out["question"] = m.View()
	return out
}

// TestViewShowsHostileTextSafely renders every screen with the ascii
// colour profile (TestMain's, as the golden tests do), where the editor
// adds no styling: no ESC or other control character may reach the
// terminal, the output stays UTF-8, and the names show as visible escapes.
func TestViewShowsHostileTextSafely(t *testing.T) {
	screens := evilScreens(t)
	for name, v := range screens {
		if !utf8.ValidString(v) {
			t.Errorf("%s: not valid UTF-8", name)
		}
		for i, line := range strings.Split(v, "\n") {
			if !textsafe.Safe(line) {
				t.Errorf("%s: line %d holds a control character: %q", name, i+1, line)
			}
		}
	}
	for screen, want := range map[string][]string{
		"start": {
			`net\x1b]0;pwned\a\x1b[2J`,                // the header's stack name
			`/tmp/a\x1b[2J\a.yaml`,                    // the header's file name
			`[stem\x1b[31m\b\b\rX\x9b2J\u009b1m\xff]`, // the list
			`concat stem\x1b[31m`, `[cat\x1b[2J]`, `add gone\x1b]0;pwned\a`, `[blk\a\x1b]0;x\a]`,
			`could not read /tmp/a\x1b[2J\a.yaml: \x1b[2Jbad\r\n`, // the status line
		},
		"concat":   {`from "stem\x1b[31m\b\b\rX\x9b2J\u009b1m\xff"`}, // the detail panel's arithmetic
		"add":      {`gone\x1b]0;pwned\a`},                           // the diagnostic in the detail panel
		"form":     {`edit concat stem\x1b[31m`},
		"help":     {`/k\x1b]0;pwned\a.yaml`},
		"status":   {`saved /tmp/a\x1b[2J\a.yaml`},
		"question": {`overwrite /tmp/a\x1b[2J\a.yaml?`},
	} {
		for _, w := range want {
			if !strings.Contains(screens[screen], w) {
				t.Errorf("%s: no %q in\n%s", screen, w, screens[screen])
			}
		}
	}
}

// sgr is a Select Graphic Rendition sequence (ECMA-48 CSI … m), the only
// escape sequence lipgloss writes for the editor's styles.
var sgr = regexp.MustCompile("\x1b\\[[0-9;:]*m")

// TestViewStylingIsTheOnlyEscape renders the same screens in true colour:
// every ESC left is the start of one of the editor's own SGR sequences.
func TestViewStylingIsTheOnlyEscape(t *testing.T) {
	lipgloss.SetColorProfile(termenv.TrueColor)
	t.Cleanup(func() { lipgloss.SetColorProfile(termenv.Ascii) })
	styled := 0
	for name, v := range evilScreens(t) {
		styled += len(sgr.FindAllString(v, -1))
		plain := sgr.ReplaceAllString(v, "")
		for i, line := range strings.Split(plain, "\n") {
			if !textsafe.Safe(line) {
				t.Errorf("%s: line %d holds a control character besides the styling: %q", name, i+1, line)
			}
		}
	}
	if styled == 0 {
		t.Error("no styling at all: the true-colour profile did not take effect")
	}
}
