package editor

import (
	"bytes"
	"math/rand"
	"reflect"
	"testing"
	"time"

	"stackfit/engine"
	"stackfit/engine/stackfile"
	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// actions are editor inputs a user may give in the stack view, each a
// short key sequence.
var actions = [][]string{
	{"j"}, {"k"}, {"home"}, {"end"}, {"space"},
	{"n"}, {">"}, {"<"}, {"c"}, {"x"}, {"J"}, {"K"},
	{"v", "j", "b"}, {"v", "k", "x"}, {"b"},
	{":", "c", "o", "n", "v", " ", "2", "4", " ", "k", "3", " ", "p", "1", "enter"},
	{":", "p", "o", "o", "l", " ", "m", "a", "x", " ", "k", "2", "enter"},
	{":", "b", "l", "o", "c", "k", " ", "2", " ", "r", "e", "s", "i", "d", "u", "a", "l", "enter"},
	{"*", "ctrl+u", "0", ".", "7", "5", "enter"},
	{"a", "down", "down", "enter", "enter"},
	{"enter", "tab", "backspace", "5", "enter"},
	{"t", "ctrl+u", "1", "2", "8", "enter"},
	{"m"}, {"u"}, {"U"},
}

// TestRandomEditsUndoAll checks, for random action sequences, that every
// state saves and loads back identically and that undoing every change
// returns the original stack exactly.
func TestRandomEditsUndoAll(t *testing.T) {
	for seed := int64(1); seed <= 40; seed++ {
		rng := rand.New(rand.NewSource(seed))
		m := newModel(t, example(t), 100, 30)
		orig, _ := stackfile.Save(m.stack)
		changes := 0
		for step := 0; step < 40; step++ {
			a := actions[rng.Intn(len(actions))]
			before := len(m.hist.undo)
			press(m, a...)
			if m.mode != modeNormal { // a refused form or prompt: leave it
				press(m, "esc")
			}
			changes += len(m.hist.undo) - before
			data, err := stackfile.Save(m.stack)
			if err != nil {
				t.Fatalf("seed %d step %d %v: save: %v", seed, step, a, err)
			}
			back, err := stackfile.Load(data)
			if err != nil {
				t.Fatalf("seed %d step %d %v: the saved stack does not load: %v\n%s", seed, step, a, err, data)
			}
			again, _ := stackfile.Save(back)
			if !bytes.Equal(data, again) || !sameStack(back, m.stack) {
				t.Fatalf("seed %d step %d %v: save/load does not round-trip\n%s", seed, step, a, data)
			}
		}
		for len(m.hist.undo) > 0 {
			press(m, "u")
		}
		final, _ := stackfile.Save(m.stack)
		if !bytes.Equal(final, orig) {
			t.Fatalf("seed %d: undoing all %d changes did not restore the original:\n%s", seed, changes, final)
		}
	}
}

// sameStack compares two stacks as the stack file sees them.
func sameStack(a, b *engine.Stack) bool {
	x, _ := stackfile.Save(a)
	y, _ := stackfile.Save(b)
	return bytes.Equal(x, y)
}

// fakeJournal records what the editor asks of its journal.
type fakeJournal struct {
	records int
	last    *engine.Stack
	cleared int
}

func (f *fakeJournal) Record(s *engine.Stack) error { f.records++; f.last = s.Clone(); return nil }
func (f *fakeJournal) Clear() error                 { f.cleared++; return nil }

func TestJournalAndRecovery(t *testing.T) {
	j := &fakeJournal{}
	opts := Options{Stack: example(t), Path: t.TempDir() + "/g.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(),
		Files: store.Disk{}, JournalFor: func(string) Journal { return j }}
	m := New(opts)
	press(m, "n", "home", ">")
	if j.records != 2 || !sameStack(j.last, m.stack) {
		t.Errorf("journal got %d records", j.records)
	}
	press(m, "u")
	if j.records != 3 || !sameStack(j.last, m.stack) {
		t.Error("undo was not journaled")
	}
	press(m, "w")
	if j.cleared != 1 {
		t.Error("save did not clear the journal")
	}
	// Recovery: restore.
	edited := example(t)
	edited.Layers = edited.Layers[:5]
	opts.Recovered, opts.RecoveredAt = edited, time.Date(2026, 12, 2, 1, 2, 3, 0, time.UTC)
	m2 := New(opts)
	if m2.mode != modeConfirm || !reflect.DeepEqual(len(m2.stack.Layers), 27) {
		t.Fatal("no recovery question")
	}
	press(m2, "y")
	if len(m2.stack.Layers) != 5 || !m2.dirty {
		t.Errorf("restore gave %d layers", len(m2.stack.Layers))
	}
	press(m2, "u") // the file's version is one undo away
	if len(m2.stack.Layers) != 27 {
		t.Error("undo after restore did not return to the file's version")
	}
	// Recovery: discard.
	j.cleared = 0
	m3 := New(opts)
	press(m3, "n")
	if len(m3.stack.Layers) != 27 || j.cleared != 1 {
		t.Error("discard did not keep the file's version and clear the journal")
	}
}
