package engine

import (
	"errors"
	"strings"
	"testing"
)

// TestDefaultsEvaluate checks that evaluation reads the stack's defaults:
// a layer that leaves a field unwritten takes the default, a layer's own
// value wins, and every row consumer (the counts, the export's module, the
// arithmetic) sees the value the layer computes with.
func TestDefaultsEvaluate(t *testing.T) {
	conv := Layer{Kind: KindConv, Filters: 16, Kernel: Square(3), Pad: Padding{Size: Square(1)}}
	tests := []struct {
		source string
		d      Defaults
		l      Layer
		params int64
		torch  string
	}{
		{"torch.nn.Conv2d: 3·3·16·16 weights + 16 biases", nil, conv, 2320,
			"nn.Conv2d(16, 16, (3, 3), stride=(1, 1), padding=(1, 1), dilation=(1, 1), groups=1, bias=True)"},
		{"a bias default of no leaves the weights alone (torch.nn.Conv2d, bias=False)", Defaults{{Kind: KindConv, NoBias: true}}, conv, 2304,
			"nn.Conv2d(16, 16, (3, 3), stride=(1, 1), padding=(1, 1), dilation=(1, 1), groups=1, bias=False)"},
		{"the layer's own bias: yes wins over the default", Defaults{{Kind: KindConv, NoBias: true}}, func() Layer { l := conv; l.BiasOn = true; return l }(), 2320,
			"nn.Conv2d(16, 16, (3, 3), stride=(1, 1), padding=(1, 1), dilation=(1, 1), groups=1, bias=True)"},
		{"another kind's default does not apply (torch.nn.Conv2d)", Defaults{{Kind: KindDense, NoBias: true}}, conv, 2320,
			"nn.Conv2d(16, 16, (3, 3), stride=(1, 1), padding=(1, 1), dilation=(1, 1), groups=1, bias=True)"},
		{"torchvision GoogLeNet's BasicConv2d: BatchNorm2d(eps=0.001), 2·16 parameters", Defaults{{Kind: KindNorm, Eps: 0.001}}, Layer{Kind: KindNorm}, 32,
			"nn.BatchNorm2d(16, affine=True, eps=0.001)"},
		{"the layer's own eps 1e-5 wins over a default of 0.001 (torch.nn.BatchNorm2d)", Defaults{{Kind: KindNorm, Eps: 0.001}}, Layer{Kind: KindNorm, Eps: 1e-5}, 32,
			"nn.BatchNorm2d(16, affine=True, eps=1e-05)"},
		{"a slope default for leaky-relu (torch.nn.LeakyReLU(0.2), DCGAN's slope)", Defaults{{Kind: KindAct, Slope: 0.2}}, Layer{Kind: KindAct, Act: ActLeakyReLU}, 0,
			"nn.LeakyReLU(0.2)"},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			r := Evaluate(&Stack{Input: Shape{16, 8, 8}, Defaults: tt.d, Layers: []Layer{tt.l}})
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			row := &r.Rows[0]
			if row.Params != tt.params {
				t.Errorf("params %d, want %d", row.Params, tt.params)
			}
			if tm, _ := SpecOf(row.Layer.Kind).Torch(row); tm.Module != tt.torch {
				t.Errorf("module %s\nwant   %s", tm.Module, tt.torch)
			}
		})
	}
}

// TestDefaultsReachAddedRows checks the rows a residual block adds: the
// shortcut's batch norm takes the norm default like the written norms do,
// and the projection keeps its own rule (a bias only without a norm), as
// torchvision's ResNet builds its downsample (conv1x1 without bias, then
// the block's norm layer).
func TestDefaultsReachAddedRows(t *testing.T) {
	s := &Stack{Input: Shape{16, 8, 8}, Defaults: Defaults{{Kind: KindNorm, Eps: 0.001}, {Kind: KindConv, NoBias: true}},
		Layers: []Layer{{Kind: KindBlock, Repeat: 1, Residual: true, Body: []Layer{
			{Kind: KindConv, Filters: 32, Kernel: Square(1)}, {Kind: KindNorm}}},
			{Kind: KindBlock, Repeat: 1, Residual: true, NoShortcutNorm: true, Body: []Layer{
				{Kind: KindConv, Filters: 64, Kernel: Square(1)}}}}}
	r := Evaluate(s)
	if r.Errors != 0 {
		t.Fatal(r.Diags)
	}
	var norms []float64
	var projBias []bool
	for i := range r.Rows {
		row := &r.Rows[i]
		if row.Role == RoleShortcut && row.Layer.Kind == KindNorm {
			norms = append(norms, row.Layer.Eps)
		}
		if row.Role == RoleShortcut && row.Layer.Kind == KindConv {
			projBias = append(projBias, !row.Layer.NoBias)
		}
	}
	if len(norms) != 1 || norms[0] != 0.001 {
		t.Errorf("shortcut norm eps %v, want [0.001]", norms)
	}
	if len(projBias) != 2 || projBias[0] || !projBias[1] {
		t.Errorf("projection biases %v, want [false true]", projBias)
	}
	// A later evaluation without defaults leaves nothing behind.
	s.Defaults = nil
	r.Evaluate(s)
	for i := range r.Rows {
		if l := r.Rows[i].Layer; l.Kind == KindNorm && l.Eps != 0 {
			t.Errorf("row %s keeps eps %g after the defaults went", r.Rows[i].Path, l.Eps)
		}
	}
}

// TestDefaultsSet checks the editing of defaults: entries in kind order,
// a zero value removes one, and refusals name the field and the fix.
func TestDefaultsSet(t *testing.T) {
	var d Defaults
	for _, step := range []struct {
		k   Kind
		key string
		v   Value
	}{{KindNorm, "eps", Value{Float: 0.001}}, {KindConv, "bias", Value{Int: int64(Off)}}, {KindAct, "slope", Value{Float: 0.1}}} {
		if err := d.Set(step.k, step.key, step.v); err != nil {
			t.Fatal(err)
		}
	}
	if len(d) != 3 || d[0].Kind != KindConv || d[1].Kind != KindNorm || d[2].Kind != KindAct {
		t.Errorf("order %v", d)
	}
	if err := d.Set(KindNorm, "eps", Value{}); err != nil || d.For(KindNorm) != nil || len(d) != 2 {
		t.Errorf("removing: %v, %v", err, d)
	}
	tests := []struct {
		source, key string
		k           Kind
		want        string
	}{
		{"a kind without defaults", "kernel", KindPool, `defaults: "pool" is not valid; defaults are for the kinds conv, deconv, norm, act, dense and spatial-gate; remove pool from defaults`},
		{"a field each layer writes", "kernel", KindConv, `defaults → conv: "kernel" is not valid; a conv default may set bias; kernel differs from layer to layer, so write it on each conv layer`},
		{"a misspelt field", "esp", KindNorm, `defaults → norm: "esp" is not valid; a norm default may set eps; did you mean "eps"?`},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			err := d.Set(tt.k, tt.key, Value{Int: 1})
			var fe *FieldError
			if !errors.As(err, &fe) || err.Error() != tt.want {
				t.Errorf("got  %v\nwant %s", err, tt.want)
			}
		})
	}
}

// TestDefaultsEverywhere checks that the explanation and the totals read
// the layer as it computes: a bias default of no takes the bias out of the
// arithmetic (torch.nn.Conv2d with bias=False: 16 parameters fewer).
func TestDefaultsEverywhere(t *testing.T) {
	s := &Stack{Input: Shape{16, 8, 8}, Layers: []Layer{{Kind: KindConv, Filters: 16, Kernel: Square(3)}}}
	with := s.Clone()
	with.Defaults = Defaults{{Kind: KindConv, NoBias: true}}
	a, b := Evaluate(s), Evaluate(with)
	if got := strings.Join(b.Explain(0), "\n"); !strings.Contains(got, "params = 3·3·16·16 = 2,304") {
		t.Errorf("explain with the default:\n%s", got)
	}
	if a.Totals.Params-b.Totals.Params != 16 {
		t.Errorf("totals %d and %d, want 16 apart", a.Totals.Params, b.Totals.Params)
	}
	if with.Defaults[0].NoBias != true || s.Defaults != nil {
		t.Error("Clone shares the defaults")
	}
}

// TestQuickNewForms checks the quick-entry words of the new forms and
// that the summary reads back as the same layer: of-input (relative-to:
// input), gw (group width, RegNet's g) and bias (a bias written against a
// stack's default).
func TestQuickNewForms(t *testing.T) {
	tests := []struct {
		source, line string
		want         Layer
	}{
		{"depthwise at its input's width (MobileNetV2's 3×3 depthwise step, Sandler et al. 2018)", "conv x1 k3 p1 dw of-input",
			Layer{Kind: KindConv, Rel: Rel{Mul: 1}, RelInput: true, Kernel: Square(3), Pad: Padding{Size: Square(1)}, Depthwise: true}},
		{"RegNet's group width 8 (Radosavovic et al. 2020)", "conv 48 k3 p1 gw8",
			Layer{Kind: KindConv, Filters: 48, Kernel: Square(3), Pad: Padding{Size: Square(1)}, GroupWidth: 8}},
		{"a bias written out (common practice: a head after no norm)", "conv 10 k1 bias",
			Layer{Kind: KindConv, Filters: 10, Kernel: Square(1), BiasOn: true}},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			l, err := ParseQuick(tt.line)
			if err != nil {
				t.Fatal(err)
			}
			if !l.Equal(&tt.want) {
				t.Errorf("got %+v\nwant %+v", l, tt.want)
			}
			back, err := ParseQuick(Summary(&l))
			if err != nil || !back.Equal(&l) {
				t.Errorf("summary %q reads back as %+v (%v)", Summary(&l), back, err)
			}
		})
	}
	if _, err := ParseQuick("conv 48 k3 g4 gw8"); err == nil || !strings.Contains(err.Error(), "sets the groups itself") {
		t.Errorf("groups with a group width: %v", err)
	}
}
