package form

import (
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/ui/styles"
)

func press(t tea.KeyType) tea.KeyMsg { return tea.KeyMsg{Type: t} }
func runes(s string) tea.KeyMsg      { return tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune(s)} }

// TestFormResults: typing replaces a selected value, tab moves, an
// invalid field refuses accept with a notice, a valid form gives its
// values, esc gives Cancelled, each with the parent's tag.
func TestFormResults(t *testing.T) {
	check := func(v []string) ([]string, []bool) {
		errs := make([]string, len(v))
		if v[0] == "" {
			errs[0] = "filters: give a number"
		}
		return errs, []bool{false, v[0] == "1"} // kernel hidden for filters 1
	}
	f := New("edit conv", []Field{{"filters", "output channels", "32"}, {"kernel", "window", "3"}}, check, "tag", DefaultKeyMap(), styles.DefaultStyles())
	f.Update(runes("4"))
	f.Update(runes("8"))
	if got := f.Values()[0]; got != "48" {
		t.Fatalf("typing into the selected value gave %q", got)
	}
	f.Update(press(tea.KeyTab))
	if f.Focused() != 1 {
		t.Fatal("tab did not move to kernel")
	}
	f.Update(press(tea.KeyShiftTab))
	f.Update(press(tea.KeyCtrlU))
	res, _ := f.Update(press(tea.KeyEnter))
	if res != nil || !strings.Contains(f.View(80, 5), "fix the field marked ✗") || f.Errors()[0] == "" {
		t.Fatalf("an invalid form was accepted: %v", res)
	}
	f.Update(runes("1"))
	if strings.Contains(f.View(80, 5), "kernel") {
		t.Error("a field that does not apply is shown")
	}
	res, _ = f.Update(press(tea.KeyEnter))
	if s, ok := res.(Submitted); !ok || s.Tag != "tag" || s.Values[0] != "1" {
		t.Fatalf("accept gave %#v", res)
	}
	res, _ = f.Update(press(tea.KeyEsc))
	if c, ok := res.(Cancelled); !ok || c.Tag != "tag" {
		t.Fatalf("esc gave %#v", res)
	}
}
