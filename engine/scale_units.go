package engine

import "strconv"

// A width scaling of a stack written with units must reach the file, which
// keeps the units and their uses, not their expansions. ScaleWidth scales
// the expansions (each layer rounded to its own step, the last weighted
// layer kept); carryWidths then reads the new widths back out of them into
// what the file writes: a unit's literal widths (and a nested use's
// literal arguments) from its expansions, each use's arguments for the
// parameters that end in a width, and those parameters' defaults. The
// result is kept only when it expands to exactly the scaled widths;
// otherwise (a unit whose uses would need different literal widths, such
// as the last layer's fixed width inside a unit used twice) the stack is
// written out without units (Inline), which is always exact.

// UnitsWrittenOut says why after, a scaled copy of before, has lost the
// units before had: ScaleWidth writes a stack out where a unit cannot
// hold the new widths. ok is false when nothing was written out.
func UnitsWrittenOut(before, after *Stack) (why string, ok bool) {
	if len(before.Units) == 0 || len(after.Units) > 0 {
		return "", false
	}
	return "the units are written out: a unit's widths cannot scale the same in every use", true
}

// widthKind reports whether a kind's main value is a width that ScaleWidth
// scales.
func widthKind(k Kind) bool {
	return k == KindConv || k == KindDeconv || k == KindDense
}

// widthArg is a width a use's parameter must take: read from the use's
// scaled expansion.
type widthArg struct {
	use          *Layer
	param, value string
}

// widthLift reads scaled widths out of expansions into a stack's units.
type widthLift struct {
	s       *Stack
	pending []widthArg
	failed  bool
}

// carryWidths returns scaled (a stack whose expansions ScaleWidth scaled
// by factor, rounding to multiples of m) with the scaling carried into its
// units and uses, or scaled written out without units when they cannot
// carry it exactly.
func carryWidths(scaled *Stack, factor float64, m int64) *Stack {
	cand := scaled.Clone()
	w := &widthLift{s: cand}
	w.uses(cand.Layers)
	if w.failed {
		return Inline(scaled)
	}
	// The defaults of the parameters that are widths scale as a layer's
	// width does; a use that needs another value (a grouped layer's
	// rounding) says so.
	widths := map[*Unit]map[string]bool{}
	for _, a := range w.pending {
		u := cand.UnitByName(a.use.Unit)
		if widths[u] == nil {
			widths[u] = map[string]bool{}
		}
		widths[u][a.param] = true
	}
	for u, params := range widths {
		for j := range u.Params {
			p := &u.Params[j]
			if n, err := strconv.ParseInt(p.Default, 10, 64); params[p.Name] && !p.Required && err == nil && n > 0 {
				p.Default = strconv.FormatInt(ScaleChannels(n, factor, m), 10)
			}
		}
	}
	for _, a := range w.pending {
		if v, given := ArgValue(a.use.Args, a.param); given {
			if _, isRef := ParamRef(v); !isRef {
				setArg(&a.use.Args, a.param, a.value)
			}
			continue
		}
		if u := cand.UnitByName(a.use.Unit); paramDefault(u, a.param) != a.value {
			a.use.Args = append(a.use.Args, Arg{a.param, a.value})
		}
	}
	if ExpandUnits(cand) != nil || !sameWidths(cand.Layers, scaled.Layers) {
		return Inline(scaled)
	}
	return cand
}

// paramDefault is a unit parameter's default ("" when it has none).
func paramDefault(u *Unit, name string) string {
	for _, p := range u.Params {
		if p.Name == name {
			return p.Default
		}
	}
	return ""
}

// uses lifts every use among ls (the stack's own layers and bodies).
func (w *widthLift) uses(ls []Layer) {
	for i := range ls {
		l := &ls[i]
		if l.Unit == "" {
			w.uses(l.Body)
			continue
		}
		w.use(l)
	}
}

// use lifts one use: its unit's literal widths and the widths its
// parameters must take, from its expansion.
func (w *widthLift) use(l *Layer) {
	u := w.s.UnitByName(l.Unit)
	if u == nil {
		w.failed = true
		return
	}
	vals := map[string]string{}
	w.lift(u.Body, l.Body, vals)
	for p, v := range vals {
		w.pending = append(w.pending, widthArg{l, p, v})
	}
}

// lift walks a unit's body tmpl beside one expansion of it, exp: a
// literal width takes the expansion's, a width bound to a parameter gives
// that parameter's value in vals, and a nested use is lifted in turn (its
// parameters passed on as $p give the enclosing parameter's value).
func (w *widthLift) lift(tmpl, exp []Layer, vals map[string]string) {
	if len(tmpl) != len(exp) {
		w.failed = true
		return
	}
	for i := range tmpl {
		t, e := &tmpl[i], &exp[i]
		if t.Unit != "" {
			inner := map[string]string{}
			u := w.s.UnitByName(t.Unit)
			if u == nil {
				w.failed = true
				return
			}
			w.lift(u.Body, e.Body, inner)
			for q, v := range inner {
				if a, given := ArgValue(t.Args, q); given {
					if ref, isRef := ParamRef(a); isRef {
						w.value(vals, ref, v)
						continue
					}
				}
				w.pending = append(w.pending, widthArg{t, q, v})
			}
			continue
		}
		if widthKind(t.Kind) && t.Rel.IsZero() && e.Filters > 0 {
			if p, bound := boundTo(t, SpecOf(t.Kind).Key); bound {
				w.value(vals, p, strconv.FormatInt(e.Filters, 10))
			} else {
				t.Filters = e.Filters
			}
		}
		if t.Kind == KindReshape {
			t.Target = e.Target // a dense layer's reshape scales with it
		}
		w.lift(t.Body, e.Body, vals)
	}
}

// value records a parameter's width; two different widths for one
// parameter in one use cannot be written.
func (w *widthLift) value(vals map[string]string, p, v string) {
	if old, ok := vals[p]; ok && old != v {
		w.failed = true
	}
	vals[p] = v
}

// boundTo returns the parameter a field of a unit's layer is bound to.
func boundTo(l *Layer, field string) (string, bool) {
	for _, b := range l.Binds {
		if b.Field == field {
			return b.Param, true
		}
	}
	return "", false
}

// sameWidths reports whether two expansions of one stack have the same
// layers with the same widths and reshape targets, everywhere.
func sameWidths(a, b []Layer) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		x, y := &a[i], &b[i]
		if x.Kind != y.Kind || x.Filters != y.Filters || x.Target != y.Target || x.Repeat != y.Repeat || !sameWidths(x.Body, y.Body) {
			return false
		}
	}
	return true
}
