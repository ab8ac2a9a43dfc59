package editor

import (
	"bytes"
	"strings"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/exp/teatest"

	"stackfit/engine"
	"stackfit/keymap"
	"stackfit/ui/styles"
)

// TestEndToEnd runs the editor as a program through the terminal-test
// helper: a stage, a widen and an undo, then quit without saving.
func TestEndToEnd(t *testing.T) {
	m := New(Options{Stack: example(t), Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles()})
	tm := teatest.NewTestModel(t, m, teatest.WithInitialTermSize(80, 24))
	send := func(keys ...string) {
		for _, k := range keys {
			tm.Send(keyMsg(k))
		}
	}
	wait := func(text string) {
		t.Helper()
		teatest.WaitFor(t, tm.Output(), func(b []byte) bool { return bytes.Contains(b, []byte(text)) },
			teatest.WithDuration(5*time.Second), teatest.WithCheckInterval(20*time.Millisecond))
	}
	wait("Fruit grader")
	send("j", "j", "n")
	wait("added a stage")
	send("j", ">") // the stage's first convolution, inside its block
	wait("widened conv")
	send("u")
	wait("undid: widened")
	send("q", "n")
	fm := tm.FinalModel(t, teatest.WithFinalTimeout(5*time.Second)).(*Model)
	if got := len(fm.stack.Layers); got != 27+1 {
		t.Errorf("%d items, want 28 (27 and the stage)", got)
	}
	if f := fm.stack.Layers[3].Body[0].Filters; f != 64 {
		t.Errorf("the widen was not undone: %d", f)
	}
	fm.quitting = false
	v := view(fm)
	for _, want := range []string{"30 layers, 1 block", "undid: widened conv 64 k3 s2 p1 nobias", "fits · memory"} {
		if !strings.Contains(v, want) {
			t.Errorf("final view lacks %q:\n%s", want, v)
		}
	}
	// The background width search reported back.
	if fm.nums.fit.MaxWidth <= 0 {
		t.Error("no width answer arrived")
	}
}

// TestWidthSearchIsCurrent checks that a stale background answer is
// dropped.
func TestWidthSearchIsCurrent(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	cmd := m.widthCmd()
	old := cmd().(widthMsg)
	press(m, ">") // a change starts a newer search
	m.Update(old)
	if m.nums.fit.MaxWidth == old.width && old.gen != m.nums.widthGen {
		t.Error("a stale width answer was shown")
	}
	m.Update(widthMsg{gen: m.nums.widthGen, width: 1.5, limit: engine.CatActivations, exact: true})
	if m.nums.fit.MaxWidth != 1.5 {
		t.Error("the current answer was dropped")
	}
	_ = tea.Quit
}
