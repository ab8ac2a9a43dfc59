package editor

import (
	"github.com/charmbracelet/bubbles/textinput"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"
)

// entry is a one-line text field. A value it is given or holds when it
// gains focus starts out selected, as in most text fields (common
// practice): typing, pasting or deleting replaces it, any other key (a
// cursor key, say) keeps it for editing.
type entry struct {
	textinput.Model
	fresh bool // the value is selected
}

func newEntry(value string, limit int) entry {
	in := textinput.New()
	in.Prompt = ""
	in.CharLimit = limit
	in.SetValue(value)
	in.CursorEnd()
	return entry{Model: in, fresh: value != ""}
}

// focus gives the field the cursor and selects its value.
func (e *entry) focus() {
	e.Focus()
	e.CursorEnd()
	e.fresh = e.Value() != ""
}

// update applies a key to the field.
func (e *entry) update(msg tea.KeyMsg) tea.Cmd {
	if e.fresh {
		e.fresh = false
		switch msg.Type {
		case tea.KeyRunes, tea.KeySpace:
			e.SetValue("") // the typed text replaces the selection
		case tea.KeyBackspace, tea.KeyDelete:
			e.SetValue("")
			return nil
		}
	}
	var cmd tea.Cmd
	e.Model, cmd = e.Model.Update(msg)
	return cmd
}

// view draws the field; a selected value is drawn in the selected style.
func (e *entry) view(selected lipgloss.Style) string {
	if e.fresh && e.Focused() {
		return selected.Render(e.Value())
	}
	return e.View()
}
