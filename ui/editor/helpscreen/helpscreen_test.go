package helpscreen

import (
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"stackfit/keymap"
	"stackfit/ui/styles"
)

// TestReflowAndScroll: the key columns fit any width (more columns side by
// side when wide), no binding is lost, and the help scrolls to its end
// and closes.
func TestReflowAndScroll(t *testing.T) {
	km := keymap.DefaultKeyMap()
	h := New("keys", km, []Section{{"text", strings.Repeat("word ", 60)}}, DefaultKeyMap(), styles.DefaultStyles())
	var narrowLines int
	for _, w := range []int{40, 60, 80, 120, 200} {
		h.SetSize(w, 20)
		all := strings.Join(h.Lines(), "\n")
		for _, g := range km.FullHelp() {
			for _, b := range g {
				if !strings.Contains(all, b.Help().Desc) {
					t.Errorf("width %d: %q missing", w, b.Help().Desc)
				}
			}
		}
		for _, l := range h.Lines() {
			if ansi.StringWidth(l) > max(w, 20) && !strings.HasPrefix(l, " ") {
				t.Errorf("width %d: line %q is %d wide", w, l, ansi.StringWidth(l))
			}
		}
		if w == 40 {
			narrowLines = len(h.Lines())
		}
		if w == 200 && len(h.Lines()) >= narrowLines {
			t.Errorf("200 columns take %d lines, 40 take %d: no reflow", len(h.Lines()), narrowLines)
		}
	}
	h.SetSize(80, 10)
	h.Update(tea.KeyMsg{Type: tea.KeyEnd})
	if h.Offset() == 0 || !strings.Contains(h.View(80, 10), "word") {
		t.Errorf("end did not scroll to the last lines:\n%s", h.View(80, 10))
	}
	if res, _ := h.Update(tea.KeyMsg{Type: tea.KeyEsc}); res != (Closed{}) {
		t.Errorf("esc gave %#v", res)
	}
}
