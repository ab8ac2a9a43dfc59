package editor

import (
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// TestOrchardUNet builds the bruise marker of an orchard camera — a U-Net
// (Ronneberger et al. 2015): a 3×256×256 input, a 16-channel stem, four
// downsampling stages to 256 channels at 16×16, four up-stages joined to
// the encoder map of their size back to 256×256, and a 1×1 convolution to
// 2 classes — from an empty file with the stage keys, in at most 150 keys.
func TestOrchardUNet(t *testing.T) {
	m := New(Options{Path: filepath.Join(t.TempDir(), "bruises.yaml"), NewFile: true,
		Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), Files: store.Disk{}})
	keys := 0
	send := func(ks ...string) {
		keys += len(ks)
		press(m, ks...)
	}
	line := func(text string) { // a line typed into the open prompt, then enter
		keys += len([]rune(text)) + 1
		typeText(m, text)
		press(m, "enter")
	}
	send("ctrl+u") // clear the suggested input shape
	line("3x256x256")
	for _, l := range []string{"conv 16 k3 p1 nobias", "norm batch", "act relu"} {
		send(":")
		line(l)
	}
	send("n", "n", "n", "n")
	send("N", "N", "N", "N")
	if !strings.Contains(m.status, "joined item 3, now named skip1") {
		t.Errorf("the last up-stage's status %q does not name the stem it joined", m.status)
	}
	send(":")
	line("conv 2 k1")

	t.Logf("%d keys", keys)
	if keys > 150 {
		t.Errorf("%d keys, want at most 150", keys)
	}
	r := engine.Evaluate(m.stack)
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	if r.Output != (engine.Shape{C: 2, H: 256, W: 256}) {
		t.Errorf("output %v, want 2×256×256", r.Output)
	}
	// Each up-stage joins the encoder map of its size: four joins, each
	// of two maps of one height and width, none cropped.
	want := map[string]engine.Shape{"down3": {C: 256, H: 32, W: 32}, "down2": {C: 128, H: 64, W: 64},
		"down1": {C: 64, H: 128, W: 128}, "skip1": {C: 32, H: 256, W: 256}}
	joins := 0
	for _, row := range r.Rows {
		if row.Layer.Kind != engine.KindConcat {
			continue
		}
		joins++
		if w, ok := want[row.Layer.From]; !ok || row.Out != w || row.Status != engine.StatusOK || row.Layer.Crop {
			t.Errorf("join %s of %q: %v %v, want %v", row.Path, row.Layer.From, row.Out, row.Status, w)
		}
		delete(want, row.Layer.From)
	}
	if joins != 4 || len(want) != 0 {
		t.Errorf("%d joins; not joined: %v", joins, want)
	}
	// Eight stage presses, eight undo steps, back to the stem.
	for i := 0; i < 9; i++ {
		press(m, "u")
	}
	if len(m.stack.Layers) != 3 || m.stack.Layers[2].Name != "" {
		t.Errorf("after undoing the head and the stages: %d items, stem named %q", len(m.stack.Layers), m.stack.Layers[2].Name)
	}
}

// TestUNetSaves: the stack the stage keys build saves and loads back to
// the same rows (the names and joins are the file's own).
func TestUNetSaves(t *testing.T) {
	m := newModel(t, &engine.Stack{Input: engine.Shape{C: 3, H: 64, W: 64}}, 100, 30)
	press(m, "n", "n", "N", "N")
	data, err := stackfile.Save(m.stack)
	if err != nil {
		t.Fatal(err)
	}
	back, err := stackfile.Load(data)
	if err != nil {
		t.Fatalf("%v\n%s", err, data)
	}
	a, b := engine.Evaluate(m.stack), engine.Evaluate(back)
	if a.Errors != 0 || a.Totals != b.Totals || a.Output != b.Output || !strings.Contains(string(data), "concat: down1") {
		t.Errorf("saved %v %+v, loaded %v %+v:\n%s", a.Output, a.Totals, b.Output, b.Totals, data)
	}
}

// TestUpStageKey: with no earlier map of the doubled size the up-stage is
// still added, without a join, and the status line says so; each press is
// one undo step, and the key is safe on every row.
func TestUpStageKey(t *testing.T) {
	tests := []struct {
		name   string
		stack  *engine.Stack
		keys   []string
		status string
		items  int
	}{
		{"empty stack", &engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}}, []string{"N"},
			"added up1: double the size to 16×16, 1 channel by deconv; no earlier layer is 16×16, so nothing is joined", 1},
		{"after a stage", &engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}}, []string{"n", "N"},
			"added up1: double the size to 8×8, 3 channels by deconv; no earlier layer is 8×8, so nothing is joined", 2},
		{"joins a named stage", &engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}}, []string{"n", "n", "N"},
			"added up1: double the size to 4×4, 6 channels by deconv; joined down1", 3},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := newModel(t, tt.stack, 100, 30)
			press(m, tt.keys...)
			if m.status != tt.status || len(m.stack.Layers) != tt.items {
				t.Errorf("status %q, %d items; want %q, %d", m.status, len(m.stack.Layers), tt.status, tt.items)
			}
			press(m, "u")
			if len(m.stack.Layers) != tt.items-1 {
				t.Errorf("one undo leaves %d items, want %d", len(m.stack.Layers), tt.items-1)
			}
		})
	}
	m := newModel(t, example(t), 100, 30)
	for i := 0; i < 40; i++ {
		press(m, "N", "j", "j")
	}
	if r := engine.Evaluate(m.stack); len(m.stack.Layers) < 28 || r.Rows == nil {
		t.Errorf("%d items after pressing the up-stage key down the example", len(m.stack.Layers))
	}
}
