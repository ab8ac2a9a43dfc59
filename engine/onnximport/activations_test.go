package onnximport

import (
	"errors"
	"testing"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// TestActivationImport reads what PyTorch 1.13's exporter writes for
// nn.PReLU, nn.Softmax(dim=1) and nn.Mish (seen in its output at opsets 13
// and 17: PRelu with a slope initializer [C, 1, 1] or [1, 1, 1], or,
// without constant folding, the weight [C] through Unsqueeze(axes 1, 2);
// Softmax with axis 1; Softplus, Tanh and a Mul by the input) and their
// ONNX relatives (the operator definitions: PRelu broadcasts its slope,
// Softmax counts a negative axis from the end), on an 8×4×4 input.
func TestActivationImport(t *testing.T) {
	prelu := func(shared bool) engine.Layer {
		return engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU, PerChannel: !shared}
	}
	cases := []struct {
		name    string
		weights map[string][]int64
		nodes   []*onnxpb.Node
		want    engine.Layer
		params  int64
	}{
		{name: "nn.PReLU(8): slope [8, 1, 1]", weights: map[string][]int64{"a": {8, 1, 1}},
			nodes: []*onnxpb.Node{node("PRelu", "/p/PRelu", []string{"x", "a"}, "y")}, want: prelu(false), params: 8},
		{name: "nn.PReLU(): slope [1, 1, 1]", weights: map[string][]int64{"a": {1, 1, 1}},
			nodes: []*onnxpb.Node{node("PRelu", "/p/PRelu", []string{"x", "a"}, "y")}, want: prelu(true), params: 1},
		{name: "one slope of shape [1] (ONNX PRelu: broadcast)", weights: map[string][]int64{"a": {1}},
			nodes: []*onnxpb.Node{node("PRelu", "/p/PRelu", []string{"x", "a"}, "y")}, want: prelu(true), params: 1},
		{name: "nn.PReLU(8) without constant folding: Unsqueeze(weight [8], axes 1, 2)", weights: map[string][]int64{"p.weight": {8}},
			nodes: []*onnxpb.Node{intConst("axes", 1, 2), node("Unsqueeze", "/p/Unsqueeze", []string{"p.weight", "axes"}, "a"),
				node("PRelu", "/p/PRelu", []string{"x", "a"}, "y")}, want: prelu(false), params: 8},
		{name: "nn.Softmax(dim=1): Softmax axis 1",
			nodes: []*onnxpb.Node{node("Softmax", "/s/Softmax", []string{"x"}, "y", iAttr("axis", 1))},
			want:  engine.Layer{Kind: engine.KindAct, Act: engine.ActSoftmax}},
		{name: "Softmax axis −3 of a 4-D map (ONNX: counted from the end)",
			nodes: []*onnxpb.Node{node("Softmax", "/s/Softmax", []string{"x"}, "y", iAttr("axis", -3))},
			want:  engine.Layer{Kind: engine.KindAct, Act: engine.ActSoftmax}},
		{name: "nn.Mish: Softplus, Tanh, Mul by the input",
			nodes: []*onnxpb.Node{node("Softplus", "/m/Softplus", []string{"x"}, "sp"), node("Tanh", "/m/Tanh", []string{"sp"}, "th"),
				node("Mul", "/m/Mul", []string{"x", "th"}, "y")},
			want: engine.Layer{Kind: engine.KindAct, Act: engine.ActMish}},
		{name: "Mish, the ONNX operator (opset 18)",
			nodes: []*onnxpb.Node{node("Mish", "/m/Mish", []string{"x"}, "y")},
			want:  engine.Layer{Kind: engine.KindAct, Act: engine.ActMish}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, _, err := Import(modelWith(t, [4]int64{1, 8, 4, 4}, 13, c.weights, nil, c.nodes...), "a")
			if err != nil {
				t.Fatal(err)
			}
			if len(s.Layers) != 1 || !s.Layers[0].Equal(&c.want) {
				t.Fatalf("layers %+v, want %+v", s.Layers, c.want)
			}
			if r := engine.Evaluate(s); r.Errors != 0 || r.Output != s.Input || r.Totals.Params != c.params {
				t.Errorf("output %v with %d params (%v), want %v with %d", r.Output, r.Totals.Params, r.Diags, s.Input, c.params)
			}
		})
	}
}

// TestActivationRefusals: what the stack has no activation for stops at
// its node: a slope for 4 of 8 channels (ONNX PRelu would broadcast it
// only where it fits, and the stack has one slope or one per channel), a
// softmax over the width (ONNX Softmax axis 3), and before opset 13 a
// softmax on axis 1 of a map larger than 1×1 (ONNX Softmax-11 flattens
// every axis from the given one: one softmax over C·H·W).
func TestActivationRefusals(t *testing.T) {
	cases := []struct {
		name    string
		opset   int64
		weights map[string][]int64
		nodes   []*onnxpb.Node
		op      string
	}{
		{"4 slopes for 8 channels", 13, map[string][]int64{"a": {4, 1, 1}},
			[]*onnxpb.Node{node("PRelu", "/p/PRelu", []string{"x", "a"}, "y")}, "PRelu"},
		{"a slope per position", 13, map[string][]int64{"a": {1, 4, 4}},
			[]*onnxpb.Node{node("PRelu", "/p/PRelu", []string{"x", "a"}, "y")}, "PRelu"},
		{"softmax over the width", 13, nil,
			[]*onnxpb.Node{node("Softmax", "/s/Softmax", []string{"x"}, "y", iAttr("axis", 3))}, "Softmax"},
		{"softmax over C·H·W at opset 11", 11, nil,
			[]*onnxpb.Node{node("Softmax", "/s/Softmax", []string{"x"}, "y", iAttr("axis", 1))}, "Softmax"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := Import(modelWith(t, [4]int64{1, 8, 4, 4}, c.opset, c.weights, nil, c.nodes...), "a")
			var st *Stopped
			if !errors.As(err, &st) || st.Op != c.op {
				t.Fatalf("err %v, want a stop at a %s node", err, c.op)
			}
		})
	}
}
