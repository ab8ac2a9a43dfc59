// Package field is the one-line text field of the editor's forms and
// prompts: bubbles' text input with a steady cursor (no blink timer, so
// the field never needs a command of its own) and a value that starts out
// selected, as in most text fields (common practice): typing, pasting or
// deleting replaces it; any other key, a cursor key say, keeps it for
// editing.
package field

import (
	"github.com/charmbracelet/bubbles/cursor"
	"github.com/charmbracelet/bubbles/textinput"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"
)

// Model is one text field.
type Model struct {
	input    textinput.Model
	selected bool // the value is selected: typing replaces it
}

// New returns a field holding value, at most limit characters long.
func New(value string, limit int) Model {
	in := textinput.New()
	in.Prompt = ""
	in.CharLimit = limit
	in.Cursor.SetMode(cursor.CursorStatic)
	in.SetValue(value)
	in.CursorEnd()
	return Model{input: in, selected: value != ""}
}

// Value returns the text.
func (m *Model) Value() string { return m.input.Value() }

// SetValue replaces the text and puts the cursor at its end.
func (m *Model) SetValue(v string) {
	m.input.SetValue(v)
	m.input.CursorEnd()
	m.selected = false
}

// Selected reports whether the value is selected (typing replaces it).
func (m *Model) Selected() bool { return m.selected && m.input.Focused() }

// Focus gives the field the cursor and selects its value.
func (m *Model) Focus() {
	m.input.Focus()
	m.input.CursorEnd()
	m.selected = m.input.Value() != ""
}

// Select selects the value again, so the next key typed replaces it (after
// a refused entry, say).
func (m *Model) Select() { m.selected = m.input.Value() != "" }

// Blur takes the cursor away.
func (m *Model) Blur() { m.input.Blur() }

// Focused reports whether the field has the cursor.
func (m *Model) Focused() bool { return m.input.Focused() }

// Update applies a key to the field.
func (m *Model) Update(msg tea.KeyMsg) tea.Cmd {
	if m.selected {
		m.selected = false
		switch msg.Type {
		case tea.KeyRunes, tea.KeySpace:
			m.input.SetValue("") // the typed text replaces the selection
		case tea.KeyBackspace, tea.KeyDelete:
			m.input.SetValue("")
			return nil
		}
	}
	var cmd tea.Cmd
	m.input, cmd = m.input.Update(msg)
	return cmd
}

// View draws the field; a selected value is drawn in the selected style.
func (m *Model) View(selected lipgloss.Style) string {
	if m.Selected() {
		return selected.Render(m.input.Value())
	}
	return m.input.View()
}
