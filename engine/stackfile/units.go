package stackfile

import (
	"slices"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// units reads the units: section, a mapping of unit name to its
// definition: params (a mapping of parameter name to default, ~ for none),
// layers and an optional note.
func (d *decoder) units(n *yaml.Node) []engine.Unit {
	pairs := d.mapping(n, "units", "units, each NAME: {params: {…}, layers: […]}")
	if len(pairs) > engine.MaxUnits {
		d.fail(n, "units", ErrRange, "defines %d units; the limit is %d", len(pairs), engine.MaxUnits)
		return nil
	}
	var out []engine.Unit
	for _, kv := range pairs {
		k, v := kv[0], kv[1]
		where := "unit " + k.Value
		if !engine.ValidName(k.Value) {
			d.fail(k, "units", ErrName, "%q is not a unit name; use letters, digits, '_' and '-', starting with a letter, at most %d characters", k.Value, MaxNameLen)
			continue
		}
		if slices.ContainsFunc(out, func(u engine.Unit) bool { return u.Name == k.Value }) {
			d.fail(k, "units", ErrName, "unit %q is defined twice", k.Value)
			continue
		}
		u := engine.Unit{Name: k.Value}
		d.unitLines[k.Value] = k.Line
		var haveLayers bool
		var body *yaml.Node
		for _, f := range d.mapping(v, where, "a unit: {params: {…}, layers: […]}") {
			switch f[0].Value {
			case "params":
				u.Params = d.unitParams(f[1], where+" → params")
			case "note":
				u.Note, _ = d.text(f[1], where+" → note", MaxNoteLen)
			case "layers":
				haveLayers, body = true, f[1]
			default:
				d.unknown(f[0], where, []string{"params", "layers", "note"})
			}
		}
		if !haveLayers {
			d.fail(k, where, ErrMissing, "needs layers; add the unit's layers under layers:")
			continue
		}
		d.unit = &u
		u.Body = d.layerList(body, where+" → layers", where+", layer ", 0)
		d.unit = nil
		out = append(out, u)
	}
	return out
}

// unitParams reads a unit's parameters: name → default (a value as the
// field takes it; ~ for a parameter every use must give).
func (d *decoder) unitParams(n *yaml.Node, where string) []engine.UnitParam {
	pairs := d.mapping(n, where, "parameters, each NAME: DEFAULT (~ for none)")
	if len(pairs) > engine.MaxUnitParams {
		d.fail(n, where, ErrRange, "declares %d parameters; the limit is %d", len(pairs), engine.MaxUnitParams)
		return nil
	}
	var out []engine.UnitParam
	for _, kv := range pairs {
		k, v := kv[0], kv[1]
		switch {
		case !engine.ValidName(k.Value):
			d.fail(k, where, ErrName, "%q is not a parameter name; use letters, digits, '_' and '-', starting with a letter", k.Value)
			continue
		case slices.Contains(engine.ReservedUseKeys, k.Value):
			d.fail(k, where, ErrName, "%q is a word a use of the unit already means (%s); name the parameter otherwise", k.Value, strings.Join(engine.ReservedUseKeys, ", "))
			continue
		case slices.ContainsFunc(out, func(p engine.UnitParam) bool { return p.Name == k.Value }):
			d.fail(k, where, ErrName, "parameter %q is declared twice", k.Value)
			continue
		}
		p := engine.UnitParam{Name: k.Value}
		if v = d.deref(v, where+" → "+k.Value); v == nil {
			continue
		}
		if v.Kind == yaml.ScalarNode && v.Tag == "!!null" {
			p.Required = true
		} else if text, ok := d.argText(v, where+" → "+k.Value); ok {
			if _, ref := engine.ParamRef(text); ref {
				d.fail(v, where+" → "+k.Value, ErrType, "a default cannot refer to a parameter; give a value")
				continue
			}
			p.Default = text
		}
		out = append(out, p)
	}
	return out
}

// argText reads a parameter's default or a use's argument as the text a
// form field takes: a scalar as written, a pair [h, w] as h×w.
func (d *decoder) argText(n *yaml.Node, where string) (string, bool) {
	if n.Kind == yaml.SequenceNode && len(n.Content) == 2 {
		// Zero is a padding's value; the field the value lands in checks
		// its own range when the use is expanded.
		if p, ok := d.pair(n, where, 0, engine.MaxSpatial); ok {
			return strconv.FormatInt(p.H, 10) + "x" + strconv.FormatInt(p.W, 10), true
		}
		return "", false
	}
	return d.text(n, where, 1<<10)
}

// use reads a use of a unit: {unit: NAME, PARAM: VALUE, …, repeat, name,
// note}. It is a block whose body ExpandUnits sets.
func (d *decoder) use(pairs [][2]*yaml.Node, label string) engine.Layer {
	l := engine.Layer{Kind: engine.KindBlock, Repeat: 1}
	for _, kv := range pairs {
		if kv[0].Value == "unit" {
			name, ok := d.text(kv[1], label+" (unit)", 1<<10)
			if ok && !engine.ValidName(name) {
				d.fail(kv[1], label+" (unit)", ErrName, "%q is not a unit name", name)
			}
			l.Unit = name
		}
	}
	where := label + " (unit " + l.Unit + ")"
	for _, kv := range pairs {
		k, v := kv[0], kv[1]
		switch k.Value {
		case "unit":
		case "name":
			if d.unit != nil {
				d.fail(k, where, ErrName, "a unit's layers cannot be named: every use would repeat the name; name the use of %s instead", d.unit.Name)
				continue
			}
			d.layerName(v, where, &l)
		case "note":
			l.Note, _ = d.text(v, where+" → note", MaxNoteLen)
		case "repeat":
			l.Repeat, _ = d.int(v, where+" → repeat", 1, engine.MaxRepeat)
		default:
			if v = d.deref(v, where); v == nil {
				continue
			}
			if slices.ContainsFunc(l.Args, func(a engine.Arg) bool { return a.Name == k.Value }) {
				d.fail(k, where, ErrUnknown, "argument %q is given twice", k.Value)
				continue
			}
			text, ok := d.argText(v, where+" → "+k.Value)
			if !ok {
				continue
			}
			if ref, isRef := engine.ParamRef(text); isRef && !d.hasParam(ref) {
				d.fail(v, where+" → "+k.Value, ErrUnknown, "%s refers to a unit parameter, and %s", text, d.noParam(ref))
				continue
			}
			l.Args = append(l.Args, engine.Arg{Name: k.Value, Value: text})
		}
	}
	return l
}

// hasParam reports whether the unit being read declares the parameter.
func (d *decoder) hasParam(name string) bool {
	return d.unit != nil && slices.ContainsFunc(d.unit.Params, func(p engine.UnitParam) bool { return p.Name == name })
}

// noParam says why a reference to name is refused.
func (d *decoder) noParam(name string) string {
	if d.unit == nil {
		return "only a unit's layers can refer to one"
	}
	var names []string
	for _, p := range d.unit.Params {
		names = append(names, p.Name)
	}
	return "unit " + d.unit.Name + " declares no " + name + " (its parameters: " + strings.Join(names, ", ") + ")"
}

// bind records that field key of l takes the unit's parameter ref, and
// sets the field from the parameter's default when it has one.
func (d *decoder) bind(n *yaml.Node, w, key, ref string, p *engine.Param, l *engine.Layer) {
	if !d.hasParam(ref) {
		d.fail(n, w, ErrUnknown, "$%s refers to a unit parameter, and %s", ref, d.noParam(ref))
		return
	}
	l.Binds = append(l.Binds, engine.Bind{Field: key, Param: ref})
	for _, q := range d.unit.Params {
		if q.Name != ref || q.Required {
			continue
		}
		v, err := p.Parse(q.Default)
		if err != nil {
			d.fail(n, w, ErrRange, "$%s's default %q does not suit this field: %s", ref, q.Default, engine.FieldWant(err))
			return
		}
		p.Set(l, v)
	}
}

// expand sets every use's body (engine.ExpandUnits); a use that cannot be
// expanded is reported with the unit's definition line.
func (d *decoder) expand(s *engine.Stack) {
	if err := engine.ExpandUnits(s); err != nil {
		ue, ok := err.(*engine.UnitError)
		if !ok {
			d.fail(nil, "units", ErrUnknown, "%v", err)
			return
		}
		e := &Error{Field: ue.Use, Msg: ue.Msg, Err: ErrUnknown}
		if ue.Unit != "" {
			e.Msg = "unit " + ue.Unit + ": " + ue.Msg
			if line := d.unitLines[ue.Unit]; line > 0 {
				e.Msg = "unit " + ue.Unit + " (line " + strconv.Itoa(line) + "): " + ue.Msg
			}
		}
		d.errs = append(d.errs, e)
	}
}

// unitsNode writes the units: section.
func unitsNode(us []engine.Unit) *yaml.Node {
	m := &yaml.Node{Kind: yaml.MappingNode}
	for i := range us {
		u := &us[i]
		def := &yaml.Node{Kind: yaml.MappingNode}
		if len(u.Params) > 0 {
			ps := &yaml.Node{Kind: yaml.MappingNode, Style: yaml.FlowStyle}
			for _, p := range u.Params {
				if p.Required {
					put(ps, p.Name, &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!null", Value: "~"})
				} else {
					put(ps, p.Name, argNode(p.Default))
				}
			}
			put(def, "params", ps)
		}
		if u.Note != "" {
			put(def, "note", strNode(u.Note))
		}
		put(def, "layers", layerSeq(u.Body))
		put(m, u.Name, def)
	}
	return m
}

// useNode writes a use: unit, its arguments, repeat, name and note.
func useNode(l *engine.Layer) *yaml.Node {
	m := &yaml.Node{Kind: yaml.MappingNode, Style: yaml.FlowStyle}
	put(m, "unit", strNode(l.Unit))
	for _, a := range l.Args {
		put(m, a.Name, argNode(a.Value))
	}
	if l.Repeat > 1 {
		put(m, "repeat", intNode(l.Repeat))
	}
	if l.Name != "" {
		put(m, "name", strNode(l.Name))
	}
	if l.Note != "" {
		put(m, "note", strNode(l.Note))
		m.Style = 0
	}
	return m
}

// argNode writes an argument's text: a whole number as a number, a
// height–width pair ("1x7", as argText reads [1, 7]) as [1, 7] (the
// text 0x3 would be a hexadecimal number to a YAML reader), anything else
// as text.
func argNode(text string) *yaml.Node {
	if _, err := strconv.ParseInt(text, 10, 64); err == nil {
		return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!int", Value: text}
	}
	if p, err := engine.ParsePair("", text, 0, engine.MaxSpatial); err == nil {
		return &yaml.Node{Kind: yaml.SequenceNode, Style: yaml.FlowStyle, Content: []*yaml.Node{intNode(p.H), intNode(p.W)}}
	}
	return strNode(text)
}

// boundNode returns the "$param" node of a bound field, or nil.
func boundNode(l *engine.Layer, key string) *yaml.Node {
	for _, b := range l.Binds {
		if b.Field == key {
			return strNode("$" + b.Param)
		}
	}
	return nil
}
