package keymap

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/charmbracelet/bubbles/key"
)

// TestNoClashes asserts that no two enabled bindings of one mode share a key.
func TestNoClashes(t *testing.T) {
	km := DefaultKeyMap()
	if err := km.Check(); err != nil {
		t.Fatal(err)
	}
	// Every binding has keys and help text.
	for _, a := range km.Actions() {
		if len(a.Binding.Keys()) == 0 || a.Binding.Help().Key == "" || a.Binding.Help().Desc == "" {
			t.Errorf("%s lacks keys or help", a.Name)
		}
	}
}

func TestArrowsAndVimKeys(t *testing.T) {
	km := DefaultKeyMap()
	for _, pair := range [][2]any{{km.Up, "up"}, {km.Up, "k"}, {km.Down, "down"}, {km.Down, "j"}} {
		b := pair[0].(key.Binding)
		found := false
		for _, k := range b.Keys() {
			found = found || k == pair[1].(string)
		}
		if !found {
			t.Errorf("%v lacks %q", b.Keys(), pair[1])
		}
	}
}

// TestUndoRedoKeys: undo and redo answer the keys of the common editors
// (common practice: ctrl+z / ctrl+y in most, u / ctrl+r in vi), and no
// other action of the normal mode takes them.
func TestUndoRedoKeys(t *testing.T) {
	km := DefaultKeyMap()
	tests := []struct {
		action string
		b      key.Binding
		keys   []string
	}{
		{"undo", km.Undo, []string{"u", "ctrl+z"}},
		{"redo", km.Redo, []string{"U", "ctrl+y", "ctrl+r"}},
	}
	for _, tt := range tests {
		for _, k := range tt.keys {
			if !slices.Contains(tt.b.Keys(), k) {
				t.Errorf("%s lacks %q: %v", tt.action, k, tt.b.Keys())
			}
			for _, a := range km.Actions() {
				if a.Name != tt.action && hasMode(a.Modes, Normal) && slices.Contains(a.Binding.Keys(), k) {
					t.Errorf("%q is bound to %s as well as %s", k, a.Name, tt.action)
				}
			}
		}
	}
	if h := km.Redo.Help().Key; !strings.Contains(h, "ctrl+r") {
		t.Errorf("redo's help %q does not show ctrl+r", h)
	}
}

func TestHelpCoversEveryNormalAction(t *testing.T) {
	km := DefaultKeyMap()
	inHelp := map[*key.Binding]bool{}
	full := km.FullHelp()
	for i := range full {
		for j := range full[i] {
			for _, a := range km.Actions() {
				if a.Binding.Help() == full[i][j].Help() {
					inHelp[a.Binding] = true
				}
			}
		}
	}
	for _, a := range km.Actions() {
		if hasMode(a.Modes, Normal) && !inHelp[a.Binding] {
			t.Errorf("%s is missing from the help screen", a.Name)
		}
	}
}

func TestOverrides(t *testing.T) {
	km, err := Parse([]byte("add: i\ndelete: [d, delete]\nredo: []\n"), DefaultKeyMap())
	if err != nil {
		t.Fatal(err)
	}
	if got := km.Add.Keys(); len(got) != 1 || got[0] != "i" || km.Add.Help().Key != "i" {
		t.Errorf("add = %v", got)
	}
	if km.Redo.Enabled() {
		t.Error("redo still enabled")
	}
	tests := []struct{ src, want string }{
		{"ad: i\n", `unknown action "ad"; did you mean "add"? (actions: up, down,`},
		{"zzzz: i\n", `unknown action "zzzz"; actions: up, down,`},
		{"add: j\n", `key "j" is bound to both "down" and "add" in normal mode`},
		{"add: {x: 1}\n", "add: give a key or a list of keys"},
		{"- a\n", "not a YAML mapping"},
		{"add: ''\n", "add: empty key"},
	}
	for _, tt := range tests {
		_, err := Parse([]byte(tt.src), DefaultKeyMap())
		if err == nil || !errors.Is(err, ErrKeys) || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%q: %v, want %q", tt.src, err, tt.want)
		}
	}
}

func TestLoadFile(t *testing.T) {
	dir := t.TempDir()
	if _, err := LoadFile(filepath.Join(dir, "none.yaml"), DefaultKeyMap()); err != nil {
		t.Errorf("missing file: %v", err)
	}
	p := filepath.Join(dir, "keys.yaml")
	os.WriteFile(p, []byte("quit: Q\n"), 0o644)
	km, err := LoadFile(p, DefaultKeyMap())
	if err != nil || km.Quit.Keys()[0] != "Q" {
		t.Errorf("%v %v", km.Quit.Keys(), err)
	}
	os.WriteFile(p, []byte("qiut: Q\n"), 0o644)
	if _, err := LoadFile(p, DefaultKeyMap()); err == nil || !strings.HasPrefix(err.Error(), p+": ") {
		t.Errorf("error does not name the file: %v", err)
	}
}
