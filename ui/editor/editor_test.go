package editor

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"
	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"
	"github.com/muesli/termenv"

	"stackfit/engine"
	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

func TestMain(m *testing.M) {
	lipgloss.SetColorProfile(termenv.Ascii)
	os.Exit(m.Run())
}

// example returns the built-in example stack.
func example(t testing.TB) *engine.Stack {
	t.Helper()
	s, err := stackfile.Load(examples.FruitGrader())
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// testKeysPath is the keys file the help screen names in tests (its
// golden file shows it); the command line passes the real one.
const testKeysPath = "/root/.config/stackfit/keys.yaml"

func newModel(t testing.TB, s *engine.Stack, w, h int) *Model {
	t.Helper()
	m := New(Options{Stack: s, Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), KeysPath: testKeysPath, Files: store.Disk{}})
	m.Update(tea.WindowSizeMsg{Width: w, Height: h})
	return m
}

// keyMsg turns "j", "enter", "ctrl+r", "shift+up" into a key message.
func keyMsg(k string) tea.KeyMsg {
	special := map[string]tea.KeyType{
		"enter": tea.KeyEnter, "esc": tea.KeyEsc, "tab": tea.KeyTab, "shift+tab": tea.KeyShiftTab,
		"up": tea.KeyUp, "down": tea.KeyDown, "ctrl+c": tea.KeyCtrlC, "ctrl+u": tea.KeyCtrlU,
		"backspace": tea.KeyBackspace, "shift+up": tea.KeyShiftUp, "shift+down": tea.KeyShiftDown,
		"space": tea.KeySpace, "home": tea.KeyHome, "end": tea.KeyEnd, "pgdown": tea.KeyPgDown,
		"ctrl+y": tea.KeyCtrlY, "ctrl+z": tea.KeyCtrlZ, "delete": tea.KeyDelete,
	}
	if t, ok := special[k]; ok {
		return tea.KeyMsg{Type: t}
	}
	return tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune(k)}
}

// press sends keys; a word like "conv 64" typed in a prompt goes as runes.
func press(m *Model, keys ...string) []tea.Cmd {
	var cmds []tea.Cmd
	for _, k := range keys {
		_, cmd := m.Update(keyMsg(k))
		cmds = append(cmds, cmd)
	}
	return cmds
}

// typeText sends each rune of s as its own key.
func typeText(m *Model, s string) {
	for _, r := range s {
		m.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune{r}})
	}
}

func view(m *Model) string { return ansi.Strip(m.View()) }

// TestGoldenViews renders the example at four sizes, without colour and
// with the 16 basic colours, including the detail panel's arithmetic and
// the budget gauge; the coloured goldens keep their escape codes. Every
// view is exactly the window: as many lines, none wider.
func TestGoldenViews(t *testing.T) {
	for _, colour := range []bool{false, true} {
		for _, size := range []struct {
			name string
			w, h int
		}{{"60x18", 60, 18}, {"80x24", 80, 24}, {"120x40", 120, 40}, {"200x50", 200, 50}} {
			name := size.name
			if colour {
				name += "-colour"
			}
			t.Run(name, func(t *testing.T) {
				if colour {
					lipgloss.SetColorProfile(termenv.ANSI)
					defer lipgloss.SetColorProfile(termenv.Ascii)
				}
				m := newModel(t, example(t), size.w, size.h)
				press(m, "j", "j", "j", "j", "j", "j")                   // the stride-2 convolution
				m.nums.fit.MaxWidth, m.nums.fit.WidthExact = 23.62, true // the background search's answer
				m.nums.widthState = widthDone
				out := m.View()
				if !colour {
					out = ansi.Strip(out)
				}
				if got := strings.Count(out, "\n") + 1; got != size.h {
					t.Errorf("%d lines, want %d", got, size.h)
				}
				for i, l := range strings.Split(ansi.Strip(out), "\n") {
					if w := ansi.StringWidth(l); w > size.w {
						t.Errorf("line %d is %d wide", i+1, w)
					}
				}
				golden.RequireEqual(t, []byte(out))
			})
		}
	}
}

// TestGoldenPanels renders the form, the picker, the chart and the help.
func TestGoldenPanels(t *testing.T) {
	for _, tc := range []struct {
		name string
		keys []string
	}{
		{"form", []string{"j", "j", "j", "enter", "backspace", "backspace", "4", "8"}},
		{"form-invalid", []string{"enter", "tab", "backspace", "0"}},
		{"picker", []string{"a", "down", "down"}},
		{"chart", []string{"p"}},
		{"help", []string{"?"}},
		{"prompt", []string{":", "c", "o", "n", "v", " ", "6", "4"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := newModel(t, example(t), 80, 24)
			m.nums.fit.MaxWidth, m.nums.fit.WidthExact = 23.62, true
			m.nums.widthState = widthDone
			press(m, tc.keys...)
			golden.RequireEqual(t, []byte(view(m)))
		})
	}
}

func TestTooSmall(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	for _, sz := range [][2]int{{40, 12}, {59, 30}, {100, 10}, {1, 1}, {0, 0}} {
		m.Update(tea.WindowSizeMsg{Width: sz[0], Height: sz[1]})
		press(m, "j", "n", "p", "p") // keys still work and nothing panics
		if v := view(m); sz[0] > 20 && sz[1] > 3 && !strings.Contains(v, "stackfit needs a 60×18 window") {
			t.Errorf("%v: %q", sz, v)
		}
	}
}

func TestCursorAndScroll(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	press(m, "end")
	if m.tree.cursor != len(m.tree.items)-1 || m.tree.offset == 0 {
		t.Errorf("cursor %d offset %d", m.tree.cursor, m.tree.offset)
	}
	press(m, "home")
	if m.tree.cursor != 0 || m.tree.offset != 0 {
		t.Errorf("cursor %d offset %d", m.tree.cursor, m.tree.offset)
	}
	press(m, "k") // stays at the top
	if m.tree.cursor != 0 {
		t.Error("moved above the first layer")
	}
	press(m, "pgdown")
	if m.tree.cursor != m.listHeight()-1 {
		t.Errorf("page down to %d", m.tree.cursor)
	}
}

// TestStageWidenUndo checks "halve the resolution, double the channels",
// the quick widen, and that undo takes each back as one step.
func TestStageWidenUndo(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	n0, p0 := len(m.stack.Layers), m.nums.res.Totals.Params
	press(m, "j", "j") // after the first act relu: 32×64×64
	press(m, "n")
	if got := len(m.stack.Layers); got != n0+1 {
		t.Fatalf("stage inserted %d items, want 1 (a block)", got-n0)
	}
	b := m.stack.Layers[3]
	if b.Kind != engine.KindBlock || b.Repeat != 3 || len(b.Body) != 3 {
		t.Fatalf("the stage is %s, want a block of 3 repeats of conv, norm, act", engine.Summary(&b))
	}
	stage := m.nums.res.Rows[3]
	if stage.Out != (engine.Shape{C: 64, H: 32, W: 32}) {
		t.Errorf("stage entry %v, want 64×32×32", stage.Out)
	}
	if cur := m.tree.current(); cur.addr.key() != "3" || !m.file.dirty {
		t.Errorf("selected %v, dirty %v", cur.addr, m.file.dirty)
	}
	press(m, "home", ">")
	if m.stack.Layers[0].Filters != 64 {
		t.Errorf("widened to %d", m.stack.Layers[0].Filters)
	}
	press(m, "<", "<")
	if m.stack.Layers[0].Filters != 16 {
		t.Errorf("narrowed to %d", m.stack.Layers[0].Filters)
	}
	press(m, "u", "u", "u", "u")
	if len(m.stack.Layers) != n0 || m.nums.res.Totals.Params != p0 {
		t.Errorf("after undo: %d layers, %d params", len(m.stack.Layers), m.nums.res.Totals.Params)
	}
	press(m, "U")
	if len(m.stack.Layers) != n0+1 {
		t.Error("redo did not bring the stage back")
	}
}

func TestUndoDepth(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	f0 := m.stack.Layers[0].Filters
	for i := 0; i < 210; i++ {
		press(m, ">", "<")
	}
	for i := 0; i < 210; i++ {
		press(m, "u")
	}
	if len(m.hist.undo) != historyLimit-210 && len(m.hist.undo) != 0 {
		t.Errorf("%d undo steps left", len(m.hist.undo))
	}
	if m.stack.Layers[0].Filters != f0 {
		t.Errorf("filters %d after 210 undos", m.stack.Layers[0].Filters)
	}
}

func TestEditOperations(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	n0 := len(m.stack.Layers)
	press(m, "c") // copy the stem: its name must not be copied
	if len(m.stack.Layers) != n0+1 || m.stack.Layers[1].Name != "" || m.stack.Layers[1].Filters != 32 {
		t.Errorf("copy: %+v", m.stack.Layers[1])
	}
	press(m, "x")
	if len(m.stack.Layers) != n0 {
		t.Error("delete")
	}
	press(m, "home", "J")
	if m.stack.Layers[1].Name != "stem" || m.tree.cursor != 1 {
		t.Errorf("move down: cursor %d", m.tree.cursor)
	}
	press(m, "K")
	if m.stack.Layers[0].Name != "stem" {
		t.Error("move up")
	}
	// Range: layers 1-3 wrapped in a block, folded and unfolded.
	press(m, "v", "j", "j", "b")
	b := m.stack.Layers[0]
	if b.Kind != engine.KindBlock || len(b.Body) != 3 || len(m.stack.Layers) != n0-2 {
		t.Fatalf("wrap: %v with %d layers", b.Kind, len(b.Body))
	}
	if m.nums.res.Rows[0].Path.String() != "1.1.1" || m.nums.res.Errors != 0 {
		t.Errorf("first row %s errors %d", m.nums.res.Rows[0].Path, m.nums.res.Errors)
	}
	// Blocks nest at most three deep: wrapping the inner layer again and
	// again stops there.
	press(m, "j", "b", "j", "b", "j", "b")
	if !strings.Contains(m.status, "the limit is 3") {
		t.Errorf("a fourth level of blocks was allowed: %s", m.status)
	}
	press(m, "u", "u", "home")
	press(m, "space")
	if len(m.tree.items) != len(m.stack.Layers) {
		t.Errorf("folded block still shows %d items", len(m.tree.items))
	}
	press(m, "space")
	press(m, "*")
	typeText(m, "")
	press(m, "ctrl+u")
	typeText(m, "0.5")
	press(m, "enter")
	if m.stack.Layers[4].Filters != 32 { // conv 64 halved
		t.Errorf("width ×0.5: %d", m.stack.Layers[4].Filters)
	}
}

// TestFormFieldSelection: a field's value is selected when the field gets
// the cursor, so typing replaces it; a cursor key first keeps it.
func TestFormFieldSelection(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	press(m, "enter")
	if formOf(m) == nil || formOf(m).Values()[0] != "32" || formOf(m).Keys()[1] != "kernel" {
		t.Fatalf("expected the conv 32 form with kernel second, got %+v", m.overlay)
	}
	typeText(m, "48")
	press(m, "tab")
	typeText(m, "5")
	if got := formOf(m).Values()[:2]; got[0] != "48" || got[1] != "5" {
		t.Errorf("typing into selected fields gave %q, want [48 5]", got)
	}
	press(m, "shift+tab", "end")
	typeText(m, "0")
	if got := formOf(m).Values()[0]; got != "480" {
		t.Errorf("a cursor key should keep the value for editing: got %q, want 480", got)
	}
	press(m, "enter")
	if l := m.stack.Layers[0]; l.Filters != 480 || l.Kernel != engine.Square(5) {
		t.Errorf("applied filters %d kernel %v", l.Filters, l.Kernel)
	}
}

// TestFormLive checks that the form previews each keystroke and never
// applies an invalid value.
func TestFormLive(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	press(m, "enter", "backspace", "backspace", "6", "4")
	if m.preview == nil || m.preview.Result.Rows[0].Out.C != 64 {
		t.Fatal("no live preview of filters 64")
	}
	if m.stack.Layers[0].Filters != 32 {
		t.Error("the form applied before accept")
	}
	press(m, "tab")
	press(m, "backspace")
	typeText(m, "x")
	if formOf(m).Errors()[1] == "" || !strings.Contains(formOf(m).Errors()[1], "kernel") {
		t.Errorf("kernel x accepted: %q", formOf(m).Errors()[1])
	}
	press(m, "enter") // refused
	if m.Mode() != modeForm || m.stack.Layers[0].Filters != 32 {
		t.Error("an invalid form was applied")
	}
	press(m, "backspace")
	typeText(m, "5")
	press(m, "enter")
	if l := m.stack.Layers[0]; m.Mode() != modeNormal || l.Filters != 64 || l.Kernel != engine.Square(5) {
		t.Errorf("applied %+v", l)
	}
	press(m, "enter", "esc")
	if m.stack.Layers[0].Filters != 64 || m.Mode() != modeNormal {
		t.Error("cancel changed the layer")
	}
}

func TestPickerAndQuickEntry(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	press(m, "a", "d", "d") // jumps to deconv, then dropout
	if engine.Kinds()[pickerOf(m).Selected()] != engine.KindDropout {
		t.Errorf("letter jump to %v", engine.Kinds()[pickerOf(m).Selected()])
	}
	press(m, "enter", "enter")
	if m.stack.Layers[1].Kind != engine.KindDropout || m.Mode() != modeNormal {
		t.Errorf("picker inserted %v", m.stack.Layers[1].Kind)
	}
	press(m, ":")
	typeText(m, "pool mx k2")
	if !promptBad(m) || !strings.Contains(promptHint(m), `did you mean "max"`) {
		t.Errorf("hint %q", promptHint(m))
	}
	press(m, "enter") // refused: stays open
	if m.Mode() != modePrompt {
		t.Error("a bad line was accepted")
	}
	press(m, "ctrl+u")
	typeText(m, "glo")
	press(m, "tab")
	if promptOf(m).Value() != "global-pool " {
		t.Errorf("completion gave %q", promptOf(m).Value())
	}
	press(m, "esc", ":")
	typeText(m, "conv 48 k3 p1 @extra")
	press(m, "enter")
	if l := m.stack.Layers[2]; l.Kind != engine.KindConv || l.Filters != 48 || l.Name != "extra" {
		t.Errorf("quick entry inserted %+v", l)
	}
}

func TestSettingsAndBaseline(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	press(m, "m")
	press(m, ">")
	if v := view(m); !strings.Contains(v, "fits · 1.39GiB (+128MiB) / 21.6GiB · params 852k (+10.1k) · MACs 231M (+41.3M)") {
		t.Errorf("no baseline delta in the footer:\n%s", v)
	}
	press(m, "t")
	for formOf(m).Keys()[formOf(m).Focused()] != "budget" {
		press(m, "tab")
	}
	press(m, "ctrl+u")
	typeText(m, "1GiB")
	if m.preview.Memory.Fits {
		t.Error("1 GiB should not fit batch 256")
	}
	press(m, "enter")
	if m.stack.Training.Budget != 1<<30 || m.nums.mem.Fits {
		t.Errorf("budget %d fits %v", m.stack.Training.Budget, m.nums.mem.Fits)
	}
	if !strings.Contains(view(m), "does not fit") {
		t.Error("the footer does not say it does not fit")
	}
	press(m, "m")
	if m.baseline != nil {
		t.Error("baseline not cleared")
	}
}

func TestFilesAndQuit(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "grader.yaml")
	m := newModel(t, example(t), 80, 24)
	press(m, ">", "w") // no path yet: asks
	if m.Mode() != modePrompt || promptOf(m).Tag().(promptKind) != promptSaveAs {
		t.Fatal("save without a path did not ask for one")
	}
	press(m, "ctrl+u")
	typeText(m, p)
	press(m, "enter")
	if m.file.dirty || m.file.path != p {
		t.Fatalf("not saved: %s", m.status)
	}
	back, err := store.LoadFile(p)
	if err != nil || back.Layers[0].Filters != 64 {
		t.Fatalf("saved file: %v", err)
	}
	data1, _ := os.ReadFile(p)
	press(m, "w")
	data2, _ := os.ReadFile(p)
	if string(data1) != string(data2) {
		t.Error("saving again changed the file")
	}
	// Quit with unsaved changes asks; esc stays; n quits.
	press(m, "<", "q")
	if m.Mode() != modeConfirm {
		t.Fatal("quit with unsaved changes did not ask")
	}
	press(m, "esc")
	if m.quitting || m.Mode() != modeNormal {
		t.Error("esc did not stay")
	}
	cmds := press(m, "q", "n")
	if !m.quitting || cmds[1] == nil {
		t.Error("n did not quit")
	}
	// Open a file from the prompt.
	m2 := newModel(t, example(t), 80, 24)
	press(m2, "o")
	typeText(m2, p)
	press(m2, "enter")
	if m2.file.path != p || m2.stack.Layers[0].Filters != 64 {
		t.Errorf("open: %s", m2.status)
	}
	press(m2, "o")
	typeText(m2, filepath.Join(dir, "nope.yaml"))
	press(m2, "enter")
	if m2.Mode() != modePrompt || !promptBad(m2) {
		t.Error("opening a missing file did not say so")
	}
}

func TestNewFile(t *testing.T) {
	p := filepath.Join(t.TempDir(), "new.yaml")
	m := New(Options{Path: p, NewFile: true, Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Files: store.Disk{}})
	m.Update(tea.WindowSizeMsg{Width: 80, Height: 24})
	if m.Mode() != modePrompt || promptOf(m).Tag().(promptKind) != promptInput {
		t.Fatal("a new file does not ask for the input")
	}
	press(m, "ctrl+u")
	typeText(m, "1x28x28")
	press(m, "enter", ":")
	typeText(m, "conv 8 k3")
	press(m, "enter", "w")
	s, err := store.LoadFile(p)
	if err != nil || s.Input != (engine.Shape{C: 1, H: 28, W: 28}) || len(s.Layers) != 1 {
		t.Fatalf("%v %+v", err, s)
	}
}

// TestPromptSuggestion: a prompt's suggested value is selected, as in any
// text field with a default (common practice): enter keeps it, typing or
// deleting replaces it, a cursor key keeps it for editing.
func TestPromptSuggestion(t *testing.T) {
	newModel := func() *Model {
		m := New(Options{Path: filepath.Join(t.TempDir(), "new.yaml"), NewFile: true, Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles()})
		m.Update(tea.WindowSizeMsg{Width: 100, Height: 30})
		return m
	}
	tests := []struct {
		name  string
		keys  []string
		typed string
		want  engine.Shape
	}{
		{"enter keeps the suggestion", []string{"enter"}, "", engine.Shape{C: 3, H: 224, W: 224}},
		{"typing replaces it", nil, "1x28x28", engine.Shape{C: 1, H: 28, W: 28}},
		{"backspace clears it", []string{"backspace"}, "2x64x64", engine.Shape{C: 2, H: 64, W: 64}},
		{"a cursor key keeps it for editing", []string{"end", "backspace", "backspace", "backspace"}, "100", engine.Shape{C: 3, H: 224, W: 100}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := newModel()
			screen := view(m)
			for _, want := range []string{"first give the input shape", "enter keeps 3x224x224 · typing replaces it · esc cancels"} {
				if !strings.Contains(screen, want) {
					t.Fatalf("the screen lacks %q:\n%s", want, screen)
				}
			}
			press(m, tt.keys...)
			typeText(m, tt.typed)
			if m.Mode() == modePrompt {
				press(m, "enter")
			}
			if m.stack.Input != tt.want {
				t.Errorf("input %v, want %v", m.stack.Input, tt.want)
			}
		})
	}
}

// longStack builds an n-layer stack for the speed benchmarks.
func longStack(n int) *engine.Stack {
	s := &engine.Stack{Input: engine.Shape{C: 3, H: 224, W: 224}, Training: engine.Training{Batch: 32, Budget: 80 << 30}}
	for len(s.Layers) < n {
		s.Layers = append(s.Layers,
			engine.Layer{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}, NoBias: true},
			engine.Layer{Kind: engine.KindNorm}, engine.Layer{Kind: engine.KindAct})
	}
	return s
}

// benchKeys alternates two keys on a 1,000-layer stack at 120×40, drawing
// a new frame after each.
func benchKeys(b *testing.B, k1, k2 string) {
	m := newModel(b, longStack(1000), 120, 40)
	press(m, "pgdown", "pgdown")
	keys := [2]tea.KeyMsg{keyMsg(k1), keyMsg(k2)}
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		m.Update(keys[i%2])
		_ = m.View()
	}
}

// BenchmarkKeyMove is a cursor key and a new frame.
func BenchmarkKeyMove(b *testing.B) { benchKeys(b, "j", "k") }

// BenchmarkKeyEdit is an edit (filters ×2, then ÷2), which recomputes every
// number of the stack, and a new frame.
func BenchmarkKeyEdit(b *testing.B) { benchKeys(b, ">", "<") }

// BenchmarkKeyEditUnits is the same edit on a use of a unit in the
// GoogLeNet stack file (cbr used 57 times, 54 of them inside the nine uses
// of inception): the change
// goes to the unit and every use is expanded again.
func BenchmarkKeyEditUnits(b *testing.B) {
	data, err := os.ReadFile("../../testdata/published/googlenet.yaml")
	if err != nil {
		b.Fatal(err)
	}
	s, err := stackfile.Load(data)
	if err != nil {
		b.Fatal(err)
	}
	m := newModel(b, s, 120, 40)
	keys := [2]tea.KeyMsg{keyMsg(">"), keyMsg("<")}
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		m.Update(keys[i%2])
		_ = m.View()
	}
}

// BenchmarkView measures a frame alone on stacks of 100 and 10,000 layers:
// only visible rows are drawn, so the two should cost about the same.
func BenchmarkView(b *testing.B) {
	for _, n := range []int{100, 10000} {
		b.Run(strconv.Itoa(n), func(b *testing.B) {
			m := newModel(b, longStack(n), 120, 40)
			b.ReportAllocs()
			for b.Loop() {
				_ = m.View()
			}
		})
	}
}

// BenchmarkStartup is New plus the first frame of the 1,000-layer stack.
func BenchmarkStartup(b *testing.B) {
	s := longStack(1000)
	b.ReportAllocs()
	for b.Loop() {
		m := New(Options{Stack: s, Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles()})
		m.Update(tea.WindowSizeMsg{Width: 120, Height: 40})
		_ = m.View()
	}
}

// TestViewFillsScreen checks every screen is exactly the window's height:
// one line more scrolls the title away in a real terminal.
func TestViewFillsScreen(t *testing.T) {
	for _, size := range [][2]int{{80, 24}, {120, 40}} {
		for _, keys := range [][]string{nil, {"p"}, {"?"}, {"enter"}, {"a"}, {":"}, {"t"}} {
			m := newModel(t, example(t), size[0], size[1])
			press(m, keys...)
			if got := lipgloss.Height(m.View()); got != size[1] {
				t.Errorf("%v after %v: %d lines, want %d", size, keys, got, size[1])
			}
		}
	}
}

// TestForkEditing builds a fork from the editor: quick entry gives it its
// usual two branches, a layer added among the branches becomes a branch
// of its own, one added on an empty branch goes inside it, a branch
// cannot be added outside a fork, and the result saves and loads back.
func TestForkEditing(t *testing.T) {
	m := newModel(t, &engine.Stack{Name: "fork", Input: engine.Shape{C: 16, H: 32, W: 32}}, 100, 30)
	press(m, ":")
	typeText(m, "fork copy")
	press(m, "enter")
	f := m.stack.Layers[0]
	if f.Kind != engine.KindFork || len(f.Body) != 2 || m.nums.res.Errors != 0 || m.nums.res.Output != (engine.Shape{C: 16, H: 32, W: 32}) {
		t.Fatalf("quick entry gave %+v, output %v, %v", f, m.nums.res.Output, m.nums.res.Diags)
	}
	press(m, "j") // branch 1
	press(m, ":")
	typeText(m, "conv 8 k1")
	press(m, "enter")
	f = m.stack.Layers[0]
	if len(f.Body) != 3 || f.Body[1].Kind != engine.KindBranch || f.Body[1].Body[0].Filters != 8 {
		t.Fatalf("a layer among the branches: %+v", f.Body)
	}
	if m.nums.res.Output.C != 24 {
		t.Errorf("three branches join to %d channels, want 8 + 8 + 8", m.nums.res.Output.C)
	}
	// An empty branch takes the next layer inside.
	m.stack.Layers[0].Body = append(m.stack.Layers[0].Body, engine.Layer{Kind: engine.KindBranch})
	m.recompute()
	if !strings.Contains(view(m), "empty: the map itself") {
		t.Errorf("an empty branch is not marked:\n%s", view(m))
	}
	m.tree.selectAddr(addr{0, 3}, m.stack, &m.nums.res)
	press(m, ":")
	typeText(m, "act relu")
	press(m, "enter")
	if b := m.stack.Layers[0].Body[3]; len(b.Body) != 1 || b.Body[0].Kind != engine.KindAct {
		t.Errorf("the empty branch got %+v", b)
	}
	m.tree.selectAddr(addr{0}, m.stack, &m.nums.res)
	press(m, ":")
	typeText(m, "branch")
	press(m, "enter")
	if !strings.Contains(m.status, "a branch goes inside a fork") || len(m.stack.Layers) != 1 {
		t.Errorf("a branch outside a fork: %q, %d items", m.status, len(m.stack.Layers))
	}
	data, err := stackfile.Save(m.stack)
	if err != nil {
		t.Fatal(err)
	}
	back, err := stackfile.Load(data)
	if err != nil {
		t.Fatalf("the saved fork does not load: %v\n%s", err, data)
	}
	if r := engine.Evaluate(back); r.Output != m.nums.res.Output || r.Totals != m.nums.res.Totals {
		t.Errorf("reloaded: %v %v, editor %v %v", r.Output, r.Totals, m.nums.res.Output, m.nums.res.Totals)
	}
}

// TestListLimitAtEditTime: a list at the most items a stack file holds
// takes no more from the editor (copy, add), so every save loads back.
func TestListLimitAtEditTime(t *testing.T) {
	t.Parallel() // slow: runs beside the others, after the serial tests (the memory measurements among them)
	s := &engine.Stack{Input: engine.Shape{C: 8, H: 8, W: 8}}
	s.Layers = make([]engine.Layer, engine.MaxSegment)
	for i := range s.Layers {
		s.Layers[i] = engine.Layer{Kind: engine.KindAct}
	}
	m := newModel(t, s, 100, 30)
	press(m, "c")
	if len(m.stack.Layers) != engine.MaxSegment || !strings.Contains(m.status, "the most a stack file takes") {
		t.Fatalf("copy past the limit: %d items, %q", len(m.stack.Layers), m.status)
	}
	data, err := stackfile.Save(m.stack)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := stackfile.Load(data); err != nil {
		t.Fatalf("the stack at the limit does not load: %v", err)
	}
}

// saveJournal is a journal that does what the real one does first: write
// the stack file's form (store.Journal.Record).
type saveJournal struct{ records int }

func (j *saveJournal) Record(s *engine.Stack) error {
	j.records++
	_, err := stackfile.Save(s)
	return err
}
func (j *saveJournal) Clear() error  { return nil }
func (j *saveJournal) Rebase([]byte) {}

// TestFileSizeLimitAtEditTime fills a stack to just under the 8 MiB a
// stack file may hold (long notes) and copies a layer: the copy is refused
// with the file size, nothing changes and no undo step is made, and the
// stack still saves and loads.
func TestFileSizeLimitAtEditTime(t *testing.T) {
	t.Parallel() // slow: runs beside the others, after the serial tests (the memory measurements among them)
	note := strings.Repeat("n", engine.MaxNoteLen)
	layer := engine.Layer{Kind: engine.KindAct, Note: note}
	s := &engine.Stack{Input: engine.Shape{C: 8, H: 8, W: 8}, Layers: []engine.Layer{layer}}
	one, _ := stackfile.Save(s)
	s.Layers = append(s.Layers, layer)
	two, _ := stackfile.Save(s)
	per := len(two) - len(one)                       // what one more layer adds
	fit := (stackfile.MaxFileBytes-len(one))/per + 1 // the most layers a file holds
	s.Layers = s.Layers[:0]
	for range fit - 1 {
		s.Layers = append(s.Layers, layer)
	}
	j := &saveJournal{}
	opts := Options{Stack: s, Path: t.TempDir() + "/notes.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(),
		Files: store.Disk{}, JournalFor: func(string) Journal { return j }}
	m := New(opts)
	m.Update(tea.WindowSizeMsg{Width: 100, Height: 30})
	n := len(m.stack.Layers)
	press(m, "c")
	if len(m.stack.Layers) != n+1 {
		t.Fatalf("the first copy, still under the limit, was refused: %q", m.status)
	}
	press(m, "c")
	if len(m.stack.Layers) != n+1 || !strings.Contains(m.status, "refused") || !strings.Contains(m.status, "8 MiB") || len(m.hist.undo) != 1 {
		t.Fatalf("a copy past 8 MiB: %d items (want %d), %d undo steps, %q", len(m.stack.Layers), n+1, len(m.hist.undo), m.status)
	}
	data, err := stackfile.Save(m.stack)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := stackfile.Load(data); err != nil {
		t.Fatalf("the stack at the limit does not load: %v", err)
	}
}
