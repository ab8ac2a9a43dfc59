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

func TestLongStackResolves(t *testing.T) {
	s := longStack(1000)
	r := Evaluate(s)
	if len(s.Layers) < 1000 || r.Errors != 0 {
		t.Fatalf("%d layers, %d errors: %v", len(s.Layers), r.Errors, r.Diags)
	}
}

// BenchmarkEvaluate1000 recomputes a 1,000-layer stack into a reused
// Result, as the editor does on every keystroke.
func BenchmarkEvaluate1000(b *testing.B) {
	s := longStack(1000)
	var r Result
	r.Evaluate(s)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		r.Evaluate(s)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(s.Layers)), "ns/layer")
}

// BenchmarkEvaluate1000Fresh evaluates into a new Result each time.
func BenchmarkEvaluate1000Fresh(b *testing.B) {
	s := longStack(1000)
	b.ReportAllocs()
	for b.Loop() {
		Evaluate(s)
	}
}
