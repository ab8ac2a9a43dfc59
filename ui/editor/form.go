package editor

import (
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
)

// formField is one labelled text input.
type formField struct {
	key, help string
	input     entry
	err       string
	hidden    bool // does not apply to the values as they stand
}

// form edits a list of text fields. After every keystroke it hands all
// values to try, which applies them to a candidate, recomputes the preview
// and reports a message per field ("" when valid). Accept runs commit only
// when every field is valid.
type form struct {
	title  string
	fields []formField
	focus  int
	try    func(values []string) []string
	commit func(values []string) tea.Cmd
	// hide, when set, says which fields do not apply to the values as
	// they stand (a layer's round needs a relative width); they are not
	// shown and focus skips them.
	hide func(values []string) []bool
}

func newForm(title string, keys, helps, values []string) *form {
	f := &form{title: title}
	for i := range keys {
		f.fields = append(f.fields, formField{key: keys[i], help: helps[i], input: newEntry(values[i], 256)})
	}
	if len(f.fields) > 0 {
		f.fields[0].input.focus()
	}
	return f
}

func (f *form) values() []string {
	out := make([]string, len(f.fields))
	for i := range f.fields {
		out[i] = f.fields[i].input.Value()
	}
	return out
}

// check runs try and stores the per-field messages; it reports whether all
// values are valid.
func (f *form) check() bool {
	vals := f.values()
	errs := f.try(vals)
	var hidden []bool
	if f.hide != nil {
		hidden = f.hide(vals)
	}
	ok := true
	for i := range f.fields {
		f.fields[i].err = ""
		f.fields[i].hidden = i < len(hidden) && hidden[i] && i != f.focus
		if i < len(errs) && errs[i] != "" && !f.fields[i].hidden {
			f.fields[i].err = errs[i]
			ok = false
		}
	}
	return ok
}

func (f *form) setFocus(i int) {
	n := len(f.fields)
	if n == 0 {
		return
	}
	f.fields[f.focus].input.Blur()
	step := 1
	if i < f.focus {
		step = -1
	}
	i = (i%n + n) % n
	for k := 0; k < n && f.fields[i].hidden; k++ {
		i = ((i+step)%n + n) % n
	}
	f.focus = i
	f.fields[f.focus].input.focus()
}

// updateForm handles a key in a form.
func (m *Model) updateForm(msg tea.KeyMsg) tea.Cmd {
	f := m.form
	switch {
	case key.Matches(msg, m.keys.Cancel):
		m.closeForm("edit cancelled; nothing changed")
		return nil
	case key.Matches(msg, m.keys.Accept):
		if !f.check() {
			m.setStatus("fix the marked field first (or esc to cancel)", statusError)
			return nil
		}
		commit := f.commit
		vals := f.values()
		m.closeForm("")
		return commit(vals)
	case key.Matches(msg, m.keys.Next):
		f.setFocus(f.focus + 1)
		return nil
	case key.Matches(msg, m.keys.Prev):
		f.setFocus(f.focus - 1)
		return nil
	}
	cmd := f.fields[f.focus].input.update(msg)
	f.check()
	return cmd
}

func (m *Model) closeForm(status string) {
	m.form, m.preview = nil, nil
	m.mode = modeNormal
	if status != "" {
		m.setStatus(status, statusInfo)
	}
}

// analyzeQuick evaluates a candidate stack with everything but the width
// search (the preview must answer within a keystroke).
func (m *Model) analyzeQuick(s *engine.Stack) *engine.Analysis {
	an := &engine.Analysis{Stack: s, Training: s.Training, Assumptions: m.assume, Result: engine.Evaluate(s)}
	an.Result.Memory(s.Training, m.assume, &an.Memory)
	an.Fit = engine.SolveCapacity(an.Result, &an.Memory, s.Training)
	return an
}

// editLayer opens the form of the selected layer.
func (m *Model) editLayer() {
	cur := m.current()
	if cur == nil {
		m.setStatus("the stack is empty: add a layer with a or :", statusError)
		return
	}
	a, orig := cur.addr, *cur.layer
	fields := engine.FieldsFor(orig.Kind)
	keys, helps, vals := make([]string, len(fields)), make([]string, len(fields)), make([]string, len(fields))
	for i, fl := range fields {
		keys[i], helps[i], vals[i] = fl.Key, fl.Help, fl.Get(&orig)
	}
	build := func(values []string) (engine.Layer, []string) {
		l := orig
		errs := make([]string, len(fields))
		for i, fl := range fields {
			if err := fl.Set(&l, values[i]); err != nil {
				errs[i] = err.Error()
			}
		}
		return l.Normalized(), errs
	}
	f := newForm("edit "+engine.Summary(&orig), keys, helps, vals)
	f.hide = func(values []string) []bool {
		l, _ := build(values)
		out := make([]bool, len(fields))
		for i, fl := range fields {
			out[i] = fl.Applies != nil && !fl.Applies(&l)
		}
		return out
	}
	f.try = func(values []string) []string {
		l, errs := build(values)
		s := m.stack.Clone()
		if p := at(s, a); p != nil {
			*p = l
		}
		m.preview = m.analyzeQuick(s)
		return errs
	}
	f.commit = func(values []string) tea.Cmd {
		l, _ := build(values)
		return m.replaceLayer(a, l)
	}
	f.check()
	m.form, m.mode = f, modeForm
}

// editSettings opens the training-setup form.
func (m *Model) editSettings() {
	t0, st0 := m.stack.Training, m.stage
	specs := settingsSpecs()
	keys, helps, vals := make([]string, len(specs)), make([]string, len(specs)), make([]string, len(specs))
	for i, sp := range specs {
		keys[i], helps[i], vals[i] = sp.key, sp.help, sp.get(&t0, &st0)
	}
	build := func(values []string) (engine.Training, engine.StageOptions, []string) {
		t, so := t0, st0
		errs := make([]string, len(specs))
		for i, sp := range specs {
			if err := sp.set(&t, &so, values[i]); err != nil {
				errs[i] = err.Error()
			}
		}
		return t, so, errs
	}
	f := newForm("training setup and stage options", keys, helps, vals)
	f.try = func(values []string) []string {
		t, _, errs := build(values)
		s := m.stack.Clone()
		s.Training = t
		m.preview = m.analyzeQuick(s)
		return errs
	}
	f.commit = func(values []string) tea.Cmd {
		t, so, _ := build(values)
		m.stage = so
		if t == t0 {
			m.setStatus("stage options set", statusInfo)
			return nil
		}
		return m.change("changed the training setup", func(s *engine.Stack) (addr, error) {
			s.Training = t
			return nil, nil
		})
	}
	f.check()
	m.form, m.mode = f, modeForm
}
