package onnximport

import (
	"testing"

	"stackfit/engine"
)

// TestImportAdditiveFork: an addition of two computed paths from one map,
// neither a projection shortcut (ResNet-D's, He et al. 2019, Figure 2(c):
// a strided 3×3 main path and a 2×2 average pool then a 1×1 convolution),
// imports as a fork with join: add, its branches in the addition's order.
// Weights by common practice: 8·4·3·3 + 8·4·1·1, no biases.
func TestImportAdditiveFork(t *testing.T) {
	for _, swap := range []bool{false, true} {
		in := []string{"a", "b"}
		if swap {
			in = []string{"b", "a"}
		}
		data := model(t, [4]int64{1, 4, 8, 8}, 13, map[string][]int64{"wa": {8, 4, 3, 3}, "wb": {8, 4, 1, 1}},
			node("Conv", "/main/Conv", []string{"x", "wa"}, "a", ints("kernel_shape", 3, 3), ints("strides", 2, 2), ints("pads", 1, 1, 1, 1)),
			node("AveragePool", "/down/AveragePool", []string{"x"}, "p", ints("kernel_shape", 2, 2), ints("strides", 2, 2)),
			node("Conv", "/down/Conv", []string{"p", "wb"}, "b", ints("kernel_shape", 1, 1)),
			node("Add", "/Add", in, "y"),
		)
		s, _, err := Import(data, "resnet-d")
		if err != nil {
			t.Fatal(err)
		}
		if len(s.Layers) != 1 || s.Layers[0].Kind != engine.KindFork || !s.Layers[0].JoinAdd || len(s.Layers[0].Body) != 2 {
			t.Fatalf("layers %+v", s.Layers)
		}
		first := s.Layers[0].Body[0].Body
		if want := 1 + btoi(swap); len(first) != want {
			t.Errorf("swap %v: the first branch has %d layers, want %d (the addition's first input)", swap, len(first), want)
		}
		r := engine.Evaluate(s)
		if r.Errors != 0 || r.Totals.Params != 8*4*9+8*4 || r.Output != (engine.Shape{C: 8, H: 4, W: 4}) {
			t.Errorf("params %d, output %v, %v", r.Totals.Params, r.Output, r.Diags)
		}
	}
}

func btoi(b bool) int {
	if b {
		return 1
	}
	return 0
}

// TestImportTopDown: a feature pyramid's merge (Lin et al. 2017, Figure
// 3): the map e goes down (a strided convolution and a lateral) and back
// up (a transposed convolution), and is added to a 1×1 lateral of e. It
// imports flat, as a person writes it: the path, then a fork with join:
// add whose branches are the flow and the lateral from e by name, in the
// addition's order. Weights by common practice: 4·3·3·3 + 8·4·3·3 +
// 4·8·1·1 + 4·4·2·2 + 4·4·1·1, no biases.
func TestImportTopDown(t *testing.T) {
	for _, swap := range []bool{false, true} {
		in := []string{"u", "m"}
		if swap {
			in = []string{"m", "u"}
		}
		data := model(t, [4]int64{1, 3, 16, 16}, 13, map[string][]int64{"we": {4, 3, 3, 3}, "wd": {8, 4, 3, 3}, "wl": {4, 8, 1, 1}, "wu": {4, 4, 2, 2}, "wm": {4, 4, 1, 1}},
			node("Conv", "/enc/Conv", []string{"x", "we"}, "e", ints("kernel_shape", 3, 3), ints("strides", 2, 2), ints("pads", 1, 1, 1, 1)),
			node("Conv", "/down/Conv", []string{"e", "wd"}, "d", ints("kernel_shape", 3, 3), ints("strides", 2, 2), ints("pads", 1, 1, 1, 1)),
			node("Conv", "/lat5/Conv", []string{"d", "wl"}, "l", ints("kernel_shape", 1, 1)),
			node("ConvTranspose", "/up/ConvTranspose", []string{"l", "wu"}, "u", ints("kernel_shape", 2, 2), ints("strides", 2, 2)),
			node("Conv", "/lat4/Conv", []string{"e", "wm"}, "m", ints("kernel_shape", 1, 1)),
			node("Add", "/Add", in, "y"),
		)
		s, _, err := Import(data, "fpn")
		if err != nil {
			t.Fatal(err)
		}
		if len(s.Layers) != 5 || s.Layers[4].Kind != engine.KindFork || !s.Layers[4].JoinAdd {
			t.Fatalf("layers %+v", s.Layers)
		}
		lat, flow := s.Layers[4].Body[1], s.Layers[4].Body[0]
		if swap {
			lat, flow = flow, lat
		}
		if lat.From == "" || lat.From != s.Layers[0].Name || len(lat.Body) != 1 || flow.From != "" || len(flow.Body) != 0 {
			t.Errorf("swap %v: branches %+v", swap, s.Layers[4].Body)
		}
		r := engine.Evaluate(s)
		if r.Errors != 0 || r.Totals.Params != 4*3*9+8*4*9+4*8+4*4*4+4*4 || r.Output != (engine.Shape{C: 4, H: 8, W: 8}) {
			t.Errorf("params %d, output %v, %v", r.Totals.Params, r.Output, r.Diags)
		}
	}
}
