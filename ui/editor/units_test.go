package editor

import (
	"os"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// TestUseRowsAreTheUnits: the rows of a use come from its unit and the
// file keeps only the use, so a change made to them goes to the unit: a
// field bound to a parameter becomes this use's argument, any other
// changes the unit and every use with it, in one undo step; a layer added
// inside a use is refused. A use added by quick entry is expanded at once,
// and a use naming no unit is refused with the reason.
func TestUseRowsAreTheUnits(t *testing.T) {
	m := newModel(t, capUnits(t), 100, 30)
	// a bound field: the stem's width is its argument c
	m.change("widen", func(s *engine.Stack) (addr, error) {
		s.Layers[0].Body[0].Filters = 40
		return nil, nil
	})
	if a := m.stack.Layers[0].Args; len(a) != 2 || a[0] != (engine.Arg{Name: "c", Value: "40"}) || m.stack.Layers[0].Body[0].Filters != 40 {
		t.Fatalf("a bound field: args %v, status %q", a, m.status)
	}
	if m.stack.Layers[1].Body[0].Body[0].Body[0].Filters != 32 {
		t.Error("another use changed with one use's argument")
	}
	// an unbound field: cbr's kernel, written in the unit, changes in every use
	m.change("kernel 5", func(s *engine.Stack) (addr, error) {
		s.Layers[0].Body[0].Kernel = engine.Square(5)
		return nil, nil
	})
	if k := m.stack.Units[0].Body[0].Kernel; k != engine.Square(5) {
		t.Fatalf("the unit's kernel is %v (status %q)", k, m.status)
	}
	if k := m.stack.Layers[1].Body[0].Body[0].Body[0].Kernel; k != engine.Square(5) {
		t.Errorf("a nested use of cbr kept kernel %v", k)
	}
	press(m, "ctrl+z")
	if k := m.stack.Units[0].Body[0].Kernel; k != engine.Square(3) || m.stack.Layers[1].Body[0].Body[0].Body[0].Kernel != engine.Square(3) {
		t.Errorf("one undo did not restore the unit and its uses: %v", k)
	}
	// a layer added inside a use is refused
	before := m.stack
	m.change("add", func(s *engine.Stack) (addr, error) {
		s.Layers[0].Body = append(s.Layers[0].Body, engine.Layer{Kind: engine.KindAct})
		return nil, nil
	})
	if m.stack != before || !strings.Contains(m.status, "changes the unit's structure") {
		t.Errorf("a layer added inside a use: %q", m.status)
	}
	press(m, "G", ":")
	typeText(m, "unit cbr c=8")
	press(m, "enter")
	last := m.stack.Layers[len(m.stack.Layers)-1]
	if last.Unit != "cbr" || len(last.Body) != 3 || last.Body[0].Filters != 8 {
		t.Fatalf("quick entry of a use: %+v (status %q)", last, m.status)
	}
	n := len(m.stack.Layers)
	press(m, ":")
	typeText(m, "unit cbx c=8")
	press(m, "enter")
	if v := m.View(); len(m.stack.Layers) != n || !strings.Contains(v, `no unit cbx in this stack; its units: cbr, basic; did you mean "cbr"?`) {
		t.Errorf("a use of no unit: %d layers, screen\n%s", len(m.stack.Layers), v)
	}
	// a stack without units says where units come from
	plain := newModel(t, &engine.Stack{Input: engine.Shape{C: 3, H: 32, W: 32}}, 100, 30)
	press(plain, ":")
	typeText(plain, "unit cbr c=8")
	press(plain, "enter")
	if v := plain.View(); len(plain.stack.Layers) != 0 || !strings.Contains(v, "this stack has no units: define them under units: in the file") {
		t.Errorf("a use in a stack without units: %d layers, screen\n%s", len(plain.stack.Layers), v)
	}
}

// TestUseForm: enter on a use opens its arguments, one field per
// parameter of the unit and the repeat; a new value re-expands the use
// (one change), a value the unit's field refuses is shown on its
// parameter and nothing changes.
func TestUseForm(t *testing.T) {
	m := newModel(t, capUnits(t), 100, 30)
	press(m, "enter") // the stem: unit cbr c=32 s=2
	if v := view(m); !strings.Contains(v, "use of unit cbr") || !strings.Contains(v, "repeat") {
		t.Fatalf("the use's form:\n%s", v)
	}
	press(m, "ctrl+u")
	typeText(m, "24")
	press(m, "enter")
	stem := m.stack.Layers[0]
	if stem.Unit != "cbr" || len(stem.Args) != 2 || stem.Args[0].Value != "24" || stem.Body[0].Filters != 24 {
		t.Fatalf("after the form: %+v, status %q", stem, m.status)
	}
	press(m, "enter", "ctrl+u")
	typeText(m, "0")
	press(m, "enter")
	if v := view(m); !strings.Contains(v, "does not suit") {
		t.Errorf("a refused value is not shown:\n%s", v)
	}
	press(m, "esc")
	if m.stack.Layers[0].Body[0].Filters != 24 {
		t.Error("a refused value changed the stack")
	}
}

// TestPickerOffersUnits: the picker lists the file's units after the
// kinds; choosing one opens its form, and a required parameter must be
// given before the use is added.
func TestPickerOffersUnits(t *testing.T) {
	m := newModel(t, capUnits(t), 100, 30)
	n := len(m.stack.Layers)
	press(m, "a", "u", "u", "u")
	if v := view(m); !strings.Contains(v, "unit basic") {
		t.Fatalf("the picker:\n%s", v)
	}
	press(m, "enter", "enter")
	if len(m.stack.Layers) != n || !strings.Contains(view(m), "needs c") {
		t.Fatalf("a use without its required width was added: %d layers\n%s", len(m.stack.Layers), view(m))
	}
	typeText(m, "16")
	press(m, "enter")
	if len(m.stack.Layers) != n+1 || m.stack.Layers[1].Unit != "basic" || len(m.stack.Layers[1].Body) != 3 {
		t.Fatalf("after the form: %d layers, status %q", len(m.stack.Layers), m.status)
	}
}

// capUnits loads the cap inspector written with units.
func capUnits(t testing.TB) *engine.Stack {
	t.Helper()
	data, err := os.ReadFile("../../testdata/examples/cap-inspector-units.yaml")
	if err != nil {
		t.Fatal(err)
	}
	s, err := stackfile.Load(data)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestWidthMultiplierKeepsUnits: the width multiplier (*) on a stack
// written with units widens the uses' arguments, keeps the units, and is
// one undo step (engine.ScaleWidth carries the scaling into the units).
func TestWidthMultiplierKeepsUnits(t *testing.T) {
	m := newModel(t, capUnits(t), 100, 30)
	before := engine.Evaluate(m.stack).Totals
	press(m, "*")
	typeText(m, "2")
	press(m, "enter")
	if len(m.stack.Units) != 2 || m.stack.Layers[0].Args[0] != (engine.Arg{Name: "c", Value: "64"}) || m.stack.Layers[0].Body[0].Filters != 64 {
		t.Fatalf("after ×2: %d units, stem %v (status %q)", len(m.stack.Units), m.stack.Layers[0].Args, m.status)
	}
	if !strings.Contains(m.status, "scaled every width by 2") || strings.Contains(m.status, "written out") {
		t.Errorf("status %q", m.status)
	}
	press(m, "u")
	if got := engine.Evaluate(m.stack).Totals; got != before || m.stack.Layers[0].Args[0].Value != "32" {
		t.Errorf("one undo: %+v, want %+v", got, before)
	}
}

// TestEditThroughNestedUse: a change to the rows of a use nested in a use
// goes down the units the same way: a field bound to the nested unit's
// parameter that the enclosing unit passes on ($c) sets the enclosing
// use's argument (so widening a block of basic units widens its use),
// an unbound field changes the nested unit for every use, and a literal
// argument written in the enclosing unit changes there.
func TestEditThroughNestedUse(t *testing.T) {
	m := newModel(t, capUnits(t), 100, 30)
	m.change("widen stage1", func(s *engine.Stack) (addr, error) {
		body := s.Layers[1].Body[0].Body // basic's expansion: cbr's use, conv, norm
		body[0].Body[0].Filters, body[1].Filters = 64, 64
		return nil, nil
	})
	if a := m.stack.Layers[1].Body[0].Args; len(a) != 1 || a[0] != (engine.Arg{Name: "c", Value: "64"}) {
		t.Fatalf("stage1's use of basic: args %v (status %q)", a, m.status)
	}
	if m.stack.Layers[2].Body[0].Args[0].Value != "64" || m.stack.Layers[0].Args[0].Value != "32" || len(m.stack.Units[0].Body[0].Binds) != 2 || len(m.stack.Units[1].Body[1].Binds) != 1 {
		t.Errorf("other uses or the units changed: %v %v; cbr %+v", m.stack.Layers[0].Args, m.stack.Layers[2].Body[0].Args, m.stack.Units[0].Body[0])
	}
	if f := m.stack.Layers[1].Body[0].Body[0].Body[0].Filters; f != 64 {
		t.Errorf("the nested conv re-expanded to %d filters, want 64", f)
	}
	// an unbound field of cbr, reached through basic: every cbr follows
	m.change("kernel 5", func(s *engine.Stack) (addr, error) {
		s.Layers[2].Body[0].Body[0].Body[0].Kernel = engine.Square(5)
		return nil, nil
	})
	if k := m.stack.Units[0].Body[0].Kernel; k != engine.Square(5) || m.stack.Layers[0].Body[0].Kernel != engine.Square(5) {
		t.Errorf("cbr's kernel %v, the stem's %v; want 5×5 for both (status %q)", k, m.stack.Layers[0].Body[0].Kernel, m.status)
	}
	press(m, "u", "u")
	if m.stack.Layers[1].Body[0].Args[0].Value != "32" || m.stack.Units[0].Body[0].Kernel != engine.Square(3) {
		t.Error("two undo steps did not restore the stack")
	}
	// a literal argument in the enclosing unit's text
	s, err := stackfile.Load([]byte(`stackfit: 1
input: [3, 16, 16]
units:
  cb:
    params: {c: 8}
    layers: [{conv: $c, kernel: 3, pad: 1}]
  pair:
    layers:
      - {unit: cb, c: 16}
      - {unit: cb}
layers:
  - {unit: pair}
  - {unit: pair}
`))
	if err != nil {
		t.Fatal(err)
	}
	m = newModel(t, s, 100, 30)
	m.change("widen", func(s *engine.Stack) (addr, error) {
		s.Layers[0].Body[0].Body[0].Filters = 24
		return nil, nil
	})
	pair := m.stack.UnitByName("pair")
	if a := pair.Body[0].Args; len(a) != 1 || a[0].Value != "24" || m.stack.Layers[1].Body[0].Body[0].Filters != 24 || len(m.stack.Layers[0].Args) != 0 {
		t.Errorf("pair's use of cb: %v; the other use of pair: %d filters (status %q)", a, m.stack.Layers[1].Body[0].Body[0].Filters, m.status)
	}
	if pair.Body[1].Args != nil {
		t.Errorf("pair's second use of cb gained %v", pair.Body[1].Args)
	}
}

// TestUnusedUnitInStatus: with no layer at fault, the next-problem key
// says which unit no layer uses (the warning has no row of its own).
func TestUnusedUnitInStatus(t *testing.T) {
	s, err := stackfile.Load([]byte(`stackfit: 1
input: [8, 16, 16]
units:
  cb:
    params: {c: 8}
    layers: [{conv: $c, kernel: 3, pad: 1}]
  spare:
    layers: [{act: relu}]
layers:
  - {unit: cb}
  - {unit: cb}
`))
	if err != nil {
		t.Fatal(err)
	}
	m := newModel(t, s, 100, 30)
	press(m, "f")
	if !strings.Contains(m.status, "unit spare is defined but no layer uses it") {
		t.Errorf("status %q", m.status)
	}
}
