package editor

import (
	tea "github.com/charmbracelet/bubbletea"
	"strings"
	"testing"

	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// nested has a block holding a gate, and a fork of two branches, so
// every kind that folds is there; conv 12 and the second branch's conv 20
// warn (channels not a multiple of 8).
const nested = `stackfit: 1
input: [8, 32, 32]
layers:
  - {conv: 12, kernel: 3, pad: 1}
  - block: 2
    layers:
      - {conv: 16, kernel: 3, pad: 1}
      - gate: channel
        layers:
          - global-pool
          - {conv: 16, kernel: 1}
          - {act: sigmoid}
  - fork: copy
    branches:
      - [{conv: 8, kernel: 1}]
      - [{conv: 20, kernel: 3, pad: 1}]
  - {conv: 16, kernel: 1}
`

// memFolds is a FoldState kept in memory, one per path.
type memFolds struct {
	m    map[string][2][]string
	path string
}

func (f *memFolds) Load() ([]string, []string, error) { v := f.m[f.path]; return v[0], v[1], nil }
func (f *memFolds) Save(folded, opened []string) error {
	f.m[f.path] = [2][]string{folded, opened}
	return nil
}

func foldModel(t *testing.T, saved map[string][2][]string) *Model {
	t.Helper()
	m := New(Options{Stack: load(t, nested), Path: "net.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(),
		FoldsFor: func(p string) FoldState { return &memFolds{m: saved, path: p} }})
	m.Update(windowSize(100, 40))
	return m
}

// TestFoldAll checks fold all and unfold all: every block, gate, fork
// and branch closes (the cursor moves to the outermost item holding it)
// and opens again; the state is kept for the file and restored by the
// next editor of it.
func TestFoldAll(t *testing.T) {
	saved := map[string][2][]string{}
	m := foldModel(t, saved)
	all := len(m.tree.items)
	press(m, "j", "j", "j") // inside the block's gate
	if got := m.tree.current().addr.key(); got != "1/1" {
		t.Fatalf("cursor on %s, want the gate 1/1", got)
	}
	press(m, "-")
	if want := []string{"1", "1/1", "2", "2/0", "2/1"}; strings.Join(saved["net.yaml"][0], " ") != strings.Join(want, " ") {
		t.Errorf("kept %v, want %v", saved["net.yaml"][0], want)
	}
	if n := len(m.tree.items); n != 4 {
		t.Errorf("%d items shown folded, want the 4 top-level ones", n)
	}
	if got := m.tree.current().addr.key(); got != "1" {
		t.Errorf("cursor on %s after fold all, want the block 1", got)
	}
	again := foldModel(t, saved)
	if n := len(again.tree.items); n != 4 {
		t.Errorf("the next run shows %d items, want the 4 folded", n)
	}
	press(again, "+")
	if n := len(again.tree.items); n != all {
		t.Errorf("unfold all shows %d items, want %d", n, all)
	}
	if len(saved["net.yaml"][0]) != 0 {
		t.Errorf("unfold all kept %v folded", saved["net.yaml"][0])
	}
	// One fold by space is kept too.
	press(again, "j", "space")
	if strings.Join(saved["net.yaml"][0], " ") != "1" {
		t.Errorf("space kept %v, want [1]", saved["net.yaml"][0])
	}
}

// TestFoldStateOnDisk checks the editor with the state folder's store: a
// fold survives a new editor, and another file's state is not used.
func TestFoldStateOnDisk(t *testing.T) {
	dir := t.TempDir()
	mk := func(path string) *Model {
		m := New(Options{Stack: load(t, nested), Path: path, Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(),
			FoldsFor: func(p string) FoldState { return store.FoldsFor(p, dir) }})
		m.Update(windowSize(100, 40))
		return m
	}
	press(mk(dir+"/a.yaml"), "-")
	if n := len(mk(dir + "/a.yaml").tree.items); n != 4 {
		t.Errorf("a.yaml shows %d items, want 4 folded", n)
	}
	if n := len(mk(dir + "/b.yaml").tree.items); n == 4 {
		t.Error("b.yaml took a.yaml's fold state")
	}
}

// TestNextProblem checks the jump to the next and previous error or
// warning: in stack order, wrapping around, onto a folded item that holds
// one.
func TestNextProblem(t *testing.T) {
	m := foldModel(t, map[string][2][]string{})
	at := func() string { return m.tree.current().addr.key() }
	press(m, "f")
	if at() != "2/1/0" { // the cursor's own problem comes last
		t.Errorf("first jump to %s, want 2/1/0 (conv 20)", at())
	}
	if !strings.Contains(m.StatusLine(), "2 of 2 · warning 3.2.1: filters 20 is not a multiple of 8") {
		t.Errorf("status %q", m.StatusLine())
	}
	press(m, "f")
	if at() != "0" {
		t.Errorf("wrapping: at %s, want 0 (conv 12)", at())
	}
	press(m, "F")
	if at() != "2/1/0" {
		t.Errorf("back, wrapping: at %s, want 2/1/0", at())
	}
	press(m, "-") // the cursor goes to the fork, which holds the warning
	press(m, "f")
	if at() != "0" {
		t.Errorf("folded: at %s, want 0", at())
	}
	press(m, "f")
	if at() != "2" {
		t.Errorf("folded: at %s, want the fork 2", at())
	}
	clean := newModel(t, load(t, "stackfit: 1\ninput: [8, 8, 8]\nlayers: [{conv: 8, kernel: 1}]\n"), 100, 40)
	press(clean, "f")
	if clean.StatusLine() != "no errors or warnings" {
		t.Errorf("clean stack: %q", clean.StatusLine())
	}
	empty := newModel(t, load(t, "stackfit: 1\ninput: [8, 8, 8]\nlayers: []\n"), 100, 40)
	press(empty, "f", "F") // no panic on an empty stack
}

// TestDetailsScroll checks that a details panel longer than its space
// scrolls, stops at either end, and starts from the top for another item.
func TestDetailsScroll(t *testing.T) {
	m := newModel(t, load(t, warned), 100, 24)
	press(m, "end")
	if v := view(m); !strings.Contains(v, "more line") || strings.Contains(v, "above") {
		t.Fatalf("the panel does not overflow:\n%s", v)
	}
	for range 50 {
		press(m, "}")
	}
	v := view(m)
	if !strings.Contains(v, "above: { scrolls up") || strings.Contains(v, "more line") {
		t.Errorf("scrolled to the end:\n%s", v)
	}
	if !strings.Contains(strings.Join(strings.Fields(v), " "), "for the backward pass") {
		t.Errorf("the end of the details does not show:\n%s", v)
	}
	press(m, "k")
	if strings.Contains(view(m), "above") {
		t.Error("another item's details start scrolled")
	}
	press(m, "j", "{")
	if strings.Contains(view(m), "above") {
		t.Error("scrolled above the top")
	}
}

func windowSize(w, h int) tea.WindowSizeMsg { return tea.WindowSizeMsg{Width: w, Height: h} }
