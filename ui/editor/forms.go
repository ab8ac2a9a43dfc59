package editor

import (
	"fmt"
	"slices"
	"strconv"
	"strings"

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
	// The form shows what the layer computes with: a field the layer
	// leaves to the stack's defaults shows the default, and stays
	// unwritten unless it is changed.
	shown := m.stack.Defaults.Resolve(&orig)
	for i, fl := range fields {
		ff[i] = form.Field{Key: fl.Key, Help: fl.Help, Value: fl.Get(&shown), Limit: fl.Limit}
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
	if cur.layer.Unit != "" {
		m.useForm("use of unit "+cur.layer.Unit, *cur.layer,
			func(s *engine.Stack, l engine.Layer) {
				if p := at(s, a); p != nil {
					*p = l
				}
			},
			func(l engine.Layer) tea.Cmd { return m.replaceLayer(a, l) })
		return
	}
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

// useForm opens the arguments of a use of a unit: one field per
// parameter (empty: the unit's default), then the repeat count; place
// puts a candidate use into a copy of the stack (for the preview) and
// commit applies the accepted one. The preview expands the use as the
// values stand; a value the unit's field refuses is reported on its
// parameter.
func (m *Model) useForm(title string, orig engine.Layer, place func(s *engine.Stack, l engine.Layer), commit func(l engine.Layer) tea.Cmd) {
	u := m.stack.UnitByName(orig.Unit)
	if u == nil {
		m.setStatus(fmt.Sprintf("no unit is named %q", orig.Unit), statusError)
		return
	}
	params := u.Params
	ff := make([]form.Field, 0, len(params)+1)
	for _, p := range params {
		help := "required"
		if !p.Required {
			help = "empty: the unit's default, " + p.Default
		}
		v := ""
		for _, arg := range orig.Args {
			if arg.Name == p.Name {
				v = arg.Value
			}
		}
		ff = append(ff, form.Field{Key: p.Name, Help: help, Value: v, Limit: 1 << 10})
	}
	ff = append(ff, form.Field{Key: "repeat", Help: "times the unit runs, 1 to " + strconv.Itoa(engine.MaxRepeat), Value: strconv.FormatInt(max(orig.Repeat, 1), 10), Limit: 8})
	// build returns the use the values give and the stack with it placed
	// and expanded (nil with errors).
	build := func(values []string) (engine.Layer, *engine.Stack, []string) {
		l := orig
		l.Args, l.Body = nil, nil
		errs := make([]string, len(ff))
		for i, p := range params {
			if v := strings.TrimSpace(values[i]); v != "" {
				l.Args = append(l.Args, engine.Arg{Name: p.Name, Value: v})
			}
		}
		n, err := engine.ParseInt("repeat", values[len(params)], 1, engine.MaxRepeat)
		if err != nil {
			errs[len(params)] = err.Error()
			return l, nil, errs
		}
		l.Repeat = n
		s := m.stack.Clone()
		place(s, l)
		if err := expandUses(s); err != nil {
			i := slices.IndexFunc(params, func(p engine.UnitParam) bool { return strings.Contains(err.Error(), p.Name+" ") })
			errs[max(i, 0)] = err.Error()
			return l, nil, errs
		}
		return l, s, errs
	}
	check := func(values []string) ([]string, []bool) {
		_, s, errs := build(values)
		if s == nil {
			s = m.stack
		}
		m.preview, m.previewBlocked = m.analyzeQuick(s), anyText(errs)
		return errs, make([]bool, len(ff))
	}
	m.openForm(title, ff, check, formJob{
		commit: func(values []string) tea.Cmd {
			l, _, _ := build(values)
			return commit(l) // expanded by the change, from the arguments
		},
		cancelled: "nothing changed",
	})
}

// addUse adds a use of the unit below the selection, through its form
// (a unit with a required parameter needs a value first).
func (m *Model) addUse(unit string) tea.Cmd {
	if err := m.tree.addable(); err != nil {
		return m.apply(edit{}, err)
	}
	l := engine.Layer{Kind: engine.KindBlock, Repeat: 1, Unit: unit}
	m.useForm("add a use of unit "+unit, l,
		func(s *engine.Stack, l engine.Layer) { _, _ = m.tree.placeAfter(s, l) },
		func(l engine.Layer) tea.Cmd { return m.insertAfter(l, "added "+engine.Summary(&l)) })
	return nil
}
