package engine_test

import (
	"math"
	"testing"

	"stackfit/engine"
)

// TestConvClasses: which class of operation each convolution's kernels
// belong to. A 1×1 convolution of stride 1 and one group is a matrix
// product over the positions (common practice: libraries run it as a
// GEMM; PyTorch's CPU dispatch in ConvParams::use_mkldnn, Convolution.cpp,
// singles it out at batches under 16 on one thread); strided or larger
// kernels are dense convolutions, grouped and depthwise ones their own.
func TestConvClasses(t *testing.T) {
	in := engine.Shape{C: 32, H: 16, W: 16}
	for _, tc := range []struct {
		name  string
		layer engine.Layer
		want  engine.OpClass
	}{
		{"1×1 stride 1", engine.Layer{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(1)}, engine.ClassPointwise},
		{"1×1 stride 2", engine.Layer{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(1), Stride: engine.Square(2)}, engine.ClassConv},
		{"3×3", engine.Layer{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(3)}, engine.ClassConv},
		{"1×1 grouped", engine.Layer{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(1), Groups: 4}, engine.ClassGrouped},
		{"3×3 depthwise", engine.Layer{Kind: engine.KindConv, Filters: 32, Kernel: engine.Square(3), Depthwise: true}, engine.ClassGrouped},
		{"batch norm", engine.Layer{Kind: engine.KindNorm}, engine.ClassNorm},
		{"relu", engine.Layer{Kind: engine.KindAct}, engine.ClassMemory},
	} {
		r := engine.Evaluate(&engine.Stack{Input: in, Layers: []engine.Layer{tc.layer}})
		var tm engine.Time
		r.Time(engine.Training{Batch: 2}, flat, ones(), &tm)
		if !tm.Estimated || tm.Layers[0].Class != tc.want {
			t.Errorf("%s: class %v, want %v", tc.name, tm.Layers[0].Class, tc.want)
		}
	}
}

// TestProbesFollowTheStack: ResNet-50 (He et al. 2016, Table 1) at 128×128
// has 3×3 convolutions in four stages, 1×1 ones of many shapes and a
// classifier: the probes are at most ProbesPerClass per class, distinct,
// ordered by class, each class's first the one doing the most work (its
// FLOPs times the rows that repeat it), and their counts never exceed the
// rows of their class.
func TestProbesFollowTheStack(t *testing.T) {
	s := loadTestdata(t, "published/resnet50.yaml")
	s.Input.H, s.Input.W = 128, 128
	r := engine.Evaluate(s)
	var tm engine.Time
	r.Time(engine.Training{Batch: 4}, flat, ones(), &tm)
	rowsOf := map[engine.OpClass]int{}
	for _, l := range tm.Layers {
		rowsOf[l.Class]++
	}
	probes := r.Probes()
	per := map[engine.OpClass][]engine.Probe{}
	for i, p := range probes {
		if i > 0 && p.Class < probes[i-1].Class {
			t.Errorf("probe %d: class %v after %v", i, p.Class, probes[i-1].Class)
		}
		if p.Class != engine.ClassMemory && tm.Layers[p.Row].Class != p.Class { // the element-wise probe stands on the largest output
			t.Errorf("probe %d: row %d is %v, not %v", i, p.Row, tm.Layers[p.Row].Class, p.Class)
		}
		per[p.Class] = append(per[p.Class], p)
	}
	for _, c := range []engine.OpClass{engine.ClassConv, engine.ClassPointwise, engine.ClassMatrix, engine.ClassNorm, engine.ClassMemory} {
		ps := per[c]
		if len(ps) == 0 || len(ps) > engine.ProbesPerClass {
			t.Errorf("%v: %d probes, want 1 to %d", c, len(ps), engine.ProbesPerClass)
			continue
		}
		sum := 0
		for i, p := range ps {
			sum += p.Count
			if i > 0 && c != engine.ClassNorm && float64(p.Count)*p.FLOPs > float64(ps[i-1].Count)*ps[i-1].FLOPs {
				t.Errorf("%v: probe %d does more work than the one before it", c, i)
			}
		}
		if sum > rowsOf[c] {
			t.Errorf("%v: probes stand for %d rows of %d", c, sum, rowsOf[c])
		}
	}
	if len(per[engine.ClassGrouped]) != 0 {
		t.Errorf("ResNet-50 has no grouped convolution, yet %d probes", len(per[engine.ClassGrouped]))
	}
	// the stage-3 bottleneck's 3×3 (256 channels at 8×8) repeats six
	// times (Table 1: ×6), the most of any 3×3 shape at this size but for
	// the first of each stage, which is strided or of another input
	if p := per[engine.ClassConv][0]; p.Count < 5 {
		t.Errorf("the busiest 3×3 probe stands for %d rows; want the 5 repeats of stage 3", p.Count)
	}
}

// TestEfficiencyFallback: a class the calibration did not measure takes
// its related class's measured figure before the default.
func TestEfficiencyFallback(t *testing.T) {
	var set engine.Efficiency
	set[engine.ClassConv], set[engine.ClassMemory] = 0.1, 0.2
	e := engine.Training{Efficiency: set}.Efficiencies()
	def := engine.DefaultEfficiency()
	for _, tc := range []struct {
		class engine.OpClass
		want  float64
	}{
		{engine.ClassConv, 0.1}, {engine.ClassPointwise, 0.1}, {engine.ClassMemory, 0.2}, {engine.ClassNorm, 0.2},
		{engine.ClassGrouped, def[engine.ClassGrouped]}, {engine.ClassMatrix, def[engine.ClassMatrix]},
	} {
		if math.Abs(e[tc.class]-tc.want) > 1e-15 {
			t.Errorf("%v: %g, want %g", tc.class, e[tc.class], tc.want)
		}
	}
	set[engine.ClassPointwise] = 0.05
	if e := (engine.Training{Efficiency: set}).Efficiencies(); e[engine.ClassPointwise] != 0.05 {
		t.Errorf("a measured pointwise figure was replaced: %g", e[engine.ClassPointwise])
	}
}
