package editor

import (
	"os"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// TestUseRowsAreTheUnits: the rows of a use come from its unit, and the
// stack file keeps only the use, so a change inside them is refused (it
// would be lost on saving); a use added by quick entry is expanded at
// once, and a use naming no unit is refused with the reason.
func TestUseRowsAreTheUnits(t *testing.T) {
	data, err := os.ReadFile("../../testdata/examples/cap-inspector-units.yaml")
	if err != nil {
		t.Fatal(err)
	}
	s, err := stackfile.Load(data)
	if err != nil {
		t.Fatal(err)
	}
	m := newModel(t, s, 100, 30)
	before := m.stack
	m.change("widen", func(s *engine.Stack) (addr, error) {
		s.Layers[0].Body[0].Filters = 99
		return nil, nil
	})
	if m.stack != before || !strings.Contains(m.status, "belong to a use of unit cbr") {
		t.Errorf("a change inside a use was taken: %q", m.status)
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
	if len(m.stack.Layers) != n || !strings.Contains(m.status, `did you mean "cbr"`) {
		t.Errorf("a use of no unit: %d layers, %q", len(m.stack.Layers), m.status)
	}
}
