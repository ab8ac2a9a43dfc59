// Package prompt is the editor's one-line prompt at the foot of the
// screen (a quick-entry layer line, a file name, a factor): a component
// with New, Update, View and a KeyMap. The parent judges the line as it is
// typed (Check) and may offer completions (Complete); the prompt ends with
// a result message, Submitted or Cancelled. A submitted line the parent
// refuses stays open with the reason (Refuse), its text selected so that
// typing starts afresh.
package prompt

import (
	"strings"
	"unicode/utf8"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/editor/cells"
	"stackfit/ui/editor/field"
	"stackfit/ui/styles"
)

// KeyMap is the prompt's keys.
type KeyMap = keymap.PromptKeys

// DefaultKeyMap returns the prompt's built-in keys.
func DefaultKeyMap() KeyMap { return keymap.DefaultKeyMap().Prompt() }

// Check judges the line as typed: a hint to show, and whether it is an
// error.
type Check func(value string) (hint string, bad bool)

// Complete offers completions of the line: the line to put in its place
// ("" leaves it) and the candidates to list.
type Complete func(value string) (line string, candidates []string)

// Submitted is the result of accepting the line.
type Submitted struct {
	Tag   any
	Value string
}

// Cancelled is the result of leaving the prompt.
type Cancelled struct{ Tag any }

// Model is an open prompt.
type Model struct {
	Label    string
	Keys     KeyMap
	tag      any
	input    field.Model
	check    Check
	complete Complete
	hint     string
	bad      bool
	st       styles.Styles
}

// New returns a prompt holding value (selected); check and complete may be
// nil.
func New(label, value string, check Check, complete Complete, tag any, keys KeyMap, st styles.Styles) *Model {
	p := &Model{Label: label, Keys: keys, tag: tag, input: field.New(value, 512, utf8.RuneCountInString), check: check, complete: complete, st: st}
	p.input.Focus()
	p.validate()
	return p
}

// Tag returns what the parent gave New.
func (p *Model) Tag() any { return p.tag }

// Value returns the line.
func (p *Model) Value() string { return p.input.Value() }

// Hint returns the hint shown under the line and whether it is an error.
func (p *Model) Hint() (string, bool) { return p.hint, p.bad }

// Refuse shows why a submitted line was not taken and selects it, so the
// next key typed replaces it.
func (p *Model) Refuse(why string) {
	p.hint, p.bad = why, true
	p.input.Select()
}

func (p *Model) validate() {
	p.hint, p.bad = "", false
	if p.check != nil {
		p.hint, p.bad = p.check(p.input.Value())
	}
	if p.input.Selected() && !p.bad && p.hint == "" {
		p.hint = p.Keys.Accept.Help().Key + " keeps " + p.input.Value() + " · typing replaces it · " + p.Keys.Cancel.Help().Key + " cancels"
	}
}

// Update handles a key.
func (p *Model) Update(msg tea.Msg) (tea.Msg, tea.Cmd) {
	k, ok := msg.(tea.KeyMsg)
	if !ok {
		return nil, nil
	}
	switch {
	case key.Matches(k, p.Keys.Cancel):
		return Cancelled{p.tag}, nil
	case key.Matches(k, p.Keys.Accept):
		return Submitted{p.tag, strings.TrimSpace(p.input.Value())}, nil
	case p.complete != nil && key.Matches(k, p.Keys.Complete):
		line, cands := p.complete(p.input.Value())
		if line != "" {
			p.input.SetValue(line)
		}
		p.validate()
		if len(cands) > 1 {
			p.hint, p.bad = strings.Join(cands, "  "), false
		}
		return nil, nil
	}
	cmd := p.input.Update(k)
	p.validate()
	return nil, cmd
}

// View draws the prompt's two lines, width cells each: the label and the
// line, then the hint.
func (p *Model) View(width int) string {
	// The field itself is safe: the text input drops control characters
	// from what it is given or typed.
	line := p.st.Label.Render(textsafe.Line(p.Label)+": ") + p.input.View(p.st.Cursor, p.st.SelectMarks)
	hint := textsafe.Line(p.hint)
	if p.bad {
		hint = p.st.Error.Render(hint)
	} else {
		hint = p.st.Dim.Render(hint)
	}
	return cells.Fit(line, width) + "\n" + cells.Fit(hint, width)
}
