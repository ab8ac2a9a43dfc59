package engine_test

import (
	"math"
	"testing"

	"stackfit/engine"
)

// TestModelStateZeRO checks model-state memory against Rajbhandari et al.
// 2020 (ZeRO): mixed-precision Adam keeps 2 + 2 + 12 = 16 bytes per
// parameter (a 1.5 B-parameter model needs 24 GB, its fp16 weights 3 GB);
// the worked example Ψ = 7.5 B on 64 GPUs needs 120 GB, 31.4 GB, 16.6 GB and
// 1.9 GB per device with nothing, optimizer state, + gradients and
// + parameters sharded (GB = 10⁹ bytes).
func TestModelStateZeRO(t *testing.T) {
	w, g, o := engine.ModelState(1_500_000_000, engine.Training{Precision: engine.FP16Master, Optimizer: engine.Adam})
	if w+g+o != 24e9 {
		t.Errorf("1.5 B params: %d bytes, want 24e9", w+g+o)
	}
	if fp16 := w - 1_500_000_000*4; fp16 != 3e9 {
		t.Errorf("fp16 weights %d, want 3e9", fp16)
	}
	tests := []struct {
		shard engine.Shard
		gb    float64 // published, one decimal
	}{
		{engine.ShardNone, 120}, {engine.ShardOptimizer, 31.4}, {engine.ShardGradients, 16.6}, {engine.ShardParameters, 1.9},
	}
	for _, tt := range tests {
		w, g, o := engine.ModelState(7_500_000_000, engine.Training{Precision: engine.FP16Master, Optimizer: engine.Adam, GPUs: 64, Shard: tt.shard})
		if got := math.Round(float64(w+g+o)/1e8) / 10; got != tt.gb {
			t.Errorf("shard %v: %.1f GB, want %.1f (ZeRO worked example)", tt.shard, got, tt.gb)
		}
	}
}

// TestModelStatePrecisions checks the per-parameter bytes of each setup
// (common practice: fp32 weights and gradients 4 bytes each; Adam two fp32
// moments; SGD with momentum one; pure bf16 keeps everything in 2 bytes).
func TestModelStatePrecisions(t *testing.T) {
	tests := []struct {
		p       engine.Precision
		o       engine.Optimizer
		w, g, s int64
	}{
		{engine.FP32, engine.SGD, 4, 4, 0},
		{engine.FP32, engine.Momentum, 4, 4, 4},
		{engine.FP32, engine.AdamW, 4, 4, 8},
		{engine.BF16Mixed, engine.AdamW, 6, 4, 8}, // autocast: fp32 params + bf16 copies, fp32 grads and moments
		{engine.FP16Mixed, engine.RMSprop, 6, 4, 4},
		{engine.FP16Master, engine.AdamW, 6, 2, 8}, // fp16 weights + fp32 master, fp16 grads (ZeRO's accounting)
		{engine.BF16Master, engine.Momentum, 6, 2, 4},
		{engine.BF16, engine.Adam, 2, 2, 4},
		{engine.BF16, engine.Adagrad, 2, 2, 2},
	}
	for _, tt := range tests {
		w, g, s := engine.ModelState(1000, engine.Training{Precision: tt.p, Optimizer: tt.o})
		if w != 1000*tt.w || g != 1000*tt.g || s != 1000*tt.s {
			t.Errorf("%v %v: %d %d %d per 1000, want %d %d %d", tt.p, tt.o, w, g, s, 1000*tt.w, 1000*tt.g, 1000*tt.s)
		}
	}
}

// uniformStack is n identical 3×3 convolutions, each with a ReLU.
func uniformStack(n int) *engine.Stack {
	s := &engine.Stack{Input: engine.Shape{C: 16, H: 32, W: 32}}
	for i := 0; i < n; i++ {
		s.Layers = append(s.Layers,
			engine.Layer{Kind: engine.KindConv, Filters: 16, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}},
			engine.Layer{Kind: engine.KindAct})
	}
	return s
}

// TestCheckpointSqrtN checks Chen et al. 2016: keeping every √n-th output
// and recomputing the rest keeps O(√n) activations. Quadrupling the depth
// doubles the kept bytes (instead of quadrupling them).
func TestCheckpointSqrtN(t *testing.T) {
	kept := func(layers int) (plain, ckpt int64) {
		r := engine.Evaluate(uniformStack(layers))
		rows := int64(len(r.Rows))
		var m engine.Memory
		r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
		plain = m.ActPerSample
		k := int64(math.Round(math.Sqrt(float64(rows))))
		r.Memory(engine.Training{Batch: 1, Checkpoint: k}, engine.DefaultAssumptions(), &m)
		return plain, m.ActPerSample
	}
	p1, c1 := kept(32)                                               // 64 rows, k = 8
	p4, c4 := kept(128)                                              // 256 rows, k = 16
	if ratio := float64(p4) / float64(p1); math.Abs(ratio-4) > 0.1 { // (4n+1)/(n+1): the input counts once
		t.Errorf("without checkpointing 4× the depth keeps %.2f× the bytes, want 4", ratio)
	}
	if ratio := float64(c4) / float64(c1); math.Abs(ratio-2) > 0.1 {
		t.Errorf("with √n checkpointing 4× the depth keeps %.2f× the bytes, want 2", ratio)
	}
	if c4 >= p4/4 {
		t.Errorf("checkpointing keeps %d of %d bytes", c4, p4)
	}
}

// TestMemoryCategories checks the arithmetic of one small stack by hand.
func TestMemoryCategories(t *testing.T) {
	s := &engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}, Layers: []engine.Layer{
		{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}}, // keeps its input: 192 values
		{Kind: engine.KindAct},                            // relu keeps its output: 512
		{Kind: engine.KindPool, Kernel: engine.Square(2)}, // keeps its input (the relu output, counted once) + 128 int64 indices
		{Kind: engine.KindDropout, Rate: 0.5},             // 128 one-byte mask values
	}}
	r := engine.Evaluate(s)
	var m engine.Memory
	tr := engine.Training{Batch: 10, Precision: engine.FP32, Optimizer: engine.Adam, Budget: 1 << 30}
	r.Memory(tr, engine.DefaultAssumptions(), &m)
	if want := int64(192*4 + 512*4 + 128*8 + 128); m.ActPerSample != want {
		t.Errorf("activations per sample %d, want %d", m.ActPerSample, want)
	}
	if want := []int64{7680, 20480, 10240, 1280}; len(m.Rows) != 4 || m.Rows[0] != want[0] || m.Rows[1] != want[1] || m.Rows[2] != want[2] || m.Rows[3] != want[3] {
		t.Errorf("rows %v, want %v", m.Rows, want)
	}
	params := int64(8*3*9 + 8)
	if m.Weights != 4*params || m.Gradients != 4*params || m.Optimizer != 8*params {
		t.Errorf("model state %d %d %d", m.Weights, m.Gradients, m.Optimizer)
	}
	// The step's peak, walked by hand (bytes per sample, fp32): forward
	// ends with the 3,968 kept bytes and the 512-byte output alive; in
	// backward the loss gradient (512), the dropout's input gradient (512),
	// the pool's (2,048; its output gradient and the indices then go) and
	// at the relu its input's (2,048): 768 input + 2,048 relu output + 512
	// output + 2,048 + 2,048 = 7,424 at row 2, backward. Scratch is what
	// that adds to the kept bytes: 3,456.
	if m.PeakPerSample != 7424 || m.PeakPhase != engine.PhaseBackward || m.PeakRow != 1 {
		t.Errorf("peak %d in %v at row %d, want 7424 in backward at row index 1", m.PeakPerSample, m.PeakPhase, m.PeakRow)
	}
	if want := int64(engine.DefaultWorkspace) + 10*(7424-3968); m.Workspace != want {
		t.Errorf("workspace %d, want %d", m.Workspace, want)
	}
	sum := m.Weights + m.Gradients + m.Optimizer + m.Activations + m.Workspace + m.Overhead
	if m.Total != sum || !m.Fits || m.Reserve != (1<<30)/10+1 {
		t.Errorf("total %d (sum %d) fits %v reserve %d", m.Total, sum, m.Fits, m.Reserve)
	}
	// Inference: weights plus the most values alive at once: input 192 and conv output 512 at the conv, then 512 + 512 at the relu.
	if want := 4*params + 10*4*(512+512); m.Inference != want {
		t.Errorf("inference %d, want %d", m.Inference, want)
	}
}

// TestFitSolver checks the answers are exact: the largest batch fits and
// one more does not; the fewest GPUs fit and one fewer does not.
func TestFitSolver(t *testing.T) {
	s := loadTestdata(t, "published/resnet50.yaml")
	r := engine.Evaluate(s)
	a := engine.DefaultAssumptions()
	tr := engine.Training{Batch: 256, Precision: engine.BF16Mixed, Optimizer: engine.AdamW, Budget: 24 << 30}
	var m engine.Memory
	r.Memory(tr, a, &m)
	f := engine.SolveFit(s, r, &m, tr, a)
	if !f.HasBudget || f.MaxBatch < 1 || f.BatchLimit != engine.CatActivations {
		t.Fatalf("fit %+v", f)
	}
	at := func(b, g int64) bool {
		x := tr
		x.Batch, x.GPUs = b, g
		var mm engine.Memory
		r.Memory(x, a, &mm)
		return mm.Fits
	}
	if !at(f.MaxBatch, 1) || at(f.MaxBatch+1, 1) {
		t.Errorf("max batch %d: fits %v, +1 fits %v", f.MaxBatch, at(f.MaxBatch, 1), at(f.MaxBatch+1, 1))
	}
	if f.MinGPUs < 1 || !at(256, f.MinGPUs) || (f.MinGPUs > 1 && at(256, f.MinGPUs-1)) {
		t.Errorf("min GPUs %d", f.MinGPUs)
	}
	if f.MaxWidth <= 0 {
		t.Errorf("max width %v", f.MaxWidth)
	}
	// The width answer fits and 0.05 more does not.
	widthFits := func(alpha float64) bool {
		sc, _ := engine.ScaleWidth(s, alpha, 8)
		rr := engine.Evaluate(sc)
		var mm engine.Memory
		rr.Memory(tr, a, &mm)
		return mm.Fits
	}
	if !widthFits(f.MaxWidth) || widthFits(f.MaxWidth+0.05) {
		t.Errorf("max width %.2f: fits %v, +0.05 fits %v", f.MaxWidth, widthFits(f.MaxWidth), widthFits(f.MaxWidth+0.05))
	}
	// A budget below the model state fits no batch and names the culprit.
	tiny := tr
	tiny.Budget = 512 << 20
	r.Memory(tiny, a, &m)
	f = engine.SolveFit(s, r, &m, tiny, a)
	if f.MaxBatch != 0 || f.BatchLimit != engine.CatOverhead || f.MinGPUs != 0 {
		t.Errorf("tiny budget: %+v", f)
	}
}

func BenchmarkFitSolver(b *testing.B) {
	s := loadTestdata(b, "published/resnet50.yaml")
	r := engine.Evaluate(s)
	a := engine.DefaultAssumptions()
	tr := engine.Training{Batch: 256, Precision: engine.BF16Mixed, Optimizer: engine.AdamW, Budget: 24 << 30}
	var m engine.Memory
	r.Memory(tr, a, &m)
	b.ReportAllocs()
	for b.Loop() {
		engine.SolveFit(s, r, &m, tr, a)
	}
}

func BenchmarkMemory1000(b *testing.B) {
	s := uniformStack(500)
	r := engine.Evaluate(s)
	var m engine.Memory
	tr := engine.Training{Batch: 64, Budget: 24 << 30}
	r.Memory(tr, engine.DefaultAssumptions(), &m)
	b.ReportAllocs()
	for b.Loop() {
		r.Memory(tr, engine.DefaultAssumptions(), &m)
	}
}

// TestMobileKindsKeep checks what the new element-wise kinds keep for the
// backward pass, per row, fp32, batch 1, against PyTorch 1.13's autograd
// (PyTorch as reference library, read with saved_tensors_hooks):
// Hardswish and Hardsigmoid save their input; x · γ[:, None, None] saves x
// (and γ, a parameter); the shuffle's reshape, transpose and copy save
// nothing.
func TestMobileKindsKeep(t *testing.T) {
	s := &engine.Stack{Input: engine.Shape{C: 8, H: 4, W: 4}, Layers: []engine.Layer{
		{Kind: engine.KindConv, Filters: 16, Kernel: engine.Square(1)},
		{Kind: engine.KindAct, Act: engine.ActHardSwish},
		{Kind: engine.KindScale, ScaleInit: 1e-6},
		{Kind: engine.KindShuffle, Groups: 4},
		{Kind: engine.KindAct, Act: engine.ActHardSigmoid},
	}}
	r := engine.Evaluate(s)
	if r.Errors != 0 {
		t.Fatal(r.Diags)
	}
	var m engine.Memory
	r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
	want := []int64{8 * 16 * 4, 16 * 16 * 4, 16 * 16 * 4, 0, 16 * 16 * 4}
	for i, w := range want {
		if m.Rows[i] != w {
			t.Errorf("row %d (%s) keeps %d bytes, want %d", i+1, engine.RowSummary(&r.Rows[i]), m.Rows[i], w)
		}
	}
}

// TestMemoryAllocatesNothing: a recompute of the memory estimate, step
// simulation included, reuses its storage (the editor runs it on every
// keystroke).
func TestMemoryAllocatesNothing(t *testing.T) {
	for _, s := range []*engine.Stack{uniformStack(500), loadTestdata(t, "published/resnet50.yaml"), loadTestdata(t, "published/densenet121.yaml")} {
		r := engine.Evaluate(s)
		var m engine.Memory
		tr := engine.Training{Batch: 64, Budget: 24 << 30}
		r.Memory(tr, engine.DefaultAssumptions(), &m)
		if n := testing.AllocsPerRun(20, func() { r.Memory(tr, engine.DefaultAssumptions(), &m) }); n != 0 {
			t.Errorf("%s: %.0f allocations per memory recompute", s.Name, n)
		}
	}
}

// TestScaleWidthResNet50: doubling ResNet-50's widths multiplies its
// parameters by about 4 (the classifier keeps its 1,000 classes, so a
// little less: ×3.83); before the multiplier reached block bodies it was
// ×1.001.
func TestScaleWidthResNet50(t *testing.T) {
	s := loadTestdata(t, "published/resnet50.yaml")
	sc, err := engine.ScaleWidth(s, 2, 8)
	if err != nil {
		t.Fatal(err)
	}
	a, b := engine.Evaluate(s).Totals.Params, engine.Evaluate(sc).Totals.Params
	if ratio := float64(b) / float64(a); ratio < 3.7 || ratio > 4 {
		t.Errorf("×2 widths: %d → %d parameters, ×%.2f", a, b, ratio)
	}
}

// TestCheckpointPeakSimulated: under checkpointing the step is simulated
// too — each segment recomputed before its backward — and its peak grows
// as √n, as Chen et al. 2016 show for the memory of √n-segment
// checkpointing: 4× the depth gives about 2× the peak, far below the peak
// without checkpointing, and never below what the forward pass keeps.
func TestCheckpointPeakSimulated(t *testing.T) {
	peak := func(layers int) (plain, ckpt engine.Memory) {
		r := engine.Evaluate(uniformStack(layers))
		k := int64(math.Round(math.Sqrt(float64(len(r.Rows)))))
		r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &plain)
		r.Memory(engine.Training{Batch: 1, Checkpoint: k}, engine.DefaultAssumptions(), &ckpt)
		return
	}
	p1, c1 := peak(32)
	p4, c4 := peak(128)
	if c1.PeakRow < 0 || c4.PeakRow < 0 || c4.PeakPhase != engine.PhaseBackward {
		t.Errorf("checkpointed peak not simulated: row %d, %v", c4.PeakRow, c4.PeakPhase)
	}
	if ratio := float64(c4.PeakPerSample) / float64(c1.PeakPerSample); math.Abs(ratio-2) > 0.25 {
		t.Errorf("with √n checkpointing 4× the depth peaks at %.2f× the bytes, want about 2", ratio)
	}
	if c4.PeakPerSample >= p4.PeakPerSample/3 || c4.PeakPerSample < c4.ActPerSample || c1.PeakPerSample > p1.PeakPerSample {
		t.Errorf("peaks: plain %d, checkpointed %d (keeps %d)", p4.PeakPerSample, c4.PeakPerSample, c4.ActPerSample)
	}
}

// TestSpatialGateKeeps holds the spatial gate to what PyTorch 1.13's
// autograd saves for x · σ(conv([mean(x, 1); max(x, 1)])), read with
// saved_tensors_hooks (testdata/papers/spatialgate.py; per sample, fp32):
// the input, the 2×H×W concatenation, the 1×H×W gate and, when the input
// needs a gradient, the int64 indices of the maximum; with the batch
// norm also the convolution's 1×H×W output. On a 5×9×11 input that is
// 1980 + 792 + 396 + 792 = 3960 bytes (the measured figure), 3168 without
// the indices, 4356 and 3564 with the norm.
func TestSpatialGateKeeps(t *testing.T) {
	tests := []struct {
		source string
		first  bool // the gate is the first layer: its input needs no gradient
		norm   bool
		want   int64
	}{
		{"saved_tensors_hooks, input with a gradient", false, false, 3960},
		{"saved_tensors_hooks, input without a gradient", true, false, 3168},
		{"saved_tensors_hooks, with the norm", false, true, 4356},
		{"saved_tensors_hooks, with the norm, input without a gradient", true, true, 3564},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			gate := engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(7), GateNorm: tt.norm}
			s := &engine.Stack{Input: engine.Shape{C: 5, H: 9, W: 11}, Layers: []engine.Layer{gate}}
			at := 0
			if !tt.first {
				// A 1×1 convolution that keeps the shape gives the input a gradient.
				s.Layers = []engine.Layer{{Kind: engine.KindConv, Filters: 5, Kernel: engine.Square(1)}, gate}
				at = 1
			}
			r := engine.Evaluate(s)
			if r.Errors != 0 {
				t.Fatal(r.Diags)
			}
			var m engine.Memory
			r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
			if m.Rows[at] != tt.want {
				t.Errorf("keeps %d bytes, want %d", m.Rows[at], tt.want)
			}
		})
	}
}
