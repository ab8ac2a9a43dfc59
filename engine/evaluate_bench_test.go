package engine

import "testing"

// longStack builds an n-layer stack mixing every common kind: conv, norm
// and activation triples with an occasional downsampling convolution or
// pooling layer, ending in a classifier head.
func longStack(n int) *Stack {
	s := &Stack{Input: Shape{3, 224, 224}}
	c := int64(32)
	for len(s.Layers) < n-4 {
		i := len(s.Layers)
		l := Layer{Kind: KindConv, Filters: c, Kernel: Square(3), Pad: Padding{Size: Square(1)}, NoBias: true}
		switch {
		case i%300 == 150:
			l.Stride = Square(2)
			c = min(2*c, 512)
			l.Filters = c
		case i%300 == 0 && i > 0:
			s.Layers = append(s.Layers, Layer{Kind: KindPool, Pool: PoolMax, Kernel: Square(2)})
			continue
		}
		s.Layers = append(s.Layers, l, Layer{Kind: KindNorm, Norm: NormBatch}, Layer{Kind: KindAct, Act: ActReLU})
	}
	s.Layers = append(s.Layers, Layer{Kind: KindGlobalPool}, Layer{Kind: KindFlatten}, Layer{Kind: KindDropout, Rate: 0.2}, Layer{Kind: KindDense, Filters: 1000})
	return s
}

// blockStack builds a stack of about n rows out of residual blocks (with
// projection shortcuts where the width changes) and named taps merged back
// by concatenation: the shapes the editor meets in real networks.
func blockStack(n int) *Stack {
	s := &Stack{Input: Shape{3, 224, 224}, Layers: []Layer{
		{Kind: KindConv, Filters: 32, Kernel: Square(3), Stride: Square(2), Pad: Padding{Size: Square(1)}, NoBias: true},
		{Kind: KindNorm}, {Kind: KindAct},
	}}
	rows, c := 0, int64(32)
	names := []string{"t0", "t1", "t2", "t3", "t4", "t5", "t6", "t7", "t8", "t9"}
	for stage := 0; rows < n-2; stage++ {
		rows = len(Evaluate(s).Rows)
		stride := int64(1)
		if stage%5 == 1 && stage < 20 {
			stride = 2
		}
		c = min(c+16, 256)
		body := []Layer{
			{Kind: KindConv, Filters: c, Kernel: Square(3), Stride: Square(stride), Pad: Padding{Size: Square(1)}, NoBias: true},
			{Kind: KindNorm}, {Kind: KindAct},
			{Kind: KindConv, Filters: c, Kernel: Square(3), Pad: Padding{Size: Square(1)}, NoBias: true},
			{Kind: KindNorm},
		}
		name := names[stage%len(names)] + string(rune('a'+stage/len(names)))
		s.Layers = append(s.Layers,
			Layer{Kind: KindBlock, Name: name, Repeat: 4, Residual: true, HasPostAct: true, Body: body},
			Layer{Kind: KindConv, Filters: c, Kernel: Square(1), NoBias: true},
			Layer{Kind: KindConcat, From: name},
			Layer{Kind: KindConv, Filters: c, Kernel: Square(1), NoBias: true})
	}
	s.Layers = append(s.Layers, Layer{Kind: KindGlobalPool}, Layer{Kind: KindDense, Filters: 1000})
	return s
}

func TestLongStacksResolve(t *testing.T) {
	for name, s := range map[string]*Stack{"plain": longStack(1000), "blocks": blockStack(1000)} {
		r := Evaluate(s)
		if len(r.Rows) < 1000 || r.Errors+r.Warnings != 0 {
			t.Fatalf("%s: %d rows, %d errors: %v", name, len(r.Rows), r.Errors, r.Diags)
		}
	}
}

// benchRecompute re-evaluates s into a reused Result, as the editor does on
// every keystroke, and reports the time per row.
func benchRecompute(b *testing.B, s *Stack) {
	var r Result
	r.Evaluate(s)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		r.Evaluate(s)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(r.Rows)), "ns/row")
}

// BenchmarkEvaluate1000Blocks recomputes about 1,000 rows built from
// residual blocks, projection shortcuts and named concatenations.
func BenchmarkEvaluate1000Blocks(b *testing.B) { benchRecompute(b, blockStack(1000)) }

// BenchmarkEvaluate1000 recomputes a 1,000-layer stack.
func BenchmarkEvaluate1000(b *testing.B) { benchRecompute(b, longStack(1000)) }

// BenchmarkEvaluate1000Fresh evaluates into a new Result each time.
func BenchmarkEvaluate1000Fresh(b *testing.B) {
	s := longStack(1000)
	b.ReportAllocs()
	for b.Loop() {
		Evaluate(s)
	}
}

// mobileStack builds a stack of about n rows the way the mobile families
// are written: inverted residual stages (identity-only shortcuts, a
// depthwise 3×3, a squeeze-and-excitation gate, stochastic depth, widths
// relative to the repeat's input with the MobileNet rounding) between
// densely linked blocks and Inception-style forks.
func mobileStack(n int) *Stack {
	s := &Stack{Input: Shape{3, 224, 224}, Layers: []Layer{
		{Kind: KindConv, Filters: 32, Kernel: Square(3), Stride: Square(2), Pad: Padding{Size: Square(1)}, NoBias: true},
		{Kind: KindNorm}, {Kind: KindAct, Act: ActReLU6},
	}}
	rows, c := 0, int64(32)
	for stage := 0; rows < n-2; stage++ {
		rows = len(Evaluate(s).Rows)
		stride := int64(1)
		if stage%4 == 1 && stage < 16 {
			stride = 2
		}
		out := min(c+8, 320)
		gate := Layer{Kind: KindGate, Body: []Layer{
			{Kind: KindGlobalPool, Pool: PoolAvg},
			{Kind: KindConv, Rel: Rel{Div: 4}, RoundTo: 8, Kernel: Square(1)}, {Kind: KindAct},
			{Kind: KindConv, Rel: Rel{Mul: 1}, Kernel: Square(1)}, {Kind: KindAct, Act: ActSigmoid},
		}}
		body := []Layer{
			{Kind: KindConv, Rel: Rel{Mul: 6}, Kernel: Square(1), NoBias: true}, {Kind: KindNorm}, {Kind: KindAct, Act: ActReLU6},
			{Kind: KindConv, Rel: Rel{Mul: 6}, Kernel: Square(3), Stride: Square(stride), Pad: Padding{Size: Square(1)}, Depthwise: true, NoBias: true},
			{Kind: KindNorm}, {Kind: KindAct, Act: ActReLU6},
			gate,
			{Kind: KindConv, Filters: out, Kernel: Square(1), NoBias: true}, {Kind: KindNorm},
		}
		dense := Layer{Kind: KindBlock, Repeat: 2, DenseLinks: true, Body: []Layer{
			{Kind: KindNorm}, {Kind: KindAct}, {Kind: KindConv, Filters: 8, Kernel: Square(3), Pad: Padding{Size: Square(1)}, NoBias: true},
		}}
		fork := Layer{Kind: KindFork, Body: []Layer{
			{Kind: KindBranch, Body: []Layer{{Kind: KindConv, Rel: Rel{Div: 2}, Kernel: Square(1), NoBias: true}}},
			{Kind: KindBranch, Body: []Layer{
				{Kind: KindConv, Rel: Rel{Div: 4}, Kernel: Square(1), NoBias: true}, {Kind: KindAct},
				{Kind: KindConv, Filters: out / 4, Kernel: Square(3), Pad: Padding{Size: Square(1)}, NoBias: true}}},
			{Kind: KindBranch, Body: []Layer{
				{Kind: KindPool, Kernel: Square(3), Stride: Square(1), Pad: Padding{Size: Square(1)}},
				{Kind: KindConv, Rel: Rel{Div: 4}, Kernel: Square(1), NoBias: true}}},
		}}
		s.Layers = append(s.Layers,
			Layer{Kind: KindBlock, Repeat: 3, Residual: true, IdentityOnly: true, DropPath: 0.1, Body: body},
			dense,
			Layer{Kind: KindConv, Filters: out, Kernel: Square(1), NoBias: true},
			fork)
		c = out
	}
	s.Layers = append(s.Layers, Layer{Kind: KindGlobalPool}, Layer{Kind: KindDense, Filters: 1000})
	return s
}

func TestMobileStackResolves(t *testing.T) {
	r := Evaluate(mobileStack(1000))
	if len(r.Rows) < 1000 || r.Errors != 0 {
		t.Fatalf("%d rows, %d errors: %v", len(r.Rows), r.Errors, r.Diags)
	}
}

// BenchmarkEvaluate1000Mobile recomputes about 1,000 rows of gates,
// identity-only residuals with stochastic depth, relative widths, dense
// links and forks; compare it with BenchmarkEvaluate1000Blocks in the same
// run.
func BenchmarkEvaluate1000Mobile(b *testing.B) { benchRecompute(b, mobileStack(1000)) }
