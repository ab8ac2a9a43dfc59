package onnximport

import (
	"errors"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

func sAttr(name, v string) *onnxpb.Attribute {
	return &onnxpb.Attribute{Name: proto.String(name), Kind: proto.Int32(3), S: []byte(v)}
}

func iAttr(name string, v int64) *onnxpb.Attribute { return iattr(name, v) }

// TestRearrangeImport reads the operators and decompositions PyTorch 1.13's
// exporter writes for nn.PixelShuffle, nn.PixelUnshuffle and x[:, :n]
// (seen in its output at opsets 13 and 17: DepthToSpace with mode CRD; a
// Reshape to (N, C, H/r, r, W/r, r), Transpose(0, 1, 3, 5, 2, 4) and a
// Reshape to (N, C·r², H/r, W/r); a Slice with constant starts, ends, axes
// and steps) and their ONNX relatives (the operator definitions of
// DepthToSpace, SpaceToDepth and Slice), on an 8×4×4 input.
func TestRearrangeImport(t *testing.T) {
	cases := []struct {
		name   string
		valued []*onnxpb.Tensor
		nodes  []*onnxpb.Node
		want   engine.Layer
		out    engine.Shape
		note   bool // a note that the channel order differs
	}{
		{name: "DepthToSpace, mode CRD (nn.PixelShuffle(2) at opsets 13 and 17)",
			nodes: []*onnxpb.Node{node("DepthToSpace", "/ps/DepthToSpace", []string{"x"}, "y", iAttr("blocksize", 2), sAttr("mode", "CRD"))},
			want:  engine.Layer{Kind: engine.KindToSpace, PixelFactor: 2}, out: engine.Shape{C: 2, H: 8, W: 8}},
		{name: "DepthToSpace in its default mode DCR (ONNX: offsets first): read with a note",
			nodes: []*onnxpb.Node{node("DepthToSpace", "/d/DepthToSpace", []string{"x"}, "y", iAttr("blocksize", 2))},
			want:  engine.Layer{Kind: engine.KindToSpace, PixelFactor: 2}, out: engine.Shape{C: 2, H: 8, W: 8}, note: true},
		{name: "SpaceToDepth (ONNX: offsets first): read with a note",
			nodes: []*onnxpb.Node{node("SpaceToDepth", "/d/SpaceToDepth", []string{"x"}, "y", iAttr("blocksize", 2))},
			want:  engine.Layer{Kind: engine.KindToChannels, PixelFactor: 2}, out: engine.Shape{C: 32, H: 2, W: 2}, note: true},
		{name: "nn.PixelUnshuffle(2) at opsets 13 and 17: Reshape, Transpose(0, 1, 3, 5, 2, 4), Reshape",
			valued: []*onnxpb.Tensor{rawInt64("six", -1, 8, 2, 2, 2, 2), rawInt64("four", -1, 32, 2, 2)},
			nodes: []*onnxpb.Node{
				node("Reshape", "/pu/Reshape", []string{"x", "six"}, "r"),
				node("Transpose", "/pu/Transpose", []string{"r"}, "t", ints("perm", 0, 1, 3, 5, 2, 4)),
				node("Reshape", "/pu/Reshape_1", []string{"t", "four"}, "y")},
			want: engine.Layer{Kind: engine.KindToChannels, PixelFactor: 2}, out: engine.Shape{C: 32, H: 2, W: 2}},
		{name: "nn.PixelShuffle(2) decomposed (PyTorch's pixel_shuffle: view(N, C, r, r, H, W), permute(0, 1, 4, 2, 5, 3), view back)",
			valued: []*onnxpb.Tensor{rawInt64("six", 1, 2, 2, 2, 4, 4), rawInt64("four", 1, 2, 8, 8)},
			nodes: []*onnxpb.Node{
				node("Reshape", "/ps/Reshape", []string{"x", "six"}, "r"),
				node("Transpose", "/ps/Transpose", []string{"r"}, "t", ints("perm", 0, 1, 4, 2, 5, 3)),
				node("Reshape", "/ps/Reshape_1", []string{"t", "four"}, "y")},
			want: engine.Layer{Kind: engine.KindToSpace, PixelFactor: 2}, out: engine.Shape{C: 2, H: 8, W: 8}},
		{name: "x[:, :5] at opsets 13 and 17: Slice with Constant starts 0, ends 5, axes 1, steps 1",
			nodes: []*onnxpb.Node{intConst("st", 0), intConst("en", 5), intConst("ax", 1), intConst("sp", 1),
				node("Slice", "/s/Slice", []string{"x", "st", "en", "ax", "sp"}, "y")},
			want: engine.Layer{Kind: engine.KindKeep, Keep: 5}, out: engine.Shape{C: 5, H: 4, W: 4}},
		{name: "Slice with initializer bounds, axis −3, no steps (ONNX Slice: negative axes count from the end)",
			valued: []*onnxpb.Tensor{rawInt64("st", 0), rawInt64("en", 3), rawInt64("ax", -3)},
			nodes:  []*onnxpb.Node{node("Slice", "/s/Slice", []string{"x", "st", "en", "ax"}, "y")},
			want:   engine.Layer{Kind: engine.KindKeep, Keep: 3}, out: engine.Shape{C: 3, H: 4, W: 4}},
		{name: "an end past the channels is clamped (ONNX Slice; x[:, :100] of 8 keeps 8)",
			valued: []*onnxpb.Tensor{rawInt64("st", 0), rawInt64("en", 100), rawInt64("ax", 1)},
			nodes:  []*onnxpb.Node{node("Slice", "/s/Slice", []string{"x", "st", "en", "ax"}, "y")},
			want:   engine.Layer{Kind: engine.KindKeep, Keep: 8}, out: engine.Shape{C: 8, H: 4, W: 4}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, res, err := Import(modelWith(t, [4]int64{1, 8, 4, 4}, 13, nil, c.valued, c.nodes...), "r")
			if err != nil {
				t.Fatal(err)
			}
			if len(s.Layers) != 1 || !s.Layers[0].Equal(&c.want) {
				t.Fatalf("layers %+v, want %+v", s.Layers, c.want)
			}
			if r := engine.Evaluate(s); r.Errors != 0 || r.Output != c.out {
				t.Errorf("output %v (%v), want %v", r.Output, r.Diags, c.out)
			}
			noted := strings.Contains(strings.Join(res.Notes, " "), "orders the channels")
			if noted != c.note {
				t.Errorf("notes %q; want a note on the channel order: %v", res.Notes, c.note)
			}
		})
	}
}

// TestRearrangeRefusals: slices the stack has no form for stop at the
// Slice (ONNX Slice: each keeps something other than the first
// channels), and a transpose to another channel order is no pixel
// unshuffle.
func TestRearrangeRefusals(t *testing.T) {
	cases := []struct {
		name   string
		valued []*onnxpb.Tensor
		nodes  []*onnxpb.Node
		op     string
	}{
		{"channels 2 to 5, not from the first", []*onnxpb.Tensor{rawInt64("st", 2), rawInt64("en", 5), rawInt64("ax", 1)},
			[]*onnxpb.Node{node("Slice", "/s/Slice", []string{"x", "st", "en", "ax"}, "y")}, "Slice"},
		{"every other channel (step 2)", []*onnxpb.Tensor{rawInt64("st", 0), rawInt64("en", 8), rawInt64("ax", 1), rawInt64("sp", 2)},
			[]*onnxpb.Node{node("Slice", "/s/Slice", []string{"x", "st", "en", "ax", "sp"}, "y")}, "Slice"},
		{"the batch axis", []*onnxpb.Tensor{rawInt64("st", 0), rawInt64("en", 1), rawInt64("ax", 0)},
			[]*onnxpb.Node{node("Slice", "/s/Slice", []string{"x", "st", "en", "ax"}, "y")}, "Slice"},
		{"bounds computed at run time", nil,
			[]*onnxpb.Node{node("Shape", "/s/Shape", []string{"x"}, "sh"), intConst("st", 0), intConst("ax", 1),
				node("Slice", "/s/Slice", []string{"x", "st", "sh", "ax"}, "y")}, "Slice"},
		{"the offsets-first order written out (SpaceToDepth's own decomposition) is not read as a rearrangement", []*onnxpb.Tensor{rawInt64("six", -1, 8, 2, 2, 2, 2), rawInt64("four", -1, 32, 2, 2)},
			[]*onnxpb.Node{
				node("Reshape", "/pu/Reshape", []string{"x", "six"}, "r"),
				node("Transpose", "/pu/Transpose", []string{"r"}, "t", ints("perm", 0, 3, 5, 1, 2, 4)),
				node("Reshape", "/pu/Reshape_1", []string{"t", "four"}, "y")}, "Reshape"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := Import(modelWith(t, [4]int64{1, 8, 4, 4}, 13, nil, c.valued, c.nodes...), "r")
			var st *Stopped
			if !errors.As(err, &st) || st.Op != c.op {
				t.Fatalf("err %v, want a stop at a %s node", err, c.op)
			}
		})
	}
}
