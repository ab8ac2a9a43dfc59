package editor

import (
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/ui/editor/form"
)

// analyzeQuick evaluates a candidate stack with everything but the width
// search (the preview must answer within a keystroke).
func (m *Model) analyzeQuick(s *engine.Stack) *engine.Analysis {
	an := &engine.Analysis{Stack: s, Training: s.Training, Assumptions: m.nums.assume, Result: engine.Evaluate(s)}
	an.Result.Memory(s.Training, m.nums.assume, &an.Memory)
	an.Fit = engine.SolveCapacity(an.Result, &an.Memory, s.Training)
	if d, ok := s.Training.Device(); ok {
		an.Time = new(engine.Time)
		an.Result.Time(s.Training, d, s.Training.Efficiencies(), an.Time)
	}
	return an
}

// layerForm opens the fields of layer orig; place puts a candidate layer
// into a copy of the stack (for the preview) and commit applies the
// accepted one.
func (m *Model) layerForm(title string, orig engine.Layer, place func(s *engine.Stack, l engine.Layer), commit func(l engine.Layer) tea.Cmd, cancelled string) {
	fields := engine.FieldsFor(orig.Kind)
	ff := make([]form.Field, len(fields))
	for i, fl := range fields {
		ff[i] = form.Field{Key: fl.Key, Help: fl.Help, Value: fl.Get(&orig), Limit: fl.Limit}
	}
	build := func(values []string) (engine.Layer, []string) {
		l := orig
		errs := make([]string, len(fields))
		for i, fl := range fields {
			if values[i] == ff[i].Value {
				continue // untouched: the layer keeps it as it is
			}
			if err := fl.Set(&l, values[i]); err != nil {
				errs[i] = err.Error()
			}
		}
		return l.Normalized(), errs
	}
	check := func(values []string) ([]string, []bool) {
		l, errs := build(values)
		hidden := make([]bool, len(fields))
		for i, fl := range fields {
			hidden[i] = fl.Applies != nil && !fl.Applies(&l)
		}
		s := m.stack.Clone()
		place(s, l)
		m.preview, m.previewBlocked = m.analyzeQuick(s), anyText(errs)
		return errs, hidden
	}
	m.openForm(title, ff, check, formJob{
		commit:    func(values []string) tea.Cmd { l, _ := build(values); return commit(l) },
		cancelled: cancelled,
	})
}

// editLayer opens the form of the selected layer.
func (m *Model) editLayer() {
	cur, err := m.tree.editable()
	if err != nil {
		m.setStatus(err.Error(), statusError)
		return
	}
	a := cur.addr
	m.layerForm("edit "+engine.Summary(cur.layer), *cur.layer,
		func(s *engine.Stack, l engine.Layer) {
			if p := at(s, a); p != nil {
				*p = l
			}
		},
		func(l engine.Layer) tea.Cmd { return m.replaceLayer(a, l) },
		"edit cancelled; nothing changed")
}

// addKind adds a layer of kind k below the selection: a kind with fields
// opens its form first, and the layer is added only when the form is
// accepted (esc adds nothing).
func (m *Model) addKind(k engine.Kind) tea.Cmd {
	if err := m.tree.addable(); err != nil {
		m.setStatus(err.Error(), statusError)
		return nil
	}
	l := newLayer(k, m.channelsAt())
	if sp := engine.SpecOf(k); sp.Main == nil && len(sp.Params) == 0 {
		return m.insertAfter(l, "added "+k.String())
	}
	m.layerForm("add "+engine.Summary(&l), l,
		func(s *engine.Stack, l engine.Layer) { m.tree.placeAfter(s, l) },
		func(l engine.Layer) tea.Cmd { return m.insertAfter(l, "added "+engine.Summary(&l)) },
		"nothing added")
	return nil
}

// anyText reports whether some message is set.
func anyText(msgs []string) bool {
	for _, s := range msgs {
		if s != "" {
			return true
		}
	}
	return false
}
