// Package form is the editor's form: labelled text fields checked as they
// are typed. It is a component in the style of bubbles: New, Update, View
// and a KeyMap. A form never decides what its values mean: after every key
// it hands all values to the parent's Check, which reports a message per
// field and which fields do not apply, and it ends with a result message
// (Submitted or Cancelled) that the parent acts on.
package form

import (
	"fmt"
	"strings"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/editor/cells"
	"stackfit/ui/editor/field"
	"stackfit/ui/styles"
)

// KeyMap is the form's keys.
type KeyMap = keymap.FormKeys

// DefaultKeyMap returns the form's built-in keys.
func DefaultKeyMap() KeyMap { return keymap.DefaultKeyMap().Form() }

// Field describes one field: its key, a help text, its first value, and
// the most its value may hold.
type Field struct {
	Key, Help, Value string
	// Limit is the most the value may measure (the limit the stack file
	// has for it); 0: no limit of the form's own (Check judges the value).
	// An edit past it is refused, not cut; the first value is never cut.
	Limit int
	// Measure measures a value against Limit; nil counts bytes.
	Measure func(string) int
}

// Check judges all values as they stand: a message per invalid field (""
// or a short slice when valid) and which fields do not apply (hidden; they
// are not shown and focus skips them).
type Check func(values []string) (errs []string, hidden []bool)

// Submitted is the result of accepting a form whose every field is valid.
type Submitted struct {
	Tag    any // what the parent gave New
	Values []string
}

// Cancelled is the result of leaving a form without accepting it.
type Cancelled struct{ Tag any }

type row struct {
	Field
	input  field.Model
	err    string
	hidden bool
	edited bool // the value was changed; until then Values gives Field.Value as it came
}

// Model is an open form.
type Model struct {
	Title  string
	KeyMap KeyMap
	tag    any
	rows   []row
	focus  int
	check  Check
	st     styles.Styles
	notice string // why accept was refused
}

// New returns a form of fields, its first field focused; tag comes back in
// its result.
func New(title string, fields []Field, check Check, tag any, keys KeyMap, st styles.Styles) *Model {
	f := &Model{Title: title, KeyMap: keys, tag: tag, check: check, st: st}
	for _, fl := range fields {
		f.rows = append(f.rows, row{Field: fl, input: field.New(fl.Value, fl.Limit, fl.Measure)})
	}
	if len(f.rows) > 0 {
		f.rows[0].input.Focus()
	}
	f.validate()
	return f
}

// Values returns the fields' text, in order. A field the user has not
// changed gives its first value exactly as it came (the text field shows
// line breaks and tabs as spaces), so accepting a form never rewrites a
// value nobody touched.
func (f *Model) Values() []string {
	out := make([]string, len(f.rows))
	for i := range f.rows {
		out[i] = f.rows[i].Value
		if f.rows[i].edited {
			out[i] = f.rows[i].input.Value()
		}
	}
	return out
}

// Keys returns the fields' keys, in order.
func (f *Model) Keys() []string {
	out := make([]string, len(f.rows))
	for i := range f.rows {
		out[i] = f.rows[i].Key
	}
	return out
}

// Focused returns the index of the field with the cursor.
func (f *Model) Focused() int { return f.focus }

// Errors returns each field's message ("" when valid or hidden).
func (f *Model) Errors() []string {
	out := make([]string, len(f.rows))
	for i := range f.rows {
		out[i] = f.rows[i].err
	}
	return out
}

// validate runs Check and stores the messages; it reports whether every
// shown field is valid.
func (f *Model) validate() bool {
	if f.check == nil {
		return true
	}
	errs, hidden := f.check(f.Values())
	ok := true
	for i := range f.rows {
		r := &f.rows[i]
		r.err = ""
		r.hidden = i < len(hidden) && hidden[i] && i != f.focus
		if i < len(errs) && errs[i] != "" && !r.hidden {
			r.err = errs[i]
			ok = false
		}
	}
	return ok
}

func (f *Model) setFocus(i int) {
	n := len(f.rows)
	if n == 0 {
		return
	}
	f.rows[f.focus].input.Blur()
	step := 1
	if i < f.focus {
		step = -1
	}
	i = (i%n + n) % n
	for k := 0; k < n && f.rows[i].hidden; k++ {
		i = ((i+step)%n + n) % n
	}
	f.focus = i
	f.rows[f.focus].input.Focus()
}

// Update handles a key. Accept with every field valid gives Submitted,
// Cancel gives Cancelled; any other key edits the focused field.
func (f *Model) Update(msg tea.Msg) (tea.Msg, tea.Cmd) {
	k, ok := msg.(tea.KeyMsg)
	if !ok {
		return nil, nil
	}
	f.notice = ""
	switch {
	case key.Matches(k, f.KeyMap.Cancel):
		return Cancelled{f.tag}, nil
	case key.Matches(k, f.KeyMap.Accept):
		if !f.validate() {
			f.notice = "fix the field marked ✗ first, or " + f.KeyMap.Cancel.Help().Key + " to leave it"
			return nil, nil
		}
		return Submitted{f.tag, f.Values()}, nil
	case key.Matches(k, f.KeyMap.Next):
		f.setFocus(f.focus + 1)
		return nil, nil
	case key.Matches(k, f.KeyMap.Prev):
		f.setFocus(f.focus - 1)
		return nil, nil
	}
	if len(f.rows) == 0 {
		return nil, nil
	}
	r := &f.rows[f.focus]
	before := r.input.Value()
	cmd := r.input.Update(k)
	if r.input.Refused() {
		f.notice = fmt.Sprintf("%s holds at most %d bytes; that would make it longer, so nothing was added — shorten it first", r.Key, r.Limit)
		return nil, nil
	}
	r.edited = r.edited || r.input.Value() != before
	f.validate()
	return nil, cmd
}

// View draws the form in width × height cells: the title, then the fields
// that apply, scrolled to keep the focused one in view.
func (f *Model) View(width, height int) string {
	title := f.st.Label.Render(textsafe.Line(f.Title)) + f.st.Dim.Render("  — numbers below follow as you type")
	if f.notice != "" {
		title = f.st.Error.Render(textsafe.Line(f.notice)) // names a key of the keys file
	}
	lines := []string{title}
	labelW := 0
	var shown []int
	at := 0
	for i := range f.rows {
		if f.rows[i].hidden {
			continue
		}
		labelW = max(labelW, len(f.rows[i].Key))
		if i == f.focus {
			at = len(shown)
		}
		shown = append(shown, i)
	}
	first := 0
	if per := height - 1; at >= per {
		first = at - per + 1
	}
	for _, i := range shown[min(first, len(shown)):] {
		if len(lines) >= height {
			break
		}
		r := &f.rows[i]
		mark := "  "
		if i == f.focus {
			mark = "▸ "
		}
		note := f.st.Dim.Render(r.Help)
		if r.err != "" {
			note = f.st.Error.Render("✗ " + textsafe.Line(r.err))
		}
		line := mark + f.st.Label.Render(cells.Fit(r.Key, labelW)) + "  " + cells.Fit(r.input.View(f.st.Cursor, f.st.SelectMarks), 18) + "  "
		if i != f.focus || r.err == "" || cells.Width(line+note) <= width {
			lines = append(lines, line+note)
		} else {
			// The focused field's message whole, under it: the fix is
			// at its end.
			lines = append(lines, line+f.st.Error.Render("✗"))
			indent := cells.Width(line)
			for _, l := range strings.Split(ansi.Wrap(textsafe.Line(r.err), max(width-indent, 20), " "), "\n") {
				lines = append(lines, strings.Repeat(" ", indent)+f.st.Error.Render(l))
			}
		}
	}
	return cells.Block(lines, height, width)
}
