package editor

import (
	"errors"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/keymap"
	"stackfit/ui/styles"
)

// memFiles is file access held in memory: what the editor saved and can
// open.
type memFiles map[string]*engine.Stack

func (f memFiles) Load(path string) (*engine.Stack, error) {
	if s, ok := f[path]; ok {
		return s.Clone(), nil
	}
	return nil, errors.New("open stack file: " + path + ": no such file")
}

func (f memFiles) Save(path string, s *engine.Stack) error { f[path] = s.Clone(); return nil }

// TestFilesOption checks that open and save go through Options.Files, and
// that without it they say so instead of touching the disk.
func TestFilesOption(t *testing.T) {
	files := memFiles{}
	m := New(Options{Stack: example(t), Path: "a.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Files: files})
	m.Update(tea.WindowSizeMsg{Width: 80, Height: 24})
	press(m, ">", "w")
	if m.dirty || files["a.yaml"] == nil || !sameStack(files["a.yaml"], m.stack) {
		t.Fatalf("save did not reach Files: %s", m.status)
	}
	press(m, "o")
	typeText(m, "a.yaml")
	press(m, "enter")
	if m.mode != modeNormal || m.path != "a.yaml" {
		t.Errorf("open did not read from Files: %s", m.status)
	}

	bare := New(Options{Stack: example(t), Path: "b.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles()})
	bare.Update(tea.WindowSizeMsg{Width: 80, Height: 24})
	press(bare, ">", "w")
	if !bare.dirty || bare.statusK != statusError || !strings.Contains(bare.status, "without file access") {
		t.Errorf("save without Files: dirty %v, %q", bare.dirty, bare.status)
	}
	press(bare, "o")
	typeText(bare, "a.yaml")
	press(bare, "enter")
	if bare.mode != modePrompt || !bare.prompt.bad || !strings.Contains(bare.prompt.hint, "without file access") {
		t.Errorf("open without Files was not refused")
	}
}

// TestHelpNamesKeysPath checks that the help screen names the keys file it
// was given, whatever the environment says, and $STACKFIT_KEYS when it was
// given none.
func TestHelpNamesKeysPath(t *testing.T) {
	t.Setenv("HOME", "/nowhere")
	t.Setenv("XDG_CONFIG_HOME", "/elsewhere")
	t.Setenv(keymap.EnvPath, "/other/keys.yaml")
	for _, tt := range []struct{ path, want string }{
		{"/k.yaml", "override keys in /k.yaml)"},
		{"", "override keys in $" + keymap.EnvPath + ")"},
	} {
		m := New(Options{Stack: example(t), Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), KeysPath: tt.path})
		m.Update(tea.WindowSizeMsg{Width: 100, Height: 40})
		press(m, "?")
		if v := view(m); !strings.Contains(v, tt.want) {
			t.Errorf("KeysPath %q: help lacks %q:\n%s", tt.path, tt.want, v)
		}
	}
}
