package editor

import (
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
)

// TestFormsKeepLongNotes: a stack note and a layer note as long as a stack
// file holds (engine.MaxNoteLen bytes, line breaks, a literal " ⏎ " and
// spaces at the ends included) survive the setup form and the layer form
// accepted unchanged; a paste that would take a note past the limit is
// refused with a message that names the field and the limit.
func TestFormsKeepLongNotes(t *testing.T) {
	body := " lead\nsays a ⏎ b\tx"
	note := body + strings.Repeat("n", engine.MaxNoteLen-len(body))
	s := example(t)
	s.Name = "  spaced name "
	s.Note = note
	s.Layers[0].Note = note
	m := newModel(t, s, 100, 30)
	tests := []struct {
		name   string
		open   string
		layers func() string // the note after accepting
	}{
		{"setup form", "t", func() string { return m.stack.Note }},
		{"layer form", "enter", func() string { return m.stack.Layers[0].Note }},
	}
	for _, tt := range tests {
		press(m, tt.open, "enter") // accepted as it is
		if m.overlay != nil {
			t.Fatalf("%s: not accepted: %v", tt.name, formOf(m).Errors())
		}
		if got := tt.layers(); got != note {
			t.Errorf("%s: the note became %d bytes %q…, want it unchanged", tt.name, len(got), got[:min(len(got), 40)])
		}
		press(m, tt.open)
		for formOf(m).Keys()[formOf(m).Focused()] != "note" {
			press(m, "tab")
		}
		press(m, "end") // keeps the value (typing would replace it)
		m.Update(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune("a paste of some more words"), Paste: true})
		if v := view(m); !strings.Contains(v, "note holds at most 4096 bytes") {
			t.Errorf("%s: a paste past the limit was not refused with the limit:\n%s", tt.name, v)
		}
		press(m, "enter")
		if got := tt.layers(); got != note {
			t.Errorf("%s: after a refused paste the note became %d bytes, want it unchanged", tt.name, len(got))
		}
	}
	if m.stack.Name != "  spaced name " {
		t.Errorf("the untouched stack name became %q", m.stack.Name)
	}
}
