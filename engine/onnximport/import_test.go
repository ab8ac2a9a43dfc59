package onnximport

import (
	"errors"
	"strings"
	"testing"

	"github.com/advancedclimatesystems/gonnx/onnx"
	"google.golang.org/protobuf/proto"

	"stackfit/engine"
)

// model builds an ONNX model in memory: input x of 1×C×H×W, the nodes
// given, and a 4-D weight initializer per name in weights. The ONNX
// schema (onnx.proto3, as the binding ships it) is the source of every
// field used.
func model(t testing.TB, shape [4]int64, opset int64, weights map[string][]int64, nodes ...*onnx.NodeProto) []byte {
	t.Helper()
	dims := make([]*onnx.TensorShapeProto_Dimension, 4)
	for i, d := range shape {
		dims[i] = &onnx.TensorShapeProto_Dimension{Value: &onnx.TensorShapeProto_Dimension_DimValue{DimValue: d}}
	}
	g := &onnx.GraphProto{Name: "g", Node: nodes, Input: []*onnx.ValueInfoProto{{Name: "x", Type: &onnx.TypeProto{
		Value: &onnx.TypeProto_TensorType{TensorType: &onnx.TypeProto_Tensor{ElemType: 1, Shape: &onnx.TensorShapeProto{Dim: dims}}}}}}}
	for name, d := range weights {
		g.Initializer = append(g.Initializer, &onnx.TensorProto{Name: name, Dims: d, DataType: int32(onnx.TensorProto_FLOAT)})
	}
	data, err := proto.Marshal(&onnx.ModelProto{IrVersion: 7, Graph: g, OpsetImport: []*onnx.OperatorSetIdProto{{Version: opset}}})
	if err != nil {
		t.Fatal(err)
	}
	return data
}

func ints(name string, v ...int64) *onnx.AttributeProto {
	return &onnx.AttributeProto{Name: name, Type: onnx.AttributeProto_INTS, Ints: v}
}

func node(op, name string, in []string, out string, attrs ...*onnx.AttributeProto) *onnx.NodeProto {
	return &onnx.NodeProto{OpType: op, Name: name, Input: in, Output: []string{out}, Attribute: attrs}
}

// chain is a small convolutional chain: conv 8 k3 s2 p1 (bias), batch
// norm, relu, max pool, global pool, flatten, dense 10.
func chain(t testing.TB) []byte {
	return model(t, [4]int64{1, 3, 32, 32}, 13, map[string][]int64{"w": {8, 3, 3, 3}, "b": {8}, "fc": {10, 8}, "fcb": {10},
		"s": {8}, "o": {8}, "m": {8}, "v": {8}},
		node("Conv", "/stem/Conv", []string{"x", "w", "b"}, "c", ints("kernel_shape", 3, 3), ints("strides", 2, 2), ints("pads", 1, 1, 1, 1)),
		node("BatchNormalization", "bn", []string{"c", "s", "o", "m", "v"}, "n"),
		node("Relu", "r", []string{"n"}, "a"),
		node("MaxPool", "p", []string{"a"}, "q", ints("kernel_shape", 2, 2), ints("strides", 2, 2)),
		node("GlobalAveragePool", "gp", []string{"q"}, "g"),
		node("Flatten", "f", []string{"g"}, "fl"),
		&onnx.NodeProto{OpType: "Gemm", Name: "/head/Gemm", Input: []string{"fl", "fc", "fcb"}, Output: []string{"y"},
			Attribute: []*onnx.AttributeProto{{Name: "transB", Type: onnx.AttributeProto_INT, I: 1}}},
	)
}

// TestImportChain reads a chain and checks every layer and the counts
// (common practice: a 3×3 convolution from 3 to 8 channels with bias has
// 3·3·3·8 + 8 = 224 parameters; batch norm 16 and 17 buffers counted as
// the engine counts them; the dense 8→10 layer 90).
func TestImportChain(t *testing.T) {
	s, res, err := Import(chain(t), "tiny")
	if err != nil {
		t.Fatal(err)
	}
	// The flatten after the global pool is left out: its input is already
	// flat, as a person would write it.
	want := []engine.Kind{engine.KindConv, engine.KindNorm, engine.KindAct, engine.KindPool, engine.KindGlobalPool, engine.KindDense}
	if len(s.Layers) != len(want) || res.Read != 7 {
		t.Fatalf("%d layers, %d read: %+v", len(s.Layers), res.Read, s.Layers)
	}
	for i, k := range want {
		if s.Layers[i].Kind != k {
			t.Errorf("layer %d is %v, want %v", i+1, s.Layers[i].Kind, k)
		}
	}
	c := s.Layers[0]
	if c.Filters != 8 || c.Kernel != engine.Square(3) || c.Stride != engine.Square(2) || c.Pad.Size != engine.Square(1) || c.NoBias || c.Name != "stem_Conv" {
		t.Errorf("conv %+v", c)
	}
	r := engine.Evaluate(s)
	if r.Errors != 0 || r.Totals.Params != 224+16+90 || r.Output != (engine.Shape{C: 10, H: 1, W: 1}) {
		t.Errorf("params %d, output %v, %v", r.Totals.Params, r.Output, r.Diags)
	}
	if s.Input != (engine.Shape{C: 3, H: 32, W: 32}) || s.Layers[5].Filters != 10 {
		t.Errorf("input %v, dense %d", s.Input, s.Layers[5].Filters)
	}
}

// TestImportStops: a node the import cannot express is named with its
// operator and position, and the layers before it come back.
func TestImportStops(t *testing.T) {
	add := model(t, [4]int64{1, 3, 16, 16}, 13, map[string][]int64{"w": {3, 3, 3, 3}},
		node("Conv", "c1", []string{"x", "w"}, "c", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
		node("Relu", "r1", []string{"c"}, "a"),
		node("Add", "/block/Add", []string{"a", "x"}, "y"),
	)
	s, _, err := Import(add, "res")
	var st *Stopped
	if !errors.As(err, &st) || st.Op != "Add" || st.Position != 3 || st.Node != "/block/Add" || !errors.Is(err, ErrImport) {
		t.Fatalf("error %v", err)
	}
	if s == nil || len(s.Layers) != 2 {
		t.Errorf("the layers before the node: %+v", s)
	}
	unknown := model(t, [4]int64{1, 3, 16, 16}, 13, nil, node("LpNormalization", "lp", []string{"x"}, "y"))
	if _, _, err := Import(unknown, "u"); !errors.As(err, &st) || !strings.Contains(err.Error(), "LpNormalization") {
		t.Errorf("unknown operator: %v", err)
	}
}

// TestImportRefuses: bad files get named errors, never a panic.
func TestImportRefuses(t *testing.T) {
	good := chain(t)
	tests := []struct {
		name string
		data []byte
		want string
	}{
		{"random bytes", []byte("\x12\x34this is not a model\xff\x00\x01"), "not an ONNX model"},
		{"truncated", good[:len(good)/2], "not an ONNX model"},
		{"empty", nil, "no graph"},
		{"old opset", model(t, [4]int64{1, 3, 8, 8}, 3, nil, node("Relu", "r", []string{"x"}, "y")), "opset 3"},
		{"symbolic size", model(t, [4]int64{1, 3, 0, 8}, 13, nil, node("Relu", "r", []string{"x"}, "y")), "fixed input size"},
		{"huge weight", model(t, [4]int64{1, 3, 8, 8}, 13, map[string][]int64{"w": {1 << 40, 3, 3, 3}},
			node("Conv", "c", []string{"x", "w"}, "y", ints("kernel_shape", 3, 3))), "weight is not a constant"},
		{"asymmetric pads", model(t, [4]int64{1, 3, 8, 8}, 13, map[string][]int64{"w": {4, 3, 3, 3}},
			node("Conv", "c", []string{"x", "w"}, "y", ints("kernel_shape", 3, 3), ints("pads", 0, 0, 1, 1))), "same padding on both sides"},
	}
	for _, tt := range tests {
		_, _, err := Import(tt.data, tt.name)
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s: %v, want %q", tt.name, err, tt.want)
		}
	}
}

// FuzzImport: any bytes give a stack or a named error, never a panic.
func FuzzImport(f *testing.F) {
	f.Add(chain(f))
	f.Add([]byte{})
	f.Add([]byte("\x0a\x00"))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, _, err := Import(data, "fuzz")
		if err != nil && !errors.Is(err, ErrImport) {
			t.Fatalf("an error outside ErrImport: %v", err)
		}
		if err == nil {
			engine.Evaluate(s) // whatever was read evaluates without a panic
		}
	})
}
