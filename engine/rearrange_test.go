package engine_test

import (
	"testing"

	"stackfit/engine"
)

// rearrangeStack runs the three rearranging kinds between convolutions on
// an 8×4×4 input: conv 16 → to-space 2 (4×8×8) → conv 8 → keep 5 → conv 4
// → to-channels 2 (16×4×4).
func rearrangeStack() *engine.Stack {
	k1 := engine.Square(1)
	return &engine.Stack{Input: engine.Shape{C: 8, H: 4, W: 4}, Layers: []engine.Layer{
		{Kind: engine.KindConv, Filters: 16, Kernel: k1},
		{Kind: engine.KindToSpace, PixelFactor: 2},
		{Kind: engine.KindConv, Filters: 8, Kernel: k1},
		{Kind: engine.KindKeep, Keep: 5},
		{Kind: engine.KindConv, Filters: 4, Kernel: k1},
		{Kind: engine.KindToChannels, PixelFactor: 2},
	}}
}

// TestRearrangeKeep checks what the rearranging kinds keep for the
// backward pass, per row, fp32, batch 1, against PyTorch 1.13's autograd
// read with saved_tensors_hooks: nn.PixelShuffle, nn.PixelUnshuffle and
// x[:, :n] save no tensor; a convolution saves its input, and after the
// slice that input is a view whose storage is the whole 8-channel map the
// slice was taken from (8·8·8 values, not 5·8·8).
func TestRearrangeKeep(t *testing.T) {
	r := engine.Evaluate(rearrangeStack())
	if r.Errors != 0 {
		t.Fatal(r.Diags)
	}
	var m engine.Memory
	r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
	want := []int64{8 * 4 * 4 * 4, 0, 4 * 8 * 8 * 4, 0, 8 * 8 * 8 * 4, 0}
	for i, w := range want {
		if m.Rows[i] != w {
			t.Errorf("row %d (%s): keeps %d bytes, want %d", i+1, r.Rows[i].Layer.Kind, m.Rows[i], w)
		}
	}
	if out := (engine.Shape{C: 16, H: 4, W: 4}); r.Output != out {
		t.Errorf("output %v, want %v", r.Output, out)
	}
}

// TestRearrangeWork checks the time model's work for the rearranging
// kinds (common practice: a permutation is a copy and computes nothing):
// to-space and to-channels read their input and write their output
// forward, and backward read the output's gradient and write the input's;
// keep is a view and does no work.
func TestRearrangeWork(t *testing.T) {
	r := engine.Evaluate(rearrangeStack())
	var tm engine.Time
	r.Time(engine.Training{Batch: 2, Precision: engine.FP32}, flat, ones(), &tm)
	if !tm.Estimated {
		t.Fatalf("not estimated: %+v", tm)
	}
	const n, elems = 2.0, 4 * 8 * 8 // every rearranged map here holds 256 values per sample
	for _, i := range []int{1, 5} {
		l := tm.Layers[i]
		if l.Class != engine.ClassMemory || l.FwdFLOPs != 0 || l.BwdFLOPs != 0 || l.FwdBytes != n*4*2*elems || l.BwdBytes != n*4*2*elems {
			t.Errorf("row %d (%s): %+v; want no FLOPs, %g bytes each way", i+1, r.Rows[i].Layer.Kind, l, n*4*2*elems)
		}
	}
	if l := tm.Layers[3]; l.FwdBytes != 0 || l.BwdBytes != 0 || l.Forward != 0 || l.Backward != 0 {
		t.Errorf("keep: %+v; want no work", l)
	}
}
