// Package confirm is the editor's question with a few answers (yes, no,
// reload, cancel): a component with New, Update, View and a KeyMap. It
// ends with a result message, Answered.
package confirm

import (
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/editor/cells"
	"stackfit/ui/styles"
)

// KeyMap is the question's keys.
type KeyMap = keymap.ConfirmKeys

// DefaultKeyMap returns the question's built-in keys.
func DefaultKeyMap() KeyMap { return keymap.DefaultKeyMap().Confirm() }

// Answer is what the user chose.
type Answer uint8

// Answers.
const (
	Cancel Answer = iota // keep editing
	Yes
	No
	Reload // read the file again (offered only where it makes sense)
)

// Answered is the result of a question.
type Answered struct {
	Tag    any
	Answer Answer
}

// Model is an open question.
type Model struct {
	Question string
	Keys     KeyMap
	tag      any
	st       styles.Styles
}

// New asks question; reload says whether Reload is one of the answers.
func New(question string, reload bool, tag any, keys KeyMap, st styles.Styles) *Model {
	keys.Reload.SetEnabled(reload)
	return &Model{Question: question, Keys: keys, tag: tag, st: st}
}

// Update handles a key: an answer ends the question, other keys are
// ignored.
func (c *Model) Update(msg tea.Msg) (tea.Msg, tea.Cmd) {
	k, ok := msg.(tea.KeyMsg)
	if !ok {
		return nil, nil
	}
	switch {
	case key.Matches(k, c.Keys.Yes):
		return Answered{c.tag, Yes}, nil
	case key.Matches(k, c.Keys.No):
		return Answered{c.tag, No}, nil
	case key.Matches(k, c.Keys.Reload):
		return Answered{c.tag, Reload}, nil
	case key.Matches(k, c.Keys.Cancel):
		return Answered{c.tag, Cancel}, nil
	}
	return nil, nil
}

// View draws the question on one line of width cells.
func (c *Model) View(width int) string {
	return cells.Fit(c.st.Warning.Render(textsafe.Line(c.Question)), width)
}
