package editor

import (
	"strings"
	"testing"

	"github.com/charmbracelet/x/exp/golden"

	"stackfit/engine"
	"stackfit/engine/report"
	"stackfit/ui/editor/cells"
)

// openMap presses the map's key and runs its background computation.
func openMap(t *testing.T, m *Model) {
	t.Helper()
	cmds := press(m, "M")
	if _, ok := m.overlay.(*fitMapView); !ok {
		t.Fatalf("M opened no map; status %q", m.StatusLine())
	}
	if cmds[0] == nil {
		t.Fatal("the map computes nothing")
	}
	m.Update(cmds[0]())
	if v := m.overlay.(*fitMapView); v.fm == nil {
		t.Fatalf("the map's computation did not arrive: %q", v.err)
	}
}

// TestFitMapGolden draws the map of the example at 80×24 without colour,
// the cursor one step right and down of the stack's own cell.
func TestFitMapGolden(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	openMap(t, m)
	v := m.overlay.(*fitMapView)
	if v.fm.Current < 0 || v.cursor != v.fm.Current {
		t.Fatalf("the cursor starts at %d, the stack's cell is %d", v.cursor, v.fm.Current)
	}
	press(m, "l", "j")
	if want := v.fm.Current + len(v.fm.Widths) + 1; v.cursor != want {
		t.Fatalf("cursor %d after right and down, want %d", v.cursor, want)
	}
	out := view(m)
	lines := strings.Split(out, "\n")
	if len(lines) != 24 {
		t.Errorf("%d lines, want 24", len(lines))
	}
	for _, l := range lines {
		if w := cells.Width(l); w > 80 {
			t.Errorf("line of %d columns: %q", w, l)
		}
	}
	for _, mark := range []string{report.FitMapCurrentMark, report.FitMapCursorRow, report.FitMapCursorCol, "estimate"} {
		if !strings.Contains(out, mark) {
			t.Errorf("the map lacks %q:\n%s", mark, out)
		}
	}
	c := v.fm.Cells[v.cursor]
	if !strings.Contains(out, "at most batch "+batchText(c.MaxBatch)) || !strings.Contains(out, "params "+engine.FormatCount(c.Params)) {
		t.Errorf("the preview does not give the cursor cell's figures %+v:\n%s", c, out)
	}
	golden.RequireEqual(t, []byte(out))
}

// TestFitMapFitsWindows: the map fills the window exactly, none of its
// lines wider, at the smallest window, 80 columns and a large one, with a
// non-square input.
func TestFitMapFitsWindows(t *testing.T) {
	s := example(t)
	s.Input.W = 96
	for _, size := range [][2]int{{60, 18}, {80, 24}, {120, 40}} {
		m := newModel(t, s, size[0], size[1])
		openMap(t, m)
		for range 20 {
			press(m, "j") // past the last row: the cursor stays on it
		}
		press(m, "l")
		lines := strings.Split(view(m), "\n")
		if len(lines) != size[1] {
			t.Errorf("%v: %d lines", size, len(lines))
		}
		for _, l := range lines {
			if w := cells.Width(l); w > size[0] {
				t.Errorf("%v: line of %d columns: %q", size, w, l)
			}
		}
		if v := m.overlay.(*fitMapView); !strings.Contains(view(m), report.FitMapCursorRow+pairText(v.fm.Sizes[v.cursor/len(v.fm.Widths)])) {
			t.Errorf("%v: the cursor's row is not in view:\n%s", size, view(m))
		}
	}
}

// TestFitMapApplies: enter scales the stack to the cursor's cell as one
// change that one undo takes back.
func TestFitMapApplies(t *testing.T) {
	orig := example(t)
	m := newModel(t, orig, 80, 24)
	openMap(t, m)
	press(m, "l", "l", "j")
	v := m.overlay.(*fitMapView)
	cell := v.fm.Cells[v.cursor]
	undos := len(m.hist.undo)
	press(m, "enter")
	if m.overlay != nil {
		t.Fatal("enter left the map open")
	}
	want, err := engine.Scale(orig, cell.Scaling(0))
	if err != nil {
		t.Fatal(err)
	}
	if m.stack.Input != want.Input || !engine.EqualLayers(m.stack.Layers, want.Layers) {
		t.Fatalf("the stack is not the cell's variant: input %v, want %v", m.stack.Input, want.Input)
	}
	if m.stack.Input.H != cell.Input.H || !m.Dirty() {
		t.Fatalf("input %v, cell %v, dirty %v", m.stack.Input, cell.Input, m.Dirty())
	}
	if n := len(m.hist.undo); n != undos+1 {
		t.Fatalf("%d undo steps added, want 1", n-undos)
	}
	if m.nums.fit.MaxBatch != cell.MaxBatch {
		t.Errorf("after applying, the largest batch is %d; the map said %d", m.nums.fit.MaxBatch, cell.MaxBatch)
	}
	press(m, "u")
	if m.stack.Input != orig.Input || !engine.EqualLayers(m.stack.Layers, orig.Layers) {
		t.Fatal("one undo does not restore the stack")
	}
}

// TestFitMapNeedsBudget: without a budget the key says how to set one.
func TestFitMapNeedsBudget(t *testing.T) {
	s := example(t)
	s.Training.Budget = 0
	m := newModel(t, s, 80, 24)
	press(m, "M")
	if m.overlay != nil {
		t.Fatal("a map opened without a budget")
	}
	if st := m.StatusLine(); !strings.Contains(st, "budget") || !strings.Contains(st, "(t") {
		t.Errorf("status %q does not say how to set a budget", st)
	}
}

// TestFitMapClosed: esc closes the map and stops its computation; a
// computation that ends after it closed changes nothing.
func TestFitMapClosed(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	cmds := press(m, "M")
	press(m, "esc")
	if m.overlay != nil {
		t.Fatal("esc left the map open")
	}
	if msg := cmds[0](); msg != nil {
		m.Update(msg)
		if m.overlay != nil {
			t.Fatal("a late map reopened")
		}
	}
	if m.Mode().String() != "normal" {
		t.Fatalf("mode %s after closing", m.Mode())
	}
}
