package engine_test

import (
	"context"
	"errors"
	"math"
	"testing"

	"stackfit/engine"
)

// TestScaleEfficientNet scales the published EfficientNet-B0 stack by the
// width and depth multipliers and input sizes torchvision gives the larger
// variants (torchvision 0.14, torchvision/models/efficientnet.py:
// efficientnet_b1 width 1.0 depth 1.1 at 240, b2 1.1 1.2 at 260, b3 1.2
// 1.4 at 300, b4 1.4 1.8 at 380, b5 1.6 2.2 at 456, b6 1.8 2.6 at 528, b7
// 2.0 3.1 at 600) and holds each to torchvision's model. Parameters are
// torchvision's model documentation (weights metadata num_params); buffers,
// MBConv units and B1's and B2's MACs (one weight use per output position,
// convolutions and the classifier) were measured on Debian's torchvision
// 0.14.1 (sum of numel over parameters() and buffers(); MBConv modules
// counted; MACs as the reference suite in engine/export counts them).
// torchvision's rules: each stage's units ⌈units · depth⌉, each stage's
// and the stem's channels _make_divisible(channels · width, 8), the last
// convolution 4 × the last stage's scaled width.
func TestScaleEfficientNet(t *testing.T) {
	b0 := loadTestdata(t, "published/efficientnet-b0.yaml")
	tests := []struct {
		name                  string
		width, depth          float64
		size                  int64
		params, buffers, macs int64 // macs 0: not measured
		units                 int64
	}{
		{"efficientnet_b1", 1.0, 1.1, 240, 7794184, 62117, 686802832, 23},
		{"efficientnet_b2", 1.1, 1.2, 260, 9109994, 67637, 993561872, 23},
		{"efficientnet_b3", 1.2, 1.4, 300, 12233232, 87374, 0, 26},
		{"efficientnet_b4", 1.4, 1.8, 380, 19341616, 125296, 0, 32},
		{"efficientnet_b5", 1.6, 2.2, 456, 30389784, 172852, 0, 39},
		{"efficientnet_b6", 1.8, 2.6, 528, 43040704, 224566, 0, 45},
		{"efficientnet_b7", 2.0, 3.1, 600, 66347960, 310883, 0, 55},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := engine.Scale(b0, engine.Scaling{Width: tt.width, Depth: tt.depth, Size: engine.Square(tt.size)})
			if err != nil {
				t.Fatal(err)
			}
			r := engine.Evaluate(s)
			if r.Errors != 0 {
				t.Fatalf("errors: %v", r.Diags)
			}
			if r.Totals.Params != tt.params || r.Totals.Buffers != tt.buffers {
				t.Errorf("params %d, buffers %d; want %d and %d (torchvision %s)", r.Totals.Params, r.Totals.Buffers, tt.params, tt.buffers, tt.name)
			}
			if tt.macs != 0 && r.Totals.MACs != tt.macs {
				t.Errorf("MACs %d, want %d (torchvision %s, measured)", r.Totals.MACs, tt.macs, tt.name)
			}
			var units int64
			for _, l := range s.Layers {
				if l.Kind == engine.KindBlock {
					units += max(l.Repeat, 1)
				}
			}
			if units != tt.units {
				t.Errorf("%d MBConv units, want %d (torchvision %s)", units, tt.units, tt.name)
			}
			if s.Input != (engine.Shape{C: 3, H: tt.size, W: tt.size}) {
				t.Errorf("input %v, want 3×%d×%d", s.Input, tt.size, tt.size)
			}
		})
	}
	if r := engine.Evaluate(b0); r.Totals.Params != 5288548 {
		t.Errorf("scaling changed B0 itself: %d parameters, want 5,288,548 (torchvision efficientnet_b0)", r.Totals.Params)
	}
}

// makeDivisible is torchvision's _make_divisible (torchvision/models/
// _utils.py), written out from its source: round to the nearest multiple,
// never below the divisor, and add one divisor where that lost more than
// 10%.
func makeDivisible(v float64, d int64) int64 {
	n := max(d, int64(v+float64(d)/2)/d*d)
	if float64(n) < 0.9*v {
		n += d
	}
	return n
}

// TestScaleWidthRounding: absolute widths follow torchvision's
// _make_divisible(width · factor, 8); relative widths (x6, /4) stay as
// written and follow their inputs; the last weighted layer keeps the
// task's width (Howard et al. 2017, MobileNets: the multiplier thins the
// layers, not the classes).
func TestScaleWidthRounding(t *testing.T) {
	s := &engine.Stack{Input: engine.Shape{C: 3, H: 32, W: 32}, Layers: []engine.Layer{
		{Kind: engine.KindConv, Filters: 40, Kernel: engine.Square(3)},
		{Kind: engine.KindConv, Rel: engine.Rel{Mul: 6}, RoundTo: 8, Kernel: engine.Square(1)},
		{Kind: engine.KindConv, Filters: 112, Kernel: engine.Square(1)},
		{Kind: engine.KindConv, Filters: 192, Kernel: engine.Square(1)},
		{Kind: engine.KindGlobalPool},
		{Kind: engine.KindFlatten},
		{Kind: engine.KindDense, Filters: 10},
	}}
	for _, f := range []float64{0.35, 0.5, 0.75, 1.1, 1.4, 2} {
		v, err := engine.Scale(s, engine.Scaling{Width: f})
		if err != nil {
			t.Fatal(err)
		}
		for _, i := range []int{0, 2, 3} {
			if want := makeDivisible(float64(s.Layers[i].Filters)*f, 8); v.Layers[i].Filters != want {
				t.Errorf("×%v: layer %d has %d filters, want _make_divisible(%d·%v, 8) = %d", f, i+1, v.Layers[i].Filters, s.Layers[i].Filters, f, want)
			}
		}
		if v.Layers[1].Rel != s.Layers[1].Rel || v.Layers[1].Filters != 0 {
			t.Errorf("×%v: the relative width became %+v", f, v.Layers[1])
		}
		if v.Layers[6].Filters != 10 {
			t.Errorf("×%v: the classifier has %d units, want 10", f, v.Layers[6].Filters)
		}
	}
}

// TestScaleDepth: a block of N repeats gets ⌈N·d⌉ (torchvision
// efficientnet.py, math.ceil(num_layers * depth_mult)); a block nested in
// another keeps its own repeats (it repeats with the outer block).
func TestScaleDepth(t *testing.T) {
	inner := engine.Layer{Kind: engine.KindBlock, Repeat: 2, Body: []engine.Layer{{Kind: engine.KindAct}}}
	s := &engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}, Layers: []engine.Layer{
		{Kind: engine.KindBlock, Repeat: 3, Body: []engine.Layer{{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}}, inner}},
		{Kind: engine.KindBlock, Body: []engine.Layer{{Kind: engine.KindAct}}},
	}}
	for _, d := range []float64{0.2, 0.5, 1.1, 1.2, 2.6, 3.1} {
		v, err := engine.ScaleDepth(s, d)
		if err != nil {
			t.Fatal(err)
		}
		for i, n := range []int64{3, 1} {
			if want := int64(math.Ceil(float64(n) * d)); v.Layers[i].Repeat != want {
				t.Errorf("×%v: block %d repeats %d times, want ⌈%d·%v⌉ = %d", d, i+1, v.Layers[i].Repeat, n, d, want)
			}
		}
		if v.Layers[0].Body[1].Repeat != 2 {
			t.Errorf("×%v: the nested block repeats %d times, want 2", d, v.Layers[0].Body[1].Repeat)
		}
	}
	if s.Layers[0].Repeat != 3 {
		t.Error("ScaleDepth changed its input")
	}
}

// TestCompound: compound scaling's multipliers are α^φ, β^φ, γ^φ with the
// paper's α = 1.2, β = 1.1, γ = 1.15 (Tan & Le 2019, eq. 3 and section
// 4.2), and α·β²·γ² ≈ 2 (the paper's constraint: FLOPS about double per
// unit of φ). The input side is rounded to the nearest whole number.
func TestCompound(t *testing.T) {
	c := engine.DefaultCompound()
	if p := c.Alpha * c.Beta * c.Beta * c.Gamma * c.Gamma; math.Abs(p-2) > 0.1 {
		t.Errorf("α·β²·γ² = %v, want about 2 (Tan & Le 2019, eq. 3)", p)
	}
	for _, phi := range []float64{-1, 0, 1, 2.5} {
		sc := c.At(phi)
		if math.Abs(sc.Depth-math.Pow(1.2, phi)) > 1e-12 || math.Abs(sc.Width-math.Pow(1.1, phi)) > 1e-12 || math.Abs(sc.Resolution-math.Pow(1.15, phi)) > 1e-12 {
			t.Errorf("φ %v: %+v", phi, sc)
		}
	}
	in := engine.Shape{C: 3, H: 224, W: 224}
	if got := engine.ResolutionSize(in, 1.15); got != engine.Square(258) { // 224 · 1.15 = 257.6
		t.Errorf("224 · 1.15 → %v, want 258", got)
	}
	// B0 at φ = 1 costs about twice the MACs (the paper's design rule).
	b0 := loadTestdata(t, "published/efficientnet-b0.yaml")
	v, err := engine.Scale(b0, c.At(1))
	if err != nil {
		t.Fatal(err)
	}
	ratio := float64(engine.Evaluate(v).Totals.MACs) / float64(engine.Evaluate(b0).Totals.MACs)
	if ratio < 1.6 || ratio > 2.6 {
		t.Errorf("φ = 1 multiplies B0's MACs by %.2f; the paper's constraint makes it about 2", ratio)
	}
}

// TestScaleRefuses: bad factors and sizes are errors naming the fix, never
// a panic.
func TestScaleRefuses(t *testing.T) {
	b0 := loadTestdata(t, "published/efficientnet-b0.yaml")
	flat := &engine.Stack{Input: engine.Shape{C: 784, H: 1, W: 1}, Layers: []engine.Layer{{Kind: engine.KindDense, Filters: 10}}}
	for _, tt := range []struct {
		s  *engine.Stack
		sc engine.Scaling
	}{
		{b0, engine.Scaling{Width: -1}},
		{b0, engine.Scaling{Width: math.NaN()}},
		{b0, engine.Scaling{Depth: math.Inf(1)}},
		{b0, engine.Scaling{Depth: 1e9}},
		{b0, engine.Scaling{Resolution: -2}},
		{b0, engine.Scaling{Size: engine.Pair{H: 0, W: 5}}},
		{b0, engine.Scaling{Size: engine.Square(1 << 40)}},
		{b0, engine.Scaling{Width: 1e12}},
		{flat, engine.Scaling{Resolution: 2}},
	} {
		if _, err := engine.Scale(tt.s, tt.sc); !errors.Is(err, engine.ErrTransform) {
			t.Errorf("%+v: err = %v, want a transform error", tt.sc, err)
		}
	}
	if err := (engine.Compound{Alpha: 1.2, Beta: 0, Gamma: 1.15}).Check(); err == nil {
		t.Error("β = 0 accepted")
	}
}

// TestMaxScale: the answer of each search fits the budget at the batch
// asked under the memory estimate, and one step (0.01) more does not —
// the definition of the largest value that fits. The budget is B0's own
// estimate at batch 32 times 2.5, so every axis has room to grow.
func TestMaxScale(t *testing.T) {
	b0 := loadTestdata(t, "published/efficientnet-b0.yaml")
	a := engine.DefaultAssumptions()
	tr := b0.Training
	tr.Batch = 32
	var m engine.Memory
	engine.Evaluate(b0).Memory(tr, a, &m)
	tr.Budget = m.Total * 5 / 2
	fits := func(sc engine.Scaling) bool { return scaledFits(b0, tr, a, sc) }
	c := engine.DefaultCompound()
	for _, x := range []engine.Axis{engine.AxisCompound, engine.AxisWidth, engine.AxisDepth, engine.AxisResolution} {
		t.Run(x.String(), func(t *testing.T) {
			f, err := engine.MaxScale(context.Background(), b0, tr, a, x, c)
			if err != nil {
				t.Fatal(err)
			}
			if !f.Fits || !f.Bounded || f.Limit == "" {
				t.Fatalf("%+v: want an answer with a limit", f)
			}
			if (x == engine.AxisCompound && f.Value <= 0) || (x != engine.AxisCompound && f.Value <= 1) {
				t.Errorf("value %v: B0 at 2.5× its own memory should grow", f.Value)
			}
			if !fits(f.Scaling) {
				t.Errorf("the answer %v does not fit", f.Value)
			}
			if next := engine.ScalingFor(x, f.Value+engine.ScaleStep, c); fits(next) {
				t.Errorf("%v + 0.01 fits too", f.Value)
			}
		})
	}
	// Downward: a budget below B0's own estimate gives a φ below 0.
	small := tr
	small.Budget = m.Total / 2
	f, err := engine.MaxScale(context.Background(), b0, small, a, engine.AxisCompound, c)
	if err != nil || !f.Fits || f.Value >= 0 || !scaledFits(b0, small, a, f.Scaling) {
		t.Errorf("half the budget: %+v, %v; want a fitting φ below 0", f, err)
	}
	// Nothing fits a budget of one byte; no budget is an error.
	tiny := tr
	tiny.Budget = 1
	if f, err := engine.MaxScale(context.Background(), b0, tiny, a, engine.AxisWidth, c); err != nil || f.Fits {
		t.Errorf("one byte: %+v, %v; want no answer", f, err)
	}
	none := tr
	none.Budget = 0
	if _, err := engine.MaxScale(context.Background(), b0, none, a, engine.AxisDepth, c); err == nil {
		t.Error("no budget: no error")
	}
}

// scaledFits reports whether s scaled by sc evaluates without errors and
// fits t's budget under the memory estimate.
func scaledFits(s *engine.Stack, t engine.Training, a engine.Assumptions, sc engine.Scaling) bool {
	v, err := engine.Scale(s, sc)
	if err != nil {
		return false
	}
	r := engine.Evaluate(v)
	var m engine.Memory
	r.Memory(t, a, &m)
	return r.Errors == 0 && m.Fits
}
