package prompt

import (
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/ui/styles"
)

// TestPrompt: the check runs as the line is typed, completion replaces the
// line or lists candidates, a refused line is selected so typing replaces
// it, and accept gives the trimmed line.
func TestPrompt(t *testing.T) {
	check := func(v string) (string, bool) {
		if v == "bad" {
			return "not that", true
		}
		return "", false
	}
	complete := func(v string) (string, []string) {
		if v == "co" {
			return "conv ", nil
		}
		return "d", []string{"deconv", "dense"}
	}
	p := New("add", "", check, complete, 1, DefaultKeyMap(), styles.DefaultStyles())
	for _, r := range "bad" {
		p.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune{r}})
	}
	if h, bad := p.Hint(); !bad || h != "not that" {
		t.Errorf("hint %q %v", h, bad)
	}
	p.Update(tea.KeyMsg{Type: tea.KeyCtrlU})
	p.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("co")})
	p.Update(tea.KeyMsg{Type: tea.KeyTab})
	if p.Value() != "conv " {
		t.Errorf("completion gave %q", p.Value())
	}
	p.Update(tea.KeyMsg{Type: tea.KeyTab})
	if h, _ := p.Hint(); h != "deconv  dense" {
		t.Errorf("candidates %q", h)
	}
	p.Refuse("no such file")
	p.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("x")})
	if p.Value() != "x" {
		t.Errorf("typing after a refusal gave %q", p.Value())
	}
	p.Update(tea.KeyMsg{Type: tea.KeySpace, Runes: []rune(" ")})
	if res, _ := p.Update(tea.KeyMsg{Type: tea.KeyEnter}); res != (Submitted{1, "x"}) {
		t.Errorf("accept gave %#v", res)
	}
	if res, _ := p.Update(tea.KeyMsg{Type: tea.KeyEsc}); res != (Cancelled{1}) {
		t.Errorf("esc gave %#v", res)
	}
}
