package editor

import (
	"bytes"
	"errors"
	"math/rand"
	"reflect"
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

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
	{":", "f", "o", "r", "k", " ", "s", "p", "l", "i", "t", "enter"},
	{":", "g", "a", "t", "e", " ", "c", "h", "a", "n", "n", "e", "l", "enter"},
	{":", "c", "o", "n", "v", " ", "x", "2", " ", "k", "1", " ", "r", "o", "u", "n", "d", "8", "enter"},
	{"b", "b", "b", "b"},
}

// TestRandomEditsUndoAll checks, for random action sequences, that every
// state saves and loads back identically and that undoing every change
// returns the original stack exactly.
func TestRandomEditsUndoAll(t *testing.T) {
	t.Parallel() // slow: runs beside the others, after the serial tests (the memory measurements among them)
	randomEditsUndoAll(t, example, 40)
}

// TestRandomEditsUndoAllUnits is the same on a stack written with units
// (the cap inspector): edits of a use's rows go to its unit or its
// arguments, or are refused, and every state still saves and loads back,
// and undoing every change restores the file exactly.
func TestRandomEditsUndoAllUnits(t *testing.T) {
	t.Parallel()
	randomEditsUndoAll(t, capUnits, 20)
}

func randomEditsUndoAll(t *testing.T, start func(testing.TB) *engine.Stack, seeds int64) {
	total := 0
	defer func() {
		t.Logf("%d changes in %d sequences", total, seeds)
		if total < int(seeds) {
			t.Errorf("only %d changes made in %d sequences: the actions do not reach this stack", total, seeds)
		}
	}()
	for seed := int64(1); seed <= seeds; seed++ {
		rng := rand.New(rand.NewSource(seed))
		m := newModel(t, start(t), 100, 30)
		orig, _ := stackfile.Save(m.stack)
		changes := 0
		for step := 0; step < 40; step++ {
			a := actions[rng.Intn(len(actions))]
			before := len(m.hist.undo)
			press(m, a...)
			if m.Mode() != modeNormal { // a refused form or prompt: leave it
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
			// the numbers on screen are the file's: a use's rows are its
			// unit's expansion, never a stale copy
			if len(back.Units) == 0 {
				continue // no expansions to go stale
			}
			if rs, rb := engine.Evaluate(m.stack), engine.Evaluate(back); rs.Totals != rb.Totals || len(rs.Rows) != len(rb.Rows) {
				t.Fatalf("seed %d step %d %v: the editor computes %+v (%d rows), its file %+v (%d rows)\n%s", seed, step, a, rs.Totals, len(rs.Rows), rb.Totals, len(rb.Rows), data)
			}
		}
		total += changes
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
	fail    error // what Record returns
	records int
	last    *engine.Stack
	cleared int
}

func (f *fakeJournal) Record(s *engine.Stack) error {
	f.records++
	f.last = s.Clone()
	return f.fail
}
func (f *fakeJournal) Clear() error  { f.cleared++; return nil }
func (f *fakeJournal) Rebase([]byte) {}

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
	discarded := 0
	opts.Recovery = &Recovery{Stack: edited, About: "unsaved edits from Dec 2 01:02:03 (5 layers)", Discard: func() error { discarded++; return nil }}
	m2 := New(opts)
	if m2.Mode() != modeConfirm || !reflect.DeepEqual(len(m2.stack.Layers), 27) {
		t.Fatal("no recovery question")
	}
	press(m2, "y")
	if len(m2.stack.Layers) != 5 || !m2.file.dirty || discarded != 1 {
		t.Errorf("restore gave %d layers, discarded the old journal %d times", len(m2.stack.Layers), discarded)
	}
	press(m2, "u") // the file's version is one undo away
	if len(m2.stack.Layers) != 27 {
		t.Error("undo after restore did not return to the file's version")
	}
	// Recovery: discard.
	discarded = 0
	m3 := New(opts)
	press(m3, "n")
	if len(m3.stack.Layers) != 27 || discarded != 1 {
		t.Error("discard did not keep the file's version and remove the old journal")
	}
	// An untrusted journal is restored under a new name; the file stays.
	opts.Recovery.AsNew = "g.recovered.yaml"
	m4 := New(opts)
	if !strings.Contains(questionOf(m4).Question, "restore as g.recovered.yaml") {
		t.Errorf("question %q", questionOf(m4).Question)
	}
	press(m4, "y")
	if m4.file.path != "g.recovered.yaml" || m4.file.base != nil || len(m4.stack.Layers) != 5 {
		t.Errorf("restored as %q with %d layers", m4.file.path, len(m4.stack.Layers))
	}
}

// TestUnprotectedMark: when the journal cannot be written (a full disk)
// the header says so, and keeps saying so through later messages, until a
// write succeeds or the stack is saved.
func TestUnprotectedMark(t *testing.T) {
	j := &fakeJournal{fail: errors.New("no space left on device")}
	m := New(Options{Stack: example(t), Path: t.TempDir() + "/g.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(),
		Files: store.Disk{}, JournalFor: func(string) Journal { return j }})
	m.Update(tea.WindowSizeMsg{Width: 100, Height: 30})
	press(m, ">")
	if !strings.Contains(view(m), "no recovery copy") || !strings.Contains(m.status, "no space left") {
		t.Fatalf("a failed journal write is not shown:\n%s", view(m))
	}
	press(m, "j", "k") // later keys and messages do not hide it
	if !strings.Contains(view(m), "no recovery copy") {
		t.Error("the mark went away while still unprotected")
	}
	j.fail = nil
	press(m, "<")
	if strings.Contains(view(m), "no recovery copy") {
		t.Error("the mark stayed after a journal write succeeded")
	}
	j.fail = errors.New("read-only file system")
	press(m, ">", "w")
	if strings.Contains(view(m), "no recovery copy") || m.file.dirty {
		t.Errorf("the mark stayed after a save: %q", m.status)
	}
}
