package engine

import (
	"fmt"
	"slices"
	"strings"
)

// Unit is a sub-stack a stack file defines once and uses by name wherever
// a layer or block may stand (a convolution–norm–activation triple, an
// inverted residual, an Inception module). Its body is ordinary layers;
// a field bound to one of its parameters (Layer.Binds) takes the use's
// argument, or the parameter's default.
type Unit struct {
	Name   string
	Note   string
	Params []UnitParam
	Body   []Layer
}

// UnitParam is one named parameter of a unit.
type UnitParam struct {
	Name string
	// Default is the value a use that leaves the parameter out gets,
	// written as a form field takes it ("64", "3x1", "depthwise").
	Default string
	// Required: the parameter has no default; every use must give it.
	Required bool
}

// Bind ties a field of a layer in a unit's body to a parameter: Field is
// the field's stack-file key (the kind's own key for its main value).
type Bind struct {
	Field, Param string
}

// Arg is one argument of a unit's use: a parameter's name and its value,
// written as a form field takes it. In a unit's body a value may itself be
// a reference to the enclosing unit's parameter ("$c").
type Arg struct {
	Name, Value string
}

// MaxUnits bounds a stack file's unit definitions, MaxUnitParams a unit's
// parameters.
const (
	MaxUnits      = 256
	MaxUnitParams = 32
	// MaxUnitLayers bounds the layers all uses expand to together: each
	// is a copy in memory (a stack file's own layers are bounded by its
	// size; repeats are not copied).
	MaxUnitLayers = 1 << 17
)

// ParamRef returns the parameter a value refers to ("$c" → "c").
func ParamRef(value string) (string, bool) {
	name, ok := strings.CutPrefix(value, "$")
	return name, ok && ValidName(name)
}

// ReservedUseKeys are the keys of a use that are not arguments.
var ReservedUseKeys = []string{"unit", "name", "note", "repeat"}

// UnitError is a unit that cannot be expanded: Use names the use (its
// path in the stack, or the unit and path for a use inside a definition),
// Unit the unit at fault ("" when the use names none).
type UnitError struct {
	Use, Unit string
	Msg       string
}

func (e *UnitError) Error() string {
	if e.Unit == "" {
		return e.Use + ": " + e.Msg
	}
	return fmt.Sprintf("%s: unit %s: %s", e.Use, e.Unit, e.Msg)
}

// UnitByName returns the stack's unit with that name.
func (s *Stack) UnitByName(name string) *Unit { return UnitIn(s.Units, name) }

// UnitIn returns the unit called name among us, or nil.
func UnitIn(us []Unit, name string) *Unit {
	for i := range us {
		if us[i].Name == name {
			return &us[i]
		}
	}
	return nil
}

// UnitNames lists the stack's units, in file order.
func (s *Stack) UnitNames() []string {
	out := make([]string, len(s.Units))
	for i := range s.Units {
		out[i] = s.Units[i].Name
	}
	return out
}

// ExpandUnits sets the body of every use in the stack (Layer.Unit set)
// from its unit: a copy of the unit's body with each bound field set from
// the use's argument (or the default), each value parsed by its own
// field's rules, nested uses expanded in turn. A use evaluates as a block
// (Repeat times, 1 by default). It returns the first use that cannot be
// expanded: an unknown unit or argument, a missing or bad value, a unit
// that uses itself.
func ExpandUnits(s *Stack) error {
	if len(s.Units) > MaxUnits {
		return &UnitError{Use: "units", Msg: fmt.Sprintf("%d units; the limit is %d", len(s.Units), MaxUnits)}
	}
	for i := range s.Units {
		u := &s.Units[i]
		for j, p := range u.Params {
			if slices.ContainsFunc(u.Params[:j], func(q UnitParam) bool { return q.Name == p.Name }) {
				return &UnitError{Use: "unit " + u.Name, Unit: u.Name, Msg: fmt.Sprintf("parameter %s is declared twice", p.Name)}
			}
		}
	}
	var e expander
	e.s = s
	return e.layers(s.Layers, nil, Path{})
}

// expander expands uses; stack holds the units being expanded, innermost
// last, to find a unit that uses itself.
type expander struct {
	s     *Stack
	stack []string
	made  int // layers copied into expansions so far (bounded by MaxUnitLayers)
}

func (e *expander) layers(ls []Layer, args []Arg, parent Path) error {
	for i := range ls {
		l := &ls[i]
		p := parent
		p.push(i + 1)
		if l.Unit != "" {
			if err := e.use(l, args, p); err != nil {
				return err
			}
			continue
		}
		if l.Body != nil {
			if err := e.layers(l.Body, args, p); err != nil {
				return err
			}
		}
	}
	return nil
}

// use expands one use; outer are the arguments of the unit whose body
// holds it (nil at the top level), for its own "$name" arguments.
func (e *expander) use(l *Layer, outer []Arg, p Path) error {
	label := "layer " + p.String()
	if len(e.stack) > 0 {
		label = "unit " + e.stack[len(e.stack)-1] + ", layer " + p.String()
	}
	u := e.s.UnitByName(l.Unit)
	if u == nil {
		msg := fmt.Sprintf("no unit is named %q", l.Unit)
		if hint := Suggest(l.Unit, e.s.UnitNames()); hint != "" {
			msg += fmt.Sprintf("; did you mean %q?", hint)
		} else if len(e.s.Units) > 0 {
			msg += " (units: " + strings.Join(e.s.UnitNames(), ", ") + ")"
		} else {
			msg += "; define it under units: at the top of the file"
		}
		return &UnitError{Use: label, Msg: msg}
	}
	fail := func(format string, a ...any) error {
		return &UnitError{Use: label, Unit: u.Name, Msg: fmt.Sprintf(format, a...)}
	}
	if slices.Contains(e.stack, u.Name) {
		return fail("uses itself (through %s); a unit cannot contain itself", strings.Join(append(slices.Clone(e.stack), u.Name), " → "))
	}
	if len(e.stack) >= MaxBlockDepth {
		return fail("units nest %d deep here; the limit is %d", len(e.stack)+1, MaxBlockDepth)
	}
	// the use's values, parameter by parameter: its argument (resolved
	// against the enclosing unit's), else the default
	values := make([]Arg, 0, len(u.Params))
	for _, a := range l.Args {
		if !slices.ContainsFunc(u.Params, func(q UnitParam) bool { return q.Name == a.Name }) {
			msg := fmt.Sprintf("has no parameter %q", a.Name)
			if hint := Suggest(a.Name, paramNames(u)); hint != "" {
				msg += fmt.Sprintf("; did you mean %q?", hint)
			}
			return fail("%s (its parameters: %s)", msg, strings.Join(paramNames(u), ", "))
		}
	}
	var resolved []Arg // the use's own arguments, references replaced
	for _, q := range u.Params {
		v, given := ArgValue(l.Args, q.Name)
		if given {
			if ref, ok := ParamRef(v); ok {
				if v, given = ArgValue(outer, ref); !given {
					return fail("argument %s refers to $%s, which the enclosing unit does not pass", q.Name, ref)
				}
			}
			resolved = append(resolved, Arg{q.Name, v})
		}
		if !given {
			if q.Required {
				return fail("needs %s (it has no default); add %s: VALUE to the use", q.Name, q.Name)
			}
			v = q.Default
		}
		values = append(values, Arg{q.Name, v})
	}
	if e.made += countLayers(u.Body); e.made > MaxUnitLayers {
		return fail("the uses expand to more than %d layers; use fewer or smaller units", MaxUnitLayers)
	}
	body := CloneLayers(u.Body)
	e.stack = append(e.stack, u.Name)
	defer func() { e.stack = e.stack[:len(e.stack)-1] }()
	if err := e.bind(body, values, u, label); err != nil {
		return err
	}
	if err := e.layers(body, values, Path{}); err != nil {
		return err
	}
	l.Kind = KindBlock
	l.Repeat = max(l.Repeat, 1)
	l.Body = body
	if outer != nil {
		l.Args = resolved // a use inside an expansion shows its values
	}
	return nil
}

// bind sets every bound field of ls (bodies included, uses' arguments
// resolved) from values, and clears the bindings.
func (e *expander) bind(ls []Layer, values []Arg, u *Unit, label string) error {
	for i := range ls {
		l := &ls[i]
		for _, b := range l.Binds {
			v, ok := ArgValue(values, b.Param)
			if !ok {
				return &UnitError{Use: label, Unit: u.Name,
					Msg: fmt.Sprintf("its field %s refers to $%s, which is not one of its parameters", b.Field, b.Param)}
			}
			p := FieldParam(l.Kind, b.Field)
			if p == nil {
				return &UnitError{Use: label, Unit: u.Name, Msg: fmt.Sprintf("%s has no field %s", l.Kind, b.Field)}
			}
			val, err := p.Parse(v)
			if err != nil {
				return &UnitError{Use: label, Unit: u.Name,
					Msg: fmt.Sprintf("%s = %q does not suit the %s's %s: %s", b.Param, v, l.Kind, p.Key, FieldWant(err))}
			}
			p.Set(l, val)
		}
		l.Binds = nil
		*l = l.Normalized()
		if l.Unit == "" && l.Body != nil {
			if err := e.bind(l.Body, values, u, label); err != nil {
				return err
			}
		}
	}
	return nil
}

// FieldParam returns the description of a kind's field by its stack-file
// key (the kind's own key for its main value), or nil.
func FieldParam(k Kind, key string) *Param {
	sp := SpecOf(k)
	if key == sp.Key {
		return sp.Main
	}
	for i := range sp.Params {
		if sp.Params[i].Key == key {
			return &sp.Params[i]
		}
	}
	return nil
}

// FieldWant is what a refused field value should have been.
func FieldWant(err error) string {
	if fe, ok := err.(*FieldError); ok && fe.Want != "" {
		return fe.Want
	}
	return err.Error()
}

// ArgValue returns the value of a use's argument by name.
func ArgValue(args []Arg, name string) (string, bool) {
	for _, a := range args {
		if a.Name == name {
			return a.Value, true
		}
	}
	return "", false
}

func paramNames(u *Unit) []string {
	out := make([]string, len(u.Params))
	for i, p := range u.Params {
		out[i] = p.Name
	}
	return out
}

// Inline returns a copy of the stack with every use written out: each
// becomes a block (the same name, note and repeat) holding its expansion,
// and the stack has no units. It evaluates to the same rows.
func Inline(s *Stack) *Stack {
	c := s.Clone()
	c.Units = nil
	inlineLayers(c.Layers)
	return c
}

func inlineLayers(ls []Layer) {
	for i := range ls {
		ls[i].Unit, ls[i].Args = "", nil
		inlineLayers(ls[i].Body)
	}
}

// CloneUnits deep-copies a stack's units.
func CloneUnits(us []Unit) []Unit {
	if us == nil {
		return nil
	}
	out := slices.Clone(us)
	for i := range out {
		out[i].Params = slices.Clone(us[i].Params)
		out[i].Body = CloneLayers(us[i].Body)
	}
	return out
}

// EditThroughUse turns a change made to a use's rows into a change of
// its unit, so that a unit is edited once for every use: fresh is the
// use's expansion before the change, edited the expansion changed. A field
// bound to a parameter sets the use's argument (this use only); any other
// field changes the unit's layer, so every use follows. A change inside a
// nested use goes the same way one level down: a field bound to the
// nested unit's parameter sets the nested use's argument — which, when it
// passes the enclosing unit's parameter on ($c), sets that parameter's
// argument instead — and any other field changes the nested unit. Layers
// added, removed, moved or renamed inside a use are refused with the
// reason; s and use are then unchanged.
func EditThroughUse(s *Stack, use *Layer, fresh, edited []Layer) error {
	if s.UnitByName(use.Unit) == nil {
		return fmt.Errorf("no unit is named %q", use.Unit)
	}
	lf := &lifter{s: s, bodies: map[string][]Layer{}}
	args := slices.Clone(use.Args)
	if err := lf.lift(lf.body(use.Unit), fresh, edited, &args, use.Unit, 0); err != nil {
		return err
	}
	for name, b := range lf.bodies {
		s.UnitByName(name).Body = b
	}
	use.Args = args
	return nil
}

// lifter carries an edit of expanded rows into the units: the bodies of
// the units it changes, committed when the whole edit can be carried.
type lifter struct {
	s      *Stack
	bodies map[string][]Layer
}

// body is the changeable copy of a unit's body.
func (lf *lifter) body(name string) []Layer {
	if b, ok := lf.bodies[name]; ok {
		return b
	}
	b := CloneLayers(lf.s.UnitByName(name).Body)
	lf.bodies[name] = b
	return b
}

func (lf *lifter) lift(tmpl, fresh, edited []Layer, args *[]Arg, unit string, depth int) error {
	if len(tmpl) != len(fresh) || len(fresh) != len(edited) {
		return fmt.Errorf("unit %s: adding, removing or moving layers of a use changes the unit's structure; edit the units: section of the file, or make the use a block of its own", unit)
	}
	for i := range tmpl {
		t, f, e := &tmpl[i], &fresh[i], &edited[i]
		if t.Unit != "" {
			if err := lf.nested(t, f, e, args, unit, depth); err != nil {
				return err
			}
			continue
		}
		if f.Kind != e.Kind || f.Name != e.Name || f.Note != e.Note {
			return fmt.Errorf("unit %s: a layer of a use keeps its kind, name and note; edit the unit in the file", unit)
		}
		sp := SpecOf(f.Kind)
		params := make([]*Param, 0, len(sp.Params)+1)
		if sp.Main != nil {
			params = append(params, sp.Main)
		}
		for j := range sp.Params {
			params = append(params, &sp.Params[j])
		}
		for _, p := range params {
			vf, ve := p.Get(f), p.Get(e)
			if vf == ve {
				continue
			}
			key := p.Key
			if p == sp.Main {
				key = sp.Key
			}
			if b := slices.IndexFunc(t.Binds, func(b Bind) bool { return b.Field == key }); b >= 0 {
				setArg(args, t.Binds[b].Param, p.Text(ve))
				continue
			}
			p.Set(t, ve)
		}
		*t = t.Normalized()
		if err := lf.lift(t.Body, f.Body, e.Body, args, unit, depth); err != nil {
			return err
		}
	}
	return nil
}

// nested carries a change of a nested use's rows (t in the enclosing
// unit's body, f and e its expansion before and after) into its unit and
// its arguments.
func (lf *lifter) nested(t, f, e *Layer, args *[]Arg, unit string, depth int) error {
	if f.Repeat != e.Repeat || f.Name != e.Name || f.Note != e.Note || f.Kind != e.Kind {
		return fmt.Errorf("unit %s: that row is its use of unit %s, whose repeat, name and note the unit's text sets; edit the units: section of the file", unit, t.Unit)
	}
	if EqualLayers(f.Body, e.Body) {
		return nil
	}
	if depth >= MaxBlockDepth || lf.s.UnitByName(t.Unit) == nil {
		return fmt.Errorf("unit %s: its use of unit %s cannot be changed from here; edit the units: section of the file", unit, t.Unit)
	}
	var inner []Arg
	if err := lf.lift(lf.body(t.Unit), f.Body, e.Body, &inner, t.Unit, depth+1); err != nil {
		return err
	}
	for _, a := range inner {
		if v, given := ArgValue(t.Args, a.Name); given {
			if ref, isRef := ParamRef(v); isRef {
				setArg(args, ref, a.Value) // the enclosing unit's parameter, passed on
				continue
			}
		}
		setArg(&t.Args, a.Name, a.Value) // written in the enclosing unit: every use follows
	}
	return nil
}

// setArg sets (or adds) the argument name.
func setArg(args *[]Arg, name, value string) {
	for i := range *args {
		if (*args)[i].Name == name {
			(*args)[i].Value = value
			return
		}
	}
	*args = append(*args, Arg{name, value})
}
