package editor

import (
	"reflect"
	"strings"
	"testing"

	"stackfit/engine"
)

// TestCopyRange: with a range marked, the copy key copies the whole range
// below its last item (names cleared, as a single copy's are) as one undo
// step; without one it copies the current item. Common practice: a
// selection is copied whole, and one command is one undo step.
func TestCopyRange(t *testing.T) {
	blocky := `stackfit: 1
input: [3, 32, 32]
layers:
  - {conv: 8, kernel: 3, pad: 1}
  - block: 2
    name: stage
    layers:
      - {conv: 8, kernel: 3, pad: 1, name: inner}
      - {norm: batch}
      - {act: relu}
  - global-pool
`
	tests := []struct {
		name   string
		yaml   string // "" for the built-in example
		keys   []string
		list   func(s *engine.Stack) []engine.Layer // the list the copies go into
		lo, hi int                                  // the copied items of that list
		status string
	}{
		{"range downward", "", []string{"v", "j", "j", "c"},
			func(s *engine.Stack) []engine.Layer { return s.Layers }, 0, 2, "copied 3 layers"},
		{"range upward", "", []string{"j", "j", "j", "v", "k", "k", "c"},
			func(s *engine.Stack) []engine.Layer { return s.Layers }, 1, 3, "copied 3 layers"},
		{"no range", "", []string{"c"},
			func(s *engine.Stack) []engine.Layer { return s.Layers }, 0, 0, "copied conv 32"},
		{"inside a block", blocky, []string{"j", "j", "v", "j", "c"},
			func(s *engine.Stack) []engine.Layer { return s.Layers[1].Body }, 0, 1, "copied 2 layers"},
		{"a block and what follows", blocky, []string{"j", "v", "G", "c"},
			func(s *engine.Stack) []engine.Layer { return s.Layers }, 1, 2, "copied 2 layers"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := example(t)
			if tt.yaml != "" {
				s = load(t, tt.yaml)
			}
			m := newModel(t, s, 100, 40)
			before := m.stack.Clone()
			press(m, tt.keys...)
			if !strings.HasPrefix(m.status, tt.status) {
				t.Fatalf("status %q, want %q…", m.status, tt.status)
			}
			orig, got := tt.list(before), tt.list(m.stack)
			n := tt.hi - tt.lo + 1
			if len(got) != len(orig)+n {
				t.Fatalf("%d items, want %d", len(got), len(orig)+n)
			}
			for i := 0; i <= tt.hi; i++ { // up to the range's end: unchanged
				if !reflect.DeepEqual(got[i], orig[i]) {
					t.Errorf("item %d changed", i+1)
				}
			}
			for i := tt.lo; i <= tt.hi; i++ { // the copies, in order, without names
				c := engine.CloneLayers([]engine.Layer{orig[i]})[0]
				stripNames(&c)
				if !reflect.DeepEqual(got[tt.hi+1+i-tt.lo], c) {
					t.Errorf("copy of item %d: %s, want %s", i+1, engine.Summary(&got[tt.hi+1+i-tt.lo]), engine.Summary(&c))
				}
			}
			if m.tree.anchor != -1 {
				t.Error("the range is still marked after the copy")
			}
			if r := engine.Evaluate(m.stack); r.Errors != 0 {
				t.Errorf("the copy has errors: %v", r.Diags)
			}
			press(m, "u")
			if !reflect.DeepEqual(m.stack, before) {
				t.Error("one undo does not take the whole copy back")
			}
		})
	}
}

// TestCopyRangeRefused: a range across two lists is refused with the
// range's own message, and nothing changes.
func TestCopyRangeRefused(t *testing.T) {
	m := newModel(t, load(t, `stackfit: 1
input: [3, 32, 32]
layers:
  - {conv: 8, kernel: 3, pad: 1}
  - block: 1
    layers:
      - {act: relu}
`), 100, 40)
	before := m.stack.Clone()
	press(m, "v", "j", "j", "c")
	if !reflect.DeepEqual(m.stack, before) || m.status != errRange.Error() {
		t.Errorf("status %q; the stack changed: %v", m.status, !reflect.DeepEqual(m.stack, before))
	}
}
