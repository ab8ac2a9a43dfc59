package engine

import (
	"errors"
	"testing"
)

// TestScaleChannels checks the rounding rule of the width multiplier
// (Howard et al. 2017 scale every width by α; the rounding to a multiple of
// 8, never below 8 and never more than 10% down, is the rule published with
// MobileNetV2's code).
func TestScaleChannels(t *testing.T) {
	tests := []struct {
		c      int64
		factor float64
		m      int64
		want   int64
	}{
		{64, 0.5, 8, 32},
		{32, 0.75, 8, 24},
		{24, 0.35, 8, 8},   // 8.4 → 8
		{3, 0.25, 8, 8},    // never below the multiple
		{100, 1.0, 8, 104}, // 100/8 = 12.5 rounds half away from zero
		{96, 1.3, 8, 128},  // 124.8 → 128
		{40, 1.1, 16, 48},  // 44/16 = 2.75 → 3 steps
		{56, 0.5, 16, 32},  // 28 → 32
		{80, 0.55, 32, 64}, // 44 → 32 would lose 27%, so one step up
	}
	for _, tt := range tests {
		if got := ScaleChannels(tt.c, tt.factor, tt.m); got != tt.want {
			t.Errorf("ScaleChannels(%d, %v, %d) = %d, want %d", tt.c, tt.factor, tt.m, got, tt.want)
		}
	}
}

func TestScaleWidth(t *testing.T) {
	s := &Stack{Input: Shape{3, 32, 32}, Layers: []Layer{
		{Kind: KindConv, Filters: 32, Kernel: Square(3)},
		{Kind: KindConv, Filters: 64, Kernel: Square(3), Groups: 4},
		{Kind: KindConv, Filters: 64, Kernel: Square(3), Depthwise: true},
		{Kind: KindGlobalPool},
		{Kind: KindDense, Filters: 10},
	}}
	got, err := ScaleWidth(s, 0.5, 8)
	if err != nil {
		t.Fatal(err)
	}
	want := []int64{16, 32, 32, 0, 10}
	for i, w := range want {
		if got.Layers[i].Filters != w {
			t.Errorf("layer %d filters %d, want %d", i+1, got.Layers[i].Filters, w)
		}
	}
	if s.Layers[0].Filters != 32 {
		t.Error("ScaleWidth changed its input")
	}
	if r := Evaluate(got); r.Errors != 0 {
		t.Errorf("scaled stack has errors: %v", r.Diags)
	}
	// Groups of 24 with multiple 8: widths round to multiples of 24.
	g := &Stack{Input: Shape{48, 8, 8}, Layers: []Layer{{Kind: KindConv, Filters: 48, Kernel: Square(1), Groups: 24}, {Kind: KindConv, Filters: 3, Kernel: Square(1)}}}
	gs, _ := ScaleWidth(g, 1.5, 8)
	if gs.Layers[0].Filters != 72 {
		t.Errorf("grouped conv scaled to %d, want 72", gs.Layers[0].Filters)
	}
	// A generator's dense layer follows its reshape.
	gen := &Stack{Input: Shape{100, 1, 1}, Layers: []Layer{
		{Kind: KindDense, Filters: 1024 * 16}, {Kind: KindReshape, Target: Shape{1024, 4, 4}},
		{Kind: KindDeconv, Filters: 3, Kernel: Square(4), Stride: Square(2), Pad: Padding{Size: Square(1)}},
	}}
	gg, err := ScaleWidth(gen, 0.5, 8)
	if err != nil {
		t.Fatal(err)
	}
	if gg.Layers[1].Target != (Shape{512, 4, 4}) || gg.Layers[0].Filters != 512*16 || gg.Layers[2].Filters != 3 {
		t.Errorf("generator scaled to %v / %d / %d", gg.Layers[1].Target, gg.Layers[0].Filters, gg.Layers[2].Filters)
	}
	for _, f := range []float64{0, -1} {
		if _, err := ScaleWidth(s, f, 8); !errors.Is(err, ErrTransform) {
			t.Errorf("factor %v: err %v", f, err)
		}
	}
}

// TestInsertStage checks "halve the resolution, double the channels".
func TestInsertStage(t *testing.T) {
	s := &Stack{Input: Shape{3, 64, 64}, Layers: []Layer{
		{Kind: KindConv, Filters: 96, Kernel: Square(3), Pad: Padding{Size: Square(1)}},
		{Kind: KindGlobalPool},
		{Kind: KindDense, Filters: 10},
	}}
	got, n, err := InsertStage(s, 0, StageOptions{Cap: 128, Repeat: 2})
	if err != nil {
		t.Fatal(err)
	}
	if n != 9 || len(got.Layers) != 12 {
		t.Fatalf("inserted %d layers, stack has %d", n, len(got.Layers))
	}
	r := Evaluate(got)
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	// The stride-2 convolution halves 64 → 32 and doubles 96 → 192, capped at 128.
	if out := r.Rows[1].Out; out != (Shape{128, 32, 32}) {
		t.Errorf("stage entry %v, want 128×32×32", out)
	}
	if out := r.Rows[9].Out; out != (Shape{128, 32, 32}) {
		t.Errorf("stage end %v, want 128×32×32", out)
	}
	if _, _, err := InsertStage(s, 5, StageOptions{}); !errors.Is(err, ErrTransform) {
		t.Errorf("out-of-range insert: err %v", err)
	}
	// At the start the input channels double.
	got, _, _ = InsertStage(s, -1, StageOptions{NoNorm: true})
	if r := Evaluate(got); r.Rows[0].Out != (Shape{6, 32, 32}) || got.Layers[0].NoBias {
		t.Errorf("stage at start: %v", r.Rows[0].Out)
	}
}
