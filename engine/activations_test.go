package engine_test

import (
	"testing"

	"stackfit/engine"
)

// actBetween is a 1×1 convolution to 8 channels, the activation a and a
// 1×1 convolution to 4, on a 3×4×4 input: the second convolution keeps
// a's output, so keeping a's input and keeping its output count
// differently.
func actBetween(a engine.Layer) *engine.Stack {
	k1 := engine.Square(1)
	return &engine.Stack{Input: engine.Shape{C: 3, H: 4, W: 4}, Layers: []engine.Layer{
		{Kind: engine.KindConv, Filters: 8, Kernel: k1}, a, {Kind: engine.KindConv, Filters: 4, Kernel: k1}}}
}

// TestActivationKeep checks what mish, softmax and prelu keep for the
// backward pass, per row, fp32, batch 1, against PyTorch 1.13's autograd
// read with saved_tensors_hooks: nn.Mish keeps its input, nn.Softmax(dim=1)
// its output, nn.PReLU its input and its weight (a parameter, counted with
// the weights, not here); a convolution keeps its input. A softmax's
// output is the next convolution's input: one storage, counted once.
func TestActivationKeep(t *testing.T) {
	const in, mid = 3 * 16 * 4, 8 * 16 * 4 // bytes of the input and of an 8×4×4 map
	tests := []struct {
		source string
		a      engine.Layer
		want   []int64
	}{
		{"saved_tensors_hooks: nn.Mish saves its input", engine.Layer{Kind: engine.KindAct, Act: engine.ActMish}, []int64{in, mid, mid}},
		{"saved_tensors_hooks: nn.Softmax(dim=1) saves its output", engine.Layer{Kind: engine.KindAct, Act: engine.ActSoftmax}, []int64{in, mid, 0}},
		{"saved_tensors_hooks: nn.PReLU(1) saves its input and weight", engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU}, []int64{in, mid, mid}},
		{"saved_tensors_hooks: nn.PReLU(C) saves its input and weight", engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU, PerChannel: true}, []int64{in, mid, mid}},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			r := engine.Evaluate(actBetween(tt.a))
			if r.Errors != 0 {
				t.Fatal(r.Diags)
			}
			var m engine.Memory
			r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
			for i, w := range tt.want {
				if m.Rows[i] != w {
					t.Errorf("row %d (%s): keeps %d bytes, want %d", i+1, r.Rows[i].Layer.Kind, m.Rows[i], w)
				}
			}
		})
	}
}

// TestActivationWork checks the time model's work for the new
// activations at batch 2 in fp32 (common practice: element-wise kernels
// read the input and write the output forward; backward reads the
// output's gradient and the kept tensor and writes the input's gradient):
// the FLOPs per element by our convention (mish 5: exp, add, log, tanh,
// product; softmax 5; prelu 2: a comparison and a product), and prelu's
// slopes read forward and read and written (their gradient) backward.
func TestActivationWork(t *testing.T) {
	const n, elems = 2.0, 8 * 4 * 4
	tests := []struct {
		source string
		a      engine.Layer
		flops  float64
		params float64
	}{
		{"Misra 2019, eq. 1: x·tanh(ln(1 + eˣ))", engine.Layer{Kind: engine.KindAct, Act: engine.ActMish}, 5, 0},
		{"softmax over the channels: max, difference, exp, sum, division", engine.Layer{Kind: engine.KindAct, Act: engine.ActSoftmax}, 5, 0},
		{"He et al. 2015, eq. 1, one shared slope", engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU}, 2, 1},
		{"He et al. 2015, eq. 1, a slope per channel", engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU, PerChannel: true}, 2, 8},
		{"relu keeps its one FLOP (common practice)", engine.Layer{Kind: engine.KindAct, Act: engine.ActReLU}, 1, 0},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			r := engine.Evaluate(actBetween(tt.a))
			var tm engine.Time
			r.Time(engine.Training{Batch: 2, Precision: engine.FP32}, flat, ones(), &tm)
			if !tm.Estimated {
				t.Fatalf("not estimated: %+v", tm)
			}
			l := tm.Layers[1]
			fwdBytes := n*4*2*elems + tt.params*4
			bwdBytes := n*4*3*elems + tt.params*8 // gradient and kept tensor read, gradient written; slopes read, their gradient written
			if l.Class != engine.ClassMemory || l.FwdFLOPs != n*tt.flops*elems || l.BwdFLOPs != n*tt.flops*elems ||
				l.FwdBytes != fwdBytes || l.BwdBytes != bwdBytes {
				t.Errorf("%+v; want %g FLOPs each way, %g bytes forward, %g backward", l, n*tt.flops*elems, fwdBytes, bwdBytes)
			}
		})
	}
}

// TestPReLUTraining checks that prelu's slopes are trained like any
// weight: He et al. 2015, section 2.1 (the channel-wise variant adds as
// many parameters as channels, the shared one one per layer); Adam keeps
// two moments per parameter (Kingma & Ba 2015, Algorithm 1), the slopes
// among them, and the export writes nn.PReLU with their number and start
// value (PyTorch's nn.PReLU(num_parameters, init), init 0.25 by default).
func TestPReLUTraining(t *testing.T) {
	shared := actBetween(engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU})
	perChannel := actBetween(engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU, PerChannel: true, Slope: 0.1})
	convs := int64(3*8 + 8 + 8*4 + 4)
	for _, c := range []struct {
		s      *engine.Stack
		slopes int64
		module string
	}{{shared, 1, "nn.PReLU(1, init=0.25)"}, {perChannel, 8, "nn.PReLU(8, init=0.1)"}} {
		r := engine.Evaluate(c.s)
		if r.Totals.Params != convs+c.slopes || r.Rows[1].Params != c.slopes {
			t.Errorf("%d slopes: params %d (row %d), want %d", c.slopes, r.Totals.Params, r.Rows[1].Params, convs+c.slopes)
		}
		var m engine.Memory
		r.Memory(engine.Training{Batch: 1, Optimizer: engine.Adam}, engine.DefaultAssumptions(), &m)
		if want := 2 * 4 * (convs + c.slopes); m.Optimizer != want {
			t.Errorf("%d slopes: Adam state %d bytes, want %d", c.slopes, m.Optimizer, want)
		}
		if tc, ok := engine.SpecOf(engine.KindAct).Torch(&r.Rows[1]); !ok || tc.Module != c.module {
			t.Errorf("%d slopes: export %q, want %q", c.slopes, tc.Module, c.module)
		}
	}
}
