package engine

import (
	"errors"
	"strings"
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

// TestInsertStage checks "halve the resolution, double the channels",
// inserted as one block item whose first repeat downsamples: a block's
// later repeats run with stride 1 (the README's block semantics), so the
// block gives exactly the rows of its layers written out Repeat + 1 times.
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
	if n != 1 || len(got.Layers) != 4 || got.Layers[1].Kind != KindBlock || got.Layers[1].Repeat != 3 || len(got.Layers[1].Body) != 3 {
		t.Fatalf("inserted %d items; the stack has %d, item 2 %+v", n, len(got.Layers), got.Layers[1])
	}
	if len(s.Layers) != 3 {
		t.Error("InsertStage changed its input")
	}
	r := Evaluate(got)
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	// The stride-2 convolution halves 64 → 32 and doubles 96 → 192, capped at 128.
	if out := r.Rows[1].Out; out != (Shape{128, 32, 32}) {
		t.Errorf("stage entry %v, want 128×32×32", out)
	}
	if out := r.Rows[9].Out; out != (Shape{128, 32, 32}) || r.Rows[9].Path.String() != "2.3.3" {
		t.Errorf("stage end %s %v, want 2.3.3 at 128×32×32", r.Rows[9].Path, out)
	}
	// The same layers written out flat give the same rows and totals.
	unit := func(stride int64) []Layer {
		return []Layer{{Kind: KindConv, Filters: 128, Kernel: Square(3), Stride: Square(stride), Pad: Padding{Size: Square(1)}, NoBias: true},
			{Kind: KindNorm, Norm: NormBatch}, {Kind: KindAct, Act: ActReLU}}
	}
	flat := &Stack{Input: s.Input, Layers: append(append(append(append([]Layer{s.Layers[0]}, unit(2)...), unit(1)...), unit(1)...), s.Layers[1:]...)}
	rf := Evaluate(flat)
	if len(rf.Rows) != len(r.Rows) || rf.Totals != r.Totals {
		t.Fatalf("flat: %d rows, totals %+v; block: %d rows, totals %+v", len(rf.Rows), rf.Totals, len(r.Rows), r.Totals)
	}
	for i := range r.Rows {
		a, b := r.Rows[i], rf.Rows[i]
		if a.Out != b.Out || a.Params != b.Params || a.Buffers != b.Buffers || a.MACs != b.MACs || a.RF != b.RF {
			t.Errorf("row %d: block %v %d %d, flat %v %d %d", i, a.Out, a.Params, a.MACs, b.Out, b.Params, b.MACs)
		}
	}
	// At the start the input channels double; without a norm the
	// convolution keeps its bias.
	got, _, _ = InsertStage(s, -1, StageOptions{NoNorm: true})
	if r := Evaluate(got); r.Rows[0].Out != (Shape{6, 32, 32}) || got.Layers[0].Body[0].NoBias || len(got.Layers[0].Body) != 2 {
		t.Errorf("stage at start: %v, %+v", r.Rows[0].Out, got.Layers[0].Body)
	}
	refused := []struct {
		after int
		opt   StageOptions
		want  string
	}{
		{5, StageOptions{}, "no layer 6 to insert after"},
		{0, StageOptions{Repeat: 65}, "stage repeat 65 must be between 0 and 64"},
		{0, StageOptions{Kernel: 4}, "kernel 4 must be odd"},
		{0, StageOptions{Norm: NormGroup, Groups: 5}, "group norm's 5 groups do not divide the stage's 192 channels"},
		{0, StageOptions{Norm: NormGroup}, ""}, // 32 groups divide 192
	}
	for _, tt := range refused {
		_, _, err := InsertStage(s, tt.after, tt.opt)
		if tt.want == "" && err != nil || tt.want != "" && (!errors.Is(err, ErrTransform) || !strings.Contains(err.Error(), tt.want)) {
			t.Errorf("after %d %+v: %v, want %q", tt.after, tt.opt, err, tt.want)
		}
	}
}

// TestStageTemplate: the stage copies the convolution, norm and
// activation around the insertion point (a stack using leaky-relu 0.2 gets
// leaky-relu 0.2), lets the stack's stage settings override each, and
// falls back to a 3×3 convolution without bias, batch norm and ReLU
// (common practice since He et al. 2016) when there is nothing to copy.
func TestStageTemplate(t *testing.T) {
	pad := func(p int64) Padding { return Padding{Size: Square(p)} }
	c := func(f, k int64) Layer { return Layer{Kind: KindConv, Filters: f, Kernel: Square(k), Pad: pad(k / 2)} }
	nb := func(l Layer) Layer { l.NoBias = true; return l }
	bn := Layer{Kind: KindNorm, Norm: NormBatch}
	relu := Layer{Kind: KindAct, Act: ActReLU}
	leaky := Layer{Kind: KindAct, Act: ActLeakyReLU, Slope: 0.2}
	gn8 := Layer{Kind: KindNorm, Norm: NormGroup, NormGroups: 8}
	tests := []struct {
		name   string
		layers []Layer
		after  int
		stage  Stage
		repeat int64
		want   []string // the block's layers, as Summary writes them
	}{
		{"nothing to copy", []Layer{{Kind: KindPool, Kernel: Square(2)}}, 0, Stage{}, 3,
			[]string{"conv 16 k3 s2 p1 nobias", "norm batch", "act relu"}},
		{"empty stack", nil, -1, Stage{}, 3,
			[]string{"conv 16 k3 s2 p1 nobias", "norm batch", "act relu"}},
		{"leaky-relu 0.2, no norm, bias", []Layer{c(32, 5), leaky}, 1, Stage{}, 3,
			[]string{"conv 64 k5 s2 p2", "act leaky-relu 0.2"}},
		{"group norm and silu", []Layer{nb(c(32, 3)), gn8, {Kind: KindAct, Act: ActSiLU}}, 2, Stage{}, 3,
			[]string{"conv 64 k3 s2 p1 nobias", "norm group g8", "act silu"}},
		{"conv alone", []Layer{c(32, 3), {Kind: KindPool, Kernel: Square(2)}}, 1, Stage{}, 3,
			[]string{"conv 64 k3 s2 p1"}},
		{"depthwise and 1×1 passed over", []Layer{nb(c(16, 3)), bn, leaky,
			{Kind: KindConv, Filters: 16, Kernel: Square(3), Pad: pad(1), Depthwise: true, NoBias: true}, bn, relu,
			c(32, 1), {Kind: KindAct, Act: ActGELU}}, 7, Stage{}, 3,
			[]string{"conv 64 k3 s2 p1 nobias", "norm batch", "act leaky-relu 0.2"}},
		{"only what is before the insertion point", []Layer{nb(c(16, 3)), bn, relu, c(32, 5), leaky}, 2, Stage{}, 3,
			[]string{"conv 32 k3 s2 p1 nobias", "norm batch", "act relu"}},
		{"inside a residual block, after: its activation", []Layer{nb(c(16, 3)), bn, relu,
			{Kind: KindBlock, Repeat: 2, Residual: true, HasPostAct: true, PostAct: ActReLU6, Body: []Layer{nb(c(16, 7)), bn}}}, 3, Stage{}, 3,
			[]string{"conv 32 k7 s2 p3 nobias", "norm batch", "act relu6"}},
		{"set explicitly", []Layer{nb(c(32, 3)), gn8, {Kind: KindAct, Act: ActSiLU}}, 2,
			Stage{Kernel: 5, Bias: On, Norm: NormInstance, NormSet: true, Act: ActLeakyReLU, ActSet: true, Slope: 0.1, Cap: 48, Layers: 0, LayersSet: true}, 1,
			[]string{"conv 48 k5 s2 p2", "norm instance", "act leaky-relu 0.1"}},
		{"none set explicitly; groups over the copied ones", []Layer{nb(c(32, 3)), gn8, leaky}, 2,
			Stage{Groups: 4, ActSet: true, NoAct: true, Layers: 1, LayersSet: true}, 2,
			[]string{"conv 64 k3 s2 p1 nobias", "norm group g4"}},
		{"the copied norm set explicitly keeps its groups", []Layer{nb(c(32, 3)), gn8, relu}, 2,
			Stage{Norm: NormGroup, NormSet: true}, 3,
			[]string{"conv 64 k3 s2 p1 nobias", "norm group g8", "act relu"}},
		{"prelu per channel copied as it is (He et al. 2015's channel-wise form)", []Layer{nb(c(32, 3)), bn, {Kind: KindAct, Act: ActPReLU, PerChannel: true}}, 2, Stage{}, 3,
			[]string{"conv 64 k3 s2 p1 nobias", "norm batch", "act prelu per-channel"}},
		{"per-channel dropped when the stage sets another activation", []Layer{nb(c(32, 3)), bn, {Kind: KindAct, Act: ActPReLU, PerChannel: true}}, 2,
			Stage{Act: ActMish, ActSet: true}, 3,
			[]string{"conv 64 k3 s2 p1 nobias", "norm batch", "act mish"}},
		{"group norm set on a batch-norm stack: 32 groups", []Layer{nb(c(32, 3)), bn, relu}, 2,
			Stage{Norm: NormGroup, NormSet: true, NoNorm: false}, 3,
			[]string{"conv 64 k3 s2 p1 nobias", "norm group g32", "act relu"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := &Stack{Input: Shape{8, 32, 32}, Layers: tt.layers, Stage: tt.stage}
			opt := StageTemplate(s, tt.after)
			got, n, err := InsertStage(s, tt.after, opt)
			if err != nil || n != 1 {
				t.Fatalf("%+v: %d, %v", opt, n, err)
			}
			b := got.Layers[tt.after+1]
			var sum []string
			for i := range b.Body {
				sum = append(sum, Summary(&b.Body[i]))
			}
			if b.Kind != KindBlock || b.Repeat != tt.repeat || strings.Join(sum, " · ") != strings.Join(tt.want, " · ") {
				t.Errorf("block ×%d of %q, want ×%d of %q", b.Repeat, sum, tt.repeat, tt.want)
			}
			if r := Evaluate(got); r.Errors != 0 {
				t.Errorf("errors: %v", r.Diags)
			}
		})
	}
}

// TestScaleWidthInsideBlocks: the width multiplier reaches the layers of
// blocks, gates and forks (it used to scale top-level layers only, so a
// ResNet-50 written as blocks barely changed and its width answer read
// "over ×32"); the classifier keeps its classes and relative widths follow
// their input. Doubling ResNet-50's widths multiplies its parameters by
// about 4 (common practice: a convolution's weights grow with both its
// input and output channels).
func TestScaleWidthInsideBlocks(t *testing.T) {
	b := []Layer{
		{Kind: KindConv, Filters: 16, Kernel: Square(3), Pad: Padding{Size: Square(1)}},
		{Kind: KindGate, Body: []Layer{
			{Kind: KindGlobalPool, Pool: PoolAvg},
			{Kind: KindConv, Rel: Rel{Div: 4}, Kernel: Square(1)},
			{Kind: KindConv, Rel: Rel{Mul: 1}, Kernel: Square(1)},
			{Kind: KindAct, Act: ActSigmoid},
		}},
	}
	s := &Stack{Input: Shape{3, 32, 32}, Layers: []Layer{
		{Kind: KindConv, Filters: 16, Kernel: Square(3), Pad: Padding{Size: Square(1)}},
		{Kind: KindBlock, Repeat: 2, Residual: true, Body: b},
		{Kind: KindGlobalPool, Pool: PoolAvg},
		{Kind: KindDense, Filters: 10},
	}}
	got, err := ScaleWidth(s, 2, 8)
	if err != nil {
		t.Fatal(err)
	}
	body := got.Layers[1].Body
	if body[0].Filters != 32 || body[1].Body[1].Rel != (Rel{Div: 4}) || got.Layers[3].Filters != 10 {
		t.Errorf("scaled: block conv %d, gate %v, classifier %d", body[0].Filters, body[1].Body[1].Rel, got.Layers[3].Filters)
	}
	if r := Evaluate(got); r.Errors != 0 {
		t.Errorf("scaled stack has errors: %v", r.Diags)
	}
}
