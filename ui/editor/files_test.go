package editor

import (
	"errors"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// memFiles is file access held in memory: what the editor saved and can
// open.
type memFiles map[string]*engine.Stack

// Names completes from the names held, in order.
func (f memFiles) Names(prefix string) []string {
	var out []string
	for n := range f {
		if strings.HasPrefix(n, prefix) {
			out = append(out, n)
		}
	}
	sort.Strings(out)
	return out
}

func (f memFiles) Load(path string) (*engine.Stack, []byte, error) {
	if s, ok := f[path]; ok {
		return s.Clone(), nil, nil
	}
	return nil, nil, errors.New("open stack file: " + path + ": no such file")
}

func (f memFiles) Save(path string, s *engine.Stack, _ []byte, _ store.SaveMode) ([]byte, string, error) {
	f[path] = s.Clone()
	return nil, "", nil
}

// TestFilesOption checks that open and save go through Options.Files, and
// that without it they say so instead of touching the disk.
func TestFilesOption(t *testing.T) {
	files := memFiles{}
	m := New(Options{Stack: example(t), Path: "a.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Files: files})
	m.Update(tea.WindowSizeMsg{Width: 80, Height: 24})
	press(m, ">", "w")
	if m.file.dirty || files["a.yaml"] == nil || !sameStack(files["a.yaml"], m.stack) {
		t.Fatalf("save did not reach Files: %s", m.status)
	}
	press(m, "o")
	typeText(m, "a.yaml")
	press(m, "enter")
	if m.Mode() != modeNormal || m.file.path != "a.yaml" {
		t.Errorf("open did not read from Files: %s", m.status)
	}

	bare := New(Options{Stack: example(t), Path: "b.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles()})
	bare.Update(tea.WindowSizeMsg{Width: 80, Height: 24})
	press(bare, ">", "w")
	if !bare.file.dirty || bare.statusK != statusError || !strings.Contains(bare.status, "without file access") {
		t.Errorf("save without Files: dirty %v, %q", bare.file.dirty, bare.status)
	}
	press(bare, "o")
	typeText(bare, "a.yaml")
	press(bare, "enter")
	if bare.Mode() != modePrompt || !promptBad(bare) || !strings.Contains(promptHint(bare), "without file access") {
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
		{"/k.yaml", "put overrides in /k.yaml,"},
		{"", "put overrides in $" + keymap.EnvPath + ","},
	} {
		m := New(Options{Stack: example(t), Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), KeysPath: tt.path})
		m.Update(tea.WindowSizeMsg{Width: 100, Height: 40})
		press(m, "?")
		if v := view(m); !strings.Contains(v, tt.want) {
			t.Errorf("KeysPath %q: help lacks %q:\n%s", tt.path, tt.want, v)
		}
	}
}

// TestTwoEditorsOneFile: editor A saves; editor B, opened on the same file
// before that, must not silently drop A's edit — its save asks, and "n"
// offers another name. An outside append is caught the same way; "y"
// then overwrites knowingly. A save with no edit leaves the file's bytes
// and comments alone.
func TestTwoEditorsOneFile(t *testing.T) {
	p := filepath.Join(t.TempDir(), "net.yaml")
	orig := "# sorting-line grader\nstackfit: 1\ninput: [3, 32, 32]\nlayers:\n  - {conv: 8, kernel: 3}   # stem\n  - {act: relu}\n"
	if err := os.WriteFile(p, []byte(orig), 0o644); err != nil {
		t.Fatal(err)
	}
	open := func() *Model {
		s, data, err := store.Disk{}.Load(p)
		if err != nil {
			t.Fatal(err)
		}
		m := New(Options{Stack: s, Base: data, Path: p, Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Files: store.Disk{}})
		m.Update(tea.WindowSizeMsg{Width: 100, Height: 30})
		return m
	}
	a, b := open(), open()
	press(a, "w")
	if data, _ := os.ReadFile(p); string(data) != orig {
		t.Fatalf("a save with no edit changed the file:\n%s", data)
	}
	press(a, ">", "w") // widen the stem and save
	afterA, _ := os.ReadFile(p)
	if !strings.Contains(string(afterA), "# stem") || !strings.Contains(string(afterA), "# sorting-line grader") {
		t.Errorf("A's save lost the comments:\n%s", afterA)
	}
	press(b, "j", ">", "w")
	if b.Mode() != modeConfirm || !strings.Contains(questionOf(b).Question, "changed on disk") {
		t.Fatalf("B saved over A's edit without asking: %q", b.status)
	}
	if data, _ := os.ReadFile(p); string(data) != string(afterA) {
		t.Fatalf("B's save reached the file before the answer")
	}
	press(b, "n")
	if b.Mode() != modePrompt || !strings.HasSuffix(promptOf(b).Value(), "net.yaml.mine") {
		t.Fatalf("n did not offer another name: mode %v", b.Mode())
	}
	press(b, "enter")
	if _, err := os.Stat(p + ".mine"); err != nil || b.file.dirty {
		t.Fatalf("save as: %v, dirty %v, %q", err, b.file.dirty, b.status)
	}
	// An outside append to A's file, then A saves again.
	f, _ := os.OpenFile(p, os.O_APPEND|os.O_WRONLY, 0)
	f.WriteString("# appended outside\n")
	f.Close()
	press(a, ">", "w")
	if a.Mode() != modeConfirm {
		t.Fatalf("A saved over the outside change without asking: %q", a.status)
	}
	press(a, "y")
	if data, _ := os.ReadFile(p); a.file.dirty || !strings.Contains(string(data), "# stem") {
		t.Errorf("overwrite: dirty %v:\n%s", a.file.dirty, data)
	}
	// Another outside change; this time A reloads, and undo brings its
	// own edit back.
	os.WriteFile(p, []byte(orig), 0o644)
	press(a, ">", "w", "r")
	if a.Mode() != modeNormal || a.stack.Layers[0].Filters != 8 || a.file.dirty {
		t.Fatalf("reload: filters %d, dirty %v, %q", a.stack.Layers[0].Filters, a.file.dirty, a.status)
	}
	press(a, "u")
	if a.stack.Layers[0].Filters == 8 {
		t.Error("undo after a reload did not bring the edit back")
	}
}

// TestSaveNameOffered: a stack with no file yet (an imported model) offers
// the name it was opened under as a stack file, on save and on save-as;
// without one, net.yaml.
func TestSaveNameOffered(t *testing.T) {
	for _, tt := range []struct{ saveName, want string }{{"models/cap-inspector.yaml", "models/cap-inspector.yaml"}, {"", "net.yaml"}} {
		for _, keys := range [][]string{{"w"}, {"W"}} {
			m := New(Options{Stack: &engine.Stack{Name: "cap-inspector", Input: engine.Shape{C: 3, H: 32, W: 32}}, SaveName: tt.saveName,
				Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Files: memFiles{}})
			m.Update(tea.WindowSizeMsg{Width: 100, Height: 30})
			press(m, keys...)
			if m.Mode() != modePrompt || promptOf(m).Value() != tt.want {
				t.Errorf("save name %q, keys %v: mode %v, offered %q; want %q", tt.saveName, keys, m.Mode(), promptOf(m).Value(), tt.want)
			}
		}
	}
}
