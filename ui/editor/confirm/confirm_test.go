package confirm

import (
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/ui/styles"
)

// TestAnswers: each answer key gives its answer; reload only where the
// question offers it; other keys are ignored.
func TestAnswers(t *testing.T) {
	for _, tt := range []struct {
		reload bool
		key    string
		want   any
	}{
		{false, "y", Answered{"q", Yes}}, {false, "n", Answered{"q", No}},
		{true, "r", Answered{"q", Reload}}, {false, "r", nil}, {false, "z", nil},
	} {
		c := New("overwrite?", tt.reload, "q", DefaultKeyMap(), styles.DefaultStyles())
		if got, _ := c.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune(tt.key)}); got != tt.want {
			t.Errorf("reload %v, key %s: %#v, want %#v", tt.reload, tt.key, got, tt.want)
		}
	}
	c := New("overwrite?", false, "q", DefaultKeyMap(), styles.DefaultStyles())
	if got, _ := c.Update(tea.KeyMsg{Type: tea.KeyEsc}); got != (Answered{"q", Cancel}) {
		t.Errorf("esc: %#v", got)
	}
}
