package picker

import (
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/ui/styles"
)

// TestPicker: moving wraps around, a letter jumps to the next name with
// it, the view marks the choice and counts what lies beyond, and accept
// and esc give their results.
func TestPicker(t *testing.T) {
	items := []Item{{"conv", "a"}, {"deconv", "b"}, {"dense", "c"}, {"dropout", "d"}, {"pool", "e"}, {"act", "f"}}
	p := New("add which?", items, 7, DefaultKeyMap(), styles.DefaultStyles())
	p.SetSize(4) // title, two entries, the "more" line
	p.Update(tea.KeyMsg{Type: tea.KeyUp})
	if p.Selected() != 5 {
		t.Errorf("up from the first went to %d", p.Selected())
	}
	p.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("d")})
	p.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("d")})
	if p.Selected() != 2 {
		t.Errorf("d, d went to %d, want dense", p.Selected())
	}
	v := p.View(60, 4)
	if !strings.Contains(v, "▶ dense") || !strings.Contains(v, "↑ 1 more above · ↓ 3 more below") {
		t.Errorf("view:\n%s", v)
	}
	if res, _ := p.Update(tea.KeyMsg{Type: tea.KeyEnter}); res != (Chosen{7, 2}) {
		t.Errorf("accept gave %#v", res)
	}
	if res, _ := p.Update(tea.KeyMsg{Type: tea.KeyEsc}); res != (Cancelled{7}) {
		t.Errorf("esc gave %#v", res)
	}
}
