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
	limit    int  // the most the value may measure; 0: no limit
	measure  func(string) int
	refused  bool // the last key would have taken the value past limit
}

// New returns a field holding value. An edit that would make the value
// measure more than limit (and more than before) is refused whole, not
// cut: see Refused. The value given is never cut, whatever its length.
// measure nil counts bytes; limit 0 sets no limit.
func New(value string, limit int, measure func(string) int) Model {
	in := textinput.New()
	in.Prompt = ""
	in.Cursor.SetMode(cursor.CursorStatic)
	in.SetValue(value)
	in.CursorEnd()
	if measure == nil {
		measure = func(s string) int { return len(s) }
	}
	return Model{input: in, selected: value != "", limit: limit, measure: measure}
}

// Refused reports whether the last key was refused because the value would
// have measured more than the field's limit.
func (m *Model) Refused() bool { return m.refused }

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

// Update applies a key to the field. A key (a paste, most often) that
// would take the value past the limit changes nothing, and Refused says
// so.
func (m *Model) Update(msg tea.KeyMsg) tea.Cmd {
	old, pos, sel := m.input.Value(), m.input.Position(), m.selected
	m.refused = false
	cmd := m.update(msg)
	if v := m.input.Value(); m.limit > 0 && v != old {
		if n := m.measure(v); n > m.limit && n > m.measure(old) {
			m.input.SetValue(old)
			m.input.SetCursor(pos)
			m.selected, m.refused = sel, true
			return nil
		}
	}
	return cmd
}

func (m *Model) update(msg tea.KeyMsg) tea.Cmd {
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

// View draws the field; a selected value is drawn in the selected style,
// between marks (empty where the style alone shows it, styles.Styles'
// SelectMarks).
func (m *Model) View(selected lipgloss.Style, marks [2]string) string {
	if m.Selected() {
		return marks[0] + selected.Render(m.input.Value()) + marks[1]
	}
	return m.input.View()
}
