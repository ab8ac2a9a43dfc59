package editor

import (
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/engine/stackfile"
	"stackfit/keymap"
	"stackfit/ui/styles"
)

// load parses a stack file for a test.
func load(t testing.TB, yaml string) *engine.Stack {
	t.Helper()
	s, err := stackfile.Load([]byte(yaml))
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// deltas returns the Δ params column of every visible item of the stack
// (generated lines left out), by item text.
func deltas(m *Model) map[string]string {
	out := map[string]string{}
	for i := range m.tree.items {
		it := &m.tree.items[i]
		if it.gen != nil {
			continue
		}
		p, _, _ := itemTotals(it, &m.nums.res, &m.nums.mem)
		out[it.addr.key()+" "+engine.Summary(it.layer)] = m.baseline.delta(it, p)
	}
	return out
}

// TestBaselineFollowsLayers: after marking a baseline, inserting a layer
// or wrapping layers in a block shows a change only where there is one;
// every other layer matches itself, however its number shifted.
func TestBaselineFollowsLayers(t *testing.T) {
	m := newModel(t, example(t), 100, 30)
	press(m, "m", ":")
	typeText(m, "conv 32 k3 p1")
	press(m, "enter") // a conv after row 1
	news := 0
	for k, d := range deltas(m) {
		switch {
		case d == "new":
			news++
		case d != "±0":
			t.Errorf("after an insert, %s shows %s", k, d)
		}
	}
	if news != 1 {
		t.Errorf("%d items shown as new, want the inserted conv only", news)
	}
	press(m, "u", "j", "v", "j", "b") // wrap rows 2 and 3 in a block
	news = 0
	for k, d := range deltas(m) {
		switch {
		case d == "new":
			news++
		case d != "±0" && !strings.Contains(k, "block"):
			t.Errorf("after a wrap, %s shows %s", k, d)
		}
	}
	if news != 1 {
		t.Errorf("%d items shown as new after the wrap, want the new block only", news)
	}
	press(m, "k", ">") // widen the stem: its delta shows, the others stay
	d := deltas(m)
	changed := 0
	for _, v := range d {
		if v != "±0" && v != "new" {
			changed++
		}
	}
	if changed < 1 {
		t.Errorf("widening the stem shows no change: %v", d)
	}
}

// TestEscOnAddFormAddsNothing: leaving the new layer's form with esc adds
// nothing (it used to keep the layer while saying nothing changed).
func TestEscOnAddFormAddsNothing(t *testing.T) {
	m := newModel(t, example(t), 100, 30)
	n := len(m.stack.Layers)
	press(m, "a", "enter") // conv: its form opens
	if formOf(m) == nil {
		t.Fatal("no form for the new conv")
	}
	if len(m.stack.Layers) != n {
		t.Fatal("the layer was added before its form was accepted")
	}
	press(m, "esc")
	if len(m.stack.Layers) != n || len(m.hist.undo) != 0 || m.file.dirty || !strings.Contains(m.status, "nothing added") {
		t.Errorf("esc: %d layers (want %d), %d undo steps, dirty %v, %q", len(m.stack.Layers), n, len(m.hist.undo), m.file.dirty, m.status)
	}
	press(m, "a", "enter", "enter") // accepted: added, one step
	if len(m.stack.Layers) != n+1 || len(m.hist.undo) != 1 {
		t.Errorf("accept: %d layers, %d undo steps", len(m.stack.Layers), len(m.hist.undo))
	}
}

// broken is a stack with one error (a pool whose window does not fit).
const broken = `stackfit: 1
input: [3, 8, 8]
training: {batch: 8, budget: 24GiB}
layers:
  - conv: 8
    kernel: 3
  - pool: max
    kernel: 9
`

// TestMemoryNotEstimatedWithErrors: with an error in the stack the footer
// gives no verdict and no fit, and says why; the width answer says so too
// (it used to search forever). An invalid field in a form does the same
// for the preview.
func TestMemoryNotEstimatedWithErrors(t *testing.T) {
	m := newModel(t, load(t, broken), 100, 30)
	if m.nums.res.Errors == 0 {
		t.Fatal("the stack should have an error")
	}
	v := view(m)
	if !strings.Contains(v, "memory not estimated: the stack has 1 error(s)") || strings.Contains(v, "fits") || strings.Contains(v, "searching") {
		t.Errorf("footer with an error:\n%s", v)
	}
	if m.widthCmd() != nil || m.nums.widthState != widthNone {
		t.Error("a width search started on a stack with errors")
	}
	m = newModel(t, example(t), 100, 30)
	press(m, "enter", "ctrl+u")
	typeText(m, "x")
	if v := view(m); !strings.Contains(v, "memory not estimated while a field is invalid") {
		t.Errorf("footer with an invalid field:\n%s", v)
	}
}

// TestWidthNoneFits: a finished search that found nothing says so.
func TestWidthNoneFits(t *testing.T) {
	m := newModel(t, example(t), 120, 40)
	cmd := m.widthCmd()
	if cmd == nil || !strings.Contains(view(m), "searching…") {
		t.Fatal("no search under way")
	}
	m.Update(widthMsg{gen: m.nums.widthGen, width: 0, limit: engine.CatActivations})
	if v := view(m); !strings.Contains(v, "width none fits") {
		t.Errorf("a search that found nothing:\n%s", v)
	}
}

// warned is a stack whose last row has two warnings (a stride that
// leaves input rows unused, and a single-position output whose receptive
// field is smaller than the input).
const warned = `stackfit: 1
input: [3, 64, 64]
layers:
  - conv: 32
    kernel: 3
    pad: 1
  - norm: batch
  - dropout: 0.9
  - conv: 8
    kernel: 1
    stride: 64
`

// TestDetailsKeepWarnings: at 100×30 the detail panel shows a row's
// warnings before its arithmetic, whole (wrapped, never cut).
func TestDetailsKeepWarnings(t *testing.T) {
	s := load(t, warned)
	m := newModel(t, s, 100, 30)
	press(m, "end")
	var msgs []string
	for _, d := range m.nums.res.DiagsFor(m.tree.current().first) {
		msgs = append(msgs, d.Message())
	}
	if len(msgs) == 0 {
		t.Fatal("the test stack gives the last row no warning")
	}
	flat := strings.Join(strings.Fields(view(m)), " ")
	for _, msg := range msgs {
		if !strings.Contains(flat, strings.Join(strings.Fields(msg), " ")) {
			t.Errorf("the details lack %q:\n%s", msg, view(m))
		}
	}
}

// TestHintBarKeepsEssentials: at every width the hint bar shows save,
// help and quit.
func TestHintBarKeepsEssentials(t *testing.T) {
	for _, w := range []int{60, 80, 100, 200} {
		m := newModel(t, example(t), w, 30)
		lines := strings.Split(view(m), "\n")
		bar := lines[len(lines)-1]
		for _, want := range []string{"w save", "? help", "q quit"} {
			if !strings.Contains(bar, want) {
				t.Errorf("%d columns: hint bar %q lacks %q", w, bar, want)
			}
		}
	}
}

// TestHelpFitsAndScrolls: the help reflows to the window (no key column
// cut), and scrolls to its last line.
func TestHelpFitsAndScrolls(t *testing.T) {
	for _, size := range [][2]int{{60, 18}, {80, 24}, {100, 30}, {200, 50}} {
		m := newModel(t, example(t), size[0], size[1])
		press(m, "?")
		h := helpOf(m)
		all := strings.Join(h.Lines(), "\n")
		for _, want := range []string{"save as", "open file", "quit", "training setup", "depth chart"} {
			if !strings.Contains(all, want) {
				t.Errorf("%v: the help lacks %q", size, want)
			}
		}
		for _, l := range h.Lines() {
			if w := len([]rune(stripANSI(l))); w > size[0] {
				t.Errorf("%v: a help line is %d wide: %q", size, w, l)
			}
		}
		press(m, "G")
		v := view(m)
		if len(h.Lines()) > size[1] && !strings.Contains(v, "headroom") {
			t.Errorf("%v: scrolled to the end, the last line is not shown:\n%s", size, v)
		}
		if got := strings.Count(v, "\n") + 1; got != size[1] {
			t.Errorf("%v: the help is %d lines", size, got)
		}
	}
}

// TestSelectionWithoutColour: with no colour (TestMain's profile) the
// picker's choice and a marked range still show, by marks.
func TestSelectionWithoutColour(t *testing.T) {
	m := newModel(t, example(t), 100, 30)
	press(m, "a", "down")
	if !strings.Contains(view(m), "▶ deconv") {
		t.Errorf("the picker's choice is not marked:\n%s", view(m))
	}
	press(m, "esc", "v", "j", "j")
	if n := strings.Count(view(m), "\n┃"); n != 2 {
		t.Errorf("%d range rows marked, want 2:\n%s", n, view(m))
	}
}

// TestCounters: the header counts the stack's layers and its blocks
// apart, in the singular for one, and folding does not change them.
func TestCounters(t *testing.T) {
	m := newModel(t, load(t, "stackfit: 1\ninput: [3, 8, 8]\nlayers:\n  - act: relu\n"), 100, 30)
	if v := view(m); !strings.Contains(v, "1 layer · 1 row ") {
		t.Errorf("one layer:\n%s", v)
	}
	m = newModel(t, example(t), 100, 30)
	press(m, "j", "v", "j", "b")
	head := strings.Split(view(m), "\n")[1]
	press(m, "space")
	if again := strings.Split(view(m), "\n")[1]; again != head || !strings.Contains(head, "1 block") {
		t.Errorf("header %q, folded %q", head, again)
	}
}

// TestSideColumnFigures: large figures are written short, not cut, and a
// row's status is shown whole.
func TestSideColumnFigures(t *testing.T) {
	s := load(t, "stackfit: 1\ninput: [16777216, 1, 1]\nlayers:\n  - act: relu\n")
	m := newModel(t, s, 120, 40)
	if v := view(m); !strings.Contains(v, "16.8M") || strings.Contains(v, "16777 ") {
		t.Errorf("16,777,216 channels:\n%s", v)
	}
	if got := rfText(engine.FPair{H: 2097153, W: 2097153}, colRF); got != "2.10M" {
		t.Errorf("receptive field 2,097,153 shows %q", got)
	}
	m = newModel(t, load(t, broken+"  - act: relu\n"), 100, 30)
	if v := view(m); !strings.Contains(v, "unresolved") {
		t.Errorf("the status is cut:\n%s", v)
	}
}

// TestScrollAfterResize: growing the window brings hidden rows back.
func TestScrollAfterResize(t *testing.T) {
	m := newModel(t, example(t), 60, 18)
	press(m, "end")
	m.Update(tea.WindowSizeMsg{Width: 200, Height: 50})
	if m.tree.offset != 0 || !strings.Contains(view(m), " 1 conv") {
		t.Errorf("after growing, offset %d:\n%s", m.tree.offset, view(m))
	}
}

// TestSetupEditsTheStack: the setup form changes the name, the note and
// the input shape, as one undoable change.
func TestSetupEditsTheStack(t *testing.T) {
	m := newModel(t, example(t), 100, 30)
	press(m, "t", "ctrl+u")
	typeText(m, "grader 512")
	press(m, "tab", "tab", "ctrl+u")
	typeText(m, "3x512x512")
	press(m, "enter")
	if m.stack.Name != "grader 512" || m.stack.Input != (engine.Shape{C: 3, H: 512, W: 512}) {
		t.Fatalf("setup gave %q %v", m.stack.Name, m.stack.Input)
	}
	press(m, "u")
	if m.stack.Input.H == 512 {
		t.Error("undo kept the new input")
	}
}

// TestWidthPromptPreviews: the width prompt previews the scaled stack.
func TestWidthPromptPreviews(t *testing.T) {
	m := newModel(t, example(t), 100, 30)
	press(m, "*")
	if m.preview == nil || !strings.Contains(promptHint(m), "preview ×1.5") {
		t.Fatalf("no preview: %q", promptHint(m))
	}
	before := m.nums.res.Totals.Params
	if m.preview.Result.Totals.Params <= before {
		t.Errorf("×1.5 previews %d parameters, now %d", m.preview.Result.Totals.Params, before)
	}
	press(m, "esc")
	if m.preview != nil || m.nums.res.Totals.Params != before {
		t.Error("leaving the prompt kept the preview or changed the stack")
	}
}

// TestPickerSaysMore: the picker says how many kinds lie below.
func TestPickerSaysMore(t *testing.T) {
	m := newModel(t, example(t), 80, 24)
	press(m, "a")
	if v := view(m); !strings.Contains(v, "more below") {
		t.Errorf("the picker does not say more kinds follow:\n%s", v)
	}
}

// TestNarrowWithBaseline: at 60 columns with a baseline the layer text
// keeps room; the share bar and running total give way first.
func TestNarrowWithBaseline(t *testing.T) {
	m := newModel(t, example(t), 60, 18)
	press(m, "m")
	lay := m.layout()
	if lay.listW < minLabel || lay.cols.bar || !lay.cols.delta {
		t.Errorf("at 60 columns: list %d wide, columns %+v", lay.listW, lay.cols)
	}
}

// residual is a block of three residual repeats whose first needs a
// projection shortcut (the channels double), then an activation.
const residual = `stackfit: 1
input: [16, 32, 32]
layers:
  - block: 3
    residual: true
    after: relu
    layers:
      - conv: 32
        kernel: 3
        pad: 1
      - norm: batch
  - act: relu
`

// TestBlocksUnfoldFully: an unfolded block shows the layers of its first
// repeat, the rows the engine adds to it (the projection shortcut, the
// addition, the activation after it) and a header per later repeat, whose
// rows show when it is opened; each can be selected and explained, none
// edited, and the side column gives its figures.
func TestBlocksUnfoldFully(t *testing.T) {
	m := newModel(t, load(t, residual), 120, 40)
	v := view(m)
	for _, want := range []string{"conv 32 k1 nobias", "add shortcut", "repeat 2 of 3", "repeat 3 of 3"} {
		if !strings.Contains(v, want) {
			t.Errorf("unfolded block lacks %q:\n%s", want, v)
		}
	}
	if strings.Contains(v, "1.2.1 ") {
		t.Error("a later repeat's rows show before it is opened")
	}
	// Select the header of repeat 2 and open it.
	for m.tree.current().gen == nil || m.tree.current().gen.repeat != 2 {
		press(m, "j")
	}
	press(m, "space")
	v = view(m)
	if !strings.Contains(v, "1.2.1") || !strings.Contains(v, "1.2.add") {
		t.Errorf("repeat 2 opened does not show its rows:\n%s", v)
	}
	press(m, "j") // its first row: explained, with figures
	cur := m.tree.current()
	if cur.gen == nil || m.nums.res.Rows[cur.first].Path.String() != "1.2.1" {
		t.Fatalf("selected %+v", cur)
	}
	if d := strings.Join(m.frame().detailLines(), "\n"); !strings.Contains(d, "made by its block") || !strings.Contains(d, "params = ") {
		t.Errorf("details of a generated row:\n%s", d)
	}
	n := len(m.stack.Layers[0].Body)
	press(m, "enter")
	press(m, "x")
	press(m, ">")
	if len(m.stack.Layers[0].Body) != n || m.stack.Layers[0].Body[0].Filters != 32 || len(m.hist.undo) != 0 || !strings.Contains(m.status, "follows from its block") {
		t.Errorf("a generated row was edited: %q", m.status)
	}
	// Folding the block hides all of it.
	press(m, "home", "space")
	if v := view(m); strings.Contains(v, "repeat 2 of 3") {
		t.Errorf("folded block still shows its repeats:\n%s", v)
	}
}

// TestOpenPromptCompletesAndReselects: the open prompt completes file
// names, and after a failed open the old text is selected, so typing
// replaces it.
func TestOpenPromptCompletesAndReselects(t *testing.T) {
	files := memFiles{"nets/a.yaml": example(t), "nets/b.yaml": example(t)}
	m := New(Options{Stack: example(t), Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Files: files})
	m.Update(tea.WindowSizeMsg{Width: 100, Height: 30})
	press(m, "o")
	typeText(m, "nets/a")
	press(m, "tab")
	if got := promptOf(m).Value(); got != "nets/a.yaml" {
		t.Errorf("completion gave %q", got)
	}
	press(m, "ctrl+u")
	typeText(m, "nope.yaml")
	press(m, "enter")
	if !promptBad(m) {
		t.Fatal("a missing file was not refused")
	}
	typeText(m, "nets/b.yaml")
	if got := promptOf(m).Value(); got != "nets/b.yaml" {
		t.Errorf("typing after a refusal appended: %q", got)
	}
}

// leaky is a discriminator's start: convolutions with bias, no norm,
// leaky-relu 0.2.
const leaky = `stackfit: 1
input: [3, 64, 64]
layers:
  - conv: 32
    kernel: 4
    stride: 2
    pad: 1
  - act: leaky-relu
    slope: 0.2
`

// TestStageFollowsTheStack: the stage key copies the stack's own layers
// (here no norm and leaky-relu 0.2, not the conv-norm-relu template), and
// the stage settings from the setup form are saved with the file.
func TestStageFollowsTheStack(t *testing.T) {
	m := newModel(t, load(t, leaky), 100, 30)
	press(m, "end", "n")
	b := m.stack.Layers[len(m.stack.Layers)-1]
	if b.Kind != engine.KindBlock || len(b.Body) != 2 || b.Body[1].Act != engine.ActLeakyReLU || b.Body[1].Slope != 0.2 {
		t.Fatalf("the stage copies nothing of the stack: %+v", b)
	}
	if !strings.Contains(m.status, "act leaky-relu 0.2") {
		t.Errorf("status %q", m.status)
	}
	press(m, "t")
	for formOf(m).Keys()[formOf(m).Focused()] != "stage cap" {
		press(m, "tab")
	}
	press(m, "ctrl+u")
	typeText(m, "256")
	press(m, "enter")
	if m.stack.Stage.Cap != 256 {
		t.Fatalf("stage cap %d", m.stack.Stage.Cap)
	}
	data, err := stackfile.Save(m.stack)
	if err != nil || !strings.Contains(string(data), "stage:") || !strings.Contains(string(data), "cap: 256") {
		t.Errorf("the stage settings are not saved (%v):\n%s", err, data)
	}
}

// TestLongStatusShownWhole: a message longer than the window (a keys-file
// problem at start) is shown whole over the footer until the next key.
func TestLongStatusShownWhole(t *testing.T) {
	msg := "the default keys apply, not the keys file's: /home/someone/.config/stackfit/keys.yaml: unknown action \"foo\" — fix or remove the keys file"
	m := New(Options{Stack: example(t), Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Notice: msg})
	m.Update(tea.WindowSizeMsg{Width: 80, Height: 24})
	flat := strings.Join(strings.Fields(view(m)), " ")
	if !strings.Contains(flat, "fix or remove the keys file") {
		t.Errorf("the notice is cut:\n%s", view(m))
	}
	press(m, "j")
	if v := view(m); !strings.Contains(v, "batch 256") {
		t.Errorf("after a key the footer is still covered:\n%s", v)
	}
}
