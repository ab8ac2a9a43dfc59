package cli

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/muesli/termenv"

	"stackfit/engine/examples"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// TestDumbTerminal: a terminal whose TERM is dumb cannot move the cursor,
// so the full-screen editor would print its escape codes as text. It
// counts as no terminal: stackfit FILE refuses with exit 2 and names both
// fixes; stackfit and stackfit example NAME print what they print without
// a terminal and say why. Nothing reaches standard output as an escape
// code.
func TestDumbTerminal(t *testing.T) {
	file := filepath.Join(t.TempDir(), "grader.yaml")
	os.WriteFile(file, examples.FruitGrader(), 0o644)
	refusal := "stackfit: TERM=dumb: this terminal cannot move the cursor, so the full-screen editor cannot run; " +
		"use a terminal that supports cursor control (e.g. TERM=xterm-256color), or stackfit report " + file +
		" or stackfit check " + file + " for plain output\n"
	instead := "so %s comes instead of the editor; for the editor use a terminal that supports cursor control (e.g. TERM=xterm-256color)"
	tests := []struct {
		name     string
		args     []string
		terminal bool
		term     string
		code     int
		out      string // in standard output
		err      string // in standard error
	}{
		{"a file", []string{file}, true, "dumb", ExitUsage, "", refusal},
		{"a file, any case", []string{file}, true, "DUMB", ExitUsage, "", refusal},
		{"a new file", []string{filepath.Join(filepath.Dir(file), "new.yaml")}, true, "dumb", ExitUsage, "", "stackfit: TERM=dumb: this terminal cannot move the cursor"},
		{"the example", nil, true, "dumb", ExitOK, "training memory per GPU — estimate", strings.Replace(instead, "%s", "the example's report", 1)},
		{"an example by name", []string{"example", "fruit-grader"}, true, "dumb", ExitOK, "stackfit: 1\n", strings.Replace(instead, "%s", "the example's stack file", 1)},
		{"no terminal", []string{file}, false, "xterm-256color", ExitUsage, "", "stackfit: the editor needs a terminal; for a printout use: stackfit report " + file},
		{"no terminal, no note", nil, false, "dumb", ExitOK, "training memory per GPU — estimate", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var out, errb bytes.Buffer
			code := Run(tt.args, IO{In: strings.NewReader(""), Out: &out, Err: &errb, Terminal: tt.terminal, Term: tt.term})
			if code != tt.code || !strings.Contains(out.String(), tt.out) || !strings.Contains(errb.String(), tt.err) {
				t.Errorf("exit %d, stdout %.200q, stderr %q; want exit %d, %q, %q", code, out.String(), errb.String(), tt.code, tt.out, tt.err)
			}
			if tt.out == "" && out.Len() > 0 || strings.Contains(out.String(), "\x1b") {
				t.Errorf("standard output got %.200q", out.String())
			}
			if tt.err == "" && errb.Len() > 0 {
				t.Errorf("standard error got %q", errb.String())
			}
		})
	}
}

// TestKeysFileNotice: a keys file that cannot be used reaches the editor
// as its start-up notice (shown on the status line, where the full screen
// does not hide it) and standard error: the file, the problem and that the
// default keys apply; the editor gets the default keys. A good keys file,
// or none, gives no notice.
func TestKeysFileNotice(t *testing.T) {
	dir := t.TempDir()
	write := func(name, src string) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, []byte(src), 0o644)
		return p
	}
	tests := []struct {
		name    string
		keys    string
		problem string // "" for no notice
		add     string // the key of the add action the editor gets
	}{
		{"unknown action", write("typo.yaml", "ad: i\n"), `bad keys file: unknown action "ad"; did you mean "add"?`, "a"},
		{"clash", write("clash.yaml", "add: j\n"), `key "j" is bound to both "down" and "add" in normal mode`, "a"},
		{"not YAML", write("junk.yaml", "- [\n"), "not a YAML mapping of action: keys", "a"},
		{"a folder", dir, "is a folder, not a keys file", "a"},
		{"no way out", write("noquit.yaml", "add: i\nquit: []\n"), "quit: [] would leave no key to leave the editor; give quit a key", "a"},
		{"no save", write("nosave.yaml", "save: []\n"), "save: [] would leave no key to save your work", "a"},
		{"ctrl+c taken", write("ctrlc.yaml", "add: ctrl+c\n"), "add: ctrl+c always quits", "a"},
		{"a good file", write("good.yaml", "add: i\n"), "", "i"},
		{"no file", filepath.Join(dir, "none.yaml"), "", "a"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var errb bytes.Buffer
			env := environment{paths: store.Paths{Keys: tt.keys, State: t.TempDir()}}
			opt, release, code := editorOptions("", examples.FruitGrader(), env, IO{Err: &errb})
			release()
			if code != ExitOK || opt.Stack == nil {
				t.Fatalf("exit %d: %s", code, errb.String())
			}
			if got := opt.Keys.Add.Keys(); len(got) != 1 || got[0] != tt.add {
				t.Errorf("add is bound to %v, want %s", got, tt.add)
			}
			if opt.KeysPath != tt.keys {
				t.Errorf("keys path %q, want %q", opt.KeysPath, tt.keys)
			}
			if tt.problem == "" {
				if opt.Notice != "" || errb.Len() > 0 {
					t.Errorf("notice %q, stderr %q; want none", opt.Notice, errb.String())
				}
				return
			}
			for _, want := range []string{"the default keys apply", tt.keys, tt.problem, "fix or remove the keys file"} {
				if !strings.Contains(opt.Notice, want) || !strings.Contains(errb.String(), want) {
					t.Errorf("notice %q / stderr %q lacks %q", opt.Notice, errb.String(), want)
				}
			}
			if !strings.HasPrefix(opt.Notice, "the default keys apply") {
				t.Errorf("notice %q does not open with what applies", opt.Notice)
			}
		})
	}
	if got := joinNotices("a", "", "b"); got != "a; b" {
		t.Errorf("joinNotices = %q", got)
	}
}

// TestNoColourStyles: with NO_COLOR (the ascii profile) the editor gets the
// no-colour styles, which mark a selected field value; with colours, the
// default ones, where reverse video shows it.
func TestNoColourStyles(t *testing.T) {
	tests := []struct {
		profile termenv.Profile
		marks   [2]string
	}{
		{termenv.Ascii, styles.NoColorStyles().SelectMarks},
		{termenv.ANSI, [2]string{}},
		{termenv.TrueColor, [2]string{}},
	}
	for _, tt := range tests {
		var errb bytes.Buffer
		env := environment{paths: store.Paths{State: t.TempDir()}, color: tt.profile}
		opt, release, code := editorOptions("", examples.FruitGrader(), env, IO{Err: &errb})
		release()
		if code != ExitOK || opt.Styles.SelectMarks != tt.marks {
			t.Errorf("profile %v: exit %d, marks %q; want %q", tt.profile, code, opt.Styles.SelectMarks, tt.marks)
		}
	}
	if m := styles.NoColorStyles().SelectMarks; m[0] == "" || m[1] == "" {
		t.Errorf("the no-colour styles do not mark a selected value: %q", m)
	}
}
