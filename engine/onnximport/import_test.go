package onnximport

import (
	"encoding/binary"
	"errors"
	"math"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// model builds an ONNX model in memory: input x of 1×C×H×W, the nodes
// given, and a 4-D weight initializer per name in weights. Field numbers
// are the format's (onnxpb, checked against python3-onnx's schema in the
// reference suite).
func model(t testing.TB, shape [4]int64, opset int64, weights map[string][]int64, nodes ...*onnxpb.Node) []byte {
	return modelWith(t, shape, opset, weights, nil, nodes...)
}

// modelWith is model with initializers that carry values (as an export
// with constant folding stores shape vectors and scalars). The weights
// are written as full tensors through onnxpb.ValuesModel, whose graph and
// initializer fields have the format's numbers, and the two encodings
// concatenated: protobuf merges them into one model.
func modelWith(t testing.TB, shape [4]int64, opset int64, weights map[string][]int64, valued []*onnxpb.Tensor, nodes ...*onnxpb.Node) []byte {
	t.Helper()
	dims := make([]*onnxpb.Dim, 4)
	for i, d := range shape {
		dims[i] = &onnxpb.Dim{Value: &onnxpb.Dim_Size{Size: d}}
	}
	g := &onnxpb.Graph{Name: proto.String("g"), Node: nodes, Input: []*onnxpb.ValueInfo{{Name: proto.String("x"), Type: &onnxpb.ValueType{
		TensorType: &onnxpb.TensorType{ElemType: proto.Int32(1), Shape: &onnxpb.Shape{Dim: dims}}}}}}
	vals := &onnxpb.ValuesGraph{Initializer: valued}
	for name, d := range weights {
		vals.Initializer = append(vals.Initializer, &onnxpb.Tensor{Name: proto.String(name), Dims: d, ElemType: proto.Int32(elemFloat)})
	}
	data, err := proto.Marshal(&onnxpb.Model{IrVersion: proto.Int64(7), Graph: g, OpsetImport: []*onnxpb.OpsetId{{Version: proto.Int64(opset)}}})
	if err != nil {
		t.Fatal(err)
	}
	more, err := proto.Marshal(&onnxpb.ValuesModel{Graph: vals})
	if err != nil {
		t.Fatal(err)
	}
	return append(data, more...)
}

// rawInt64 is an int64 initializer with its values in raw_data,
// little-endian, as the format stores them.
func rawInt64(name string, v ...int64) *onnxpb.Tensor {
	b := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(b[8*i:], uint64(x))
	}
	return &onnxpb.Tensor{Name: proto.String(name), Dims: []int64{int64(len(v))}, ElemType: proto.Int32(elemInt64), RawData: b}
}

// rawFloat is a float scalar initializer with its value in raw_data.
func rawFloat(name string, v float32) *onnxpb.Tensor {
	return &onnxpb.Tensor{Name: proto.String(name), ElemType: proto.Int32(elemFloat), RawData: binary.LittleEndian.AppendUint32(nil, math.Float32bits(v))}
}

func ints(name string, v ...int64) *onnxpb.Attribute {
	return &onnxpb.Attribute{Name: proto.String(name), Kind: proto.Int32(7), Ints: v}
}

func node(op, name string, in []string, out string, attrs ...*onnxpb.Attribute) *onnxpb.Node {
	return &onnxpb.Node{OpType: proto.String(op), Name: proto.String(name), Input: in, Output: []string{out}, Attribute: attrs}
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
		&onnxpb.Node{OpType: proto.String("Gemm"), Name: proto.String("/head/Gemm"), Input: []string{"fl", "fc", "fcb"}, Output: []string{"y"},
			Attribute: []*onnxpb.Attribute{{Name: proto.String("transB"), Kind: proto.Int32(2), I: proto.Int64(1)}}},
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
	if c.Filters != 8 || c.Kernel != engine.Square(3) || c.Stride != engine.Square(2) || c.Pad.Size != engine.Square(1) || c.NoBias || c.Name != "stem" {
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

// TestImportResidual: conv → relu added to the input is a residual block
// whose body is the two layers (common practice: He et al. 2016's
// identity shortcut); 3·3·3·3 = 81 weights.
func TestImportResidual(t *testing.T) {
	add := model(t, [4]int64{1, 3, 16, 16}, 13, map[string][]int64{"w": {3, 3, 3, 3}},
		node("Conv", "/block/conv/Conv", []string{"x", "w"}, "c", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
		node("Relu", "/block/relu/Relu", []string{"c"}, "a"),
		node("Add", "/block/Add", []string{"a", "x"}, "y"),
		node("Relu", "/block/relu2/Relu", []string{"y"}, "z"),
	)
	s, _, err := Import(add, "res")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Layers) != 1 || s.Layers[0].Kind != engine.KindBlock || !s.Layers[0].Residual || len(s.Layers[0].Body) != 2 ||
		!s.Layers[0].HasPostAct || s.Layers[0].PostAct != engine.ActReLU || s.Layers[0].Name != "block" {
		t.Fatalf("%+v", s.Layers)
	}
	if r := engine.Evaluate(s); r.Totals.Params != 81 {
		t.Errorf("params %d", r.Totals.Params)
	}
}

// TestImportFoldedValues: an export with constant folding on stores a
// reshape's target and clip's bounds as initializers with their values in
// raw_data; the import reads those small values (a second decoding) and
// still leaves the weights' bytes alone.
func TestImportFoldedValues(t *testing.T) {
	data := modelWith(t, [4]int64{1, 2, 4, 4}, 13, map[string][]int64{"w": {4, 2, 3, 3}},
		[]*onnxpb.Tensor{rawInt64("shape", 1, 16, 2, 2), rawFloat("lo", 0), rawFloat("hi", 6)},
		node("Conv", "c", []string{"x", "w"}, "c", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
		node("Clip", "clip", []string{"c", "lo", "hi"}, "a"),
		node("Reshape", "r", []string{"a", "shape"}, "y"),
	)
	s, _, err := Import(data, "folded")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Layers) != 3 || s.Layers[1].Act != engine.ActReLU6 || s.Layers[2].Kind != engine.KindReshape || s.Layers[2].Target != (engine.Shape{C: 16, H: 2, W: 2}) {
		t.Fatalf("layers %+v", s.Layers)
	}
	// Without the values (a bound of 0..5), the clip is refused by value,
	// which shows the value was read, not assumed.
	data = modelWith(t, [4]int64{1, 2, 4, 4}, 13, nil, []*onnxpb.Tensor{rawFloat("lo", 0), rawFloat("hi", 5)},
		node("Clip", "clip", []string{"x", "lo", "hi"}, "y"))
	if _, _, err := Import(data, "clip5"); err == nil || !strings.Contains(err.Error(), "0..6") {
		t.Errorf("clip 0..5: %v", err)
	}
}

// TestDecodeSkipsWeights: the first decoding reads no initializer's
// values; the second keeps those of small ones (at most maxValues
// elements: shape vectors, scalars) and never a weight's.
func TestDecodeSkipsWeights(t *testing.T) {
	w := &onnxpb.Tensor{Name: proto.String("w"), Dims: []int64{64, 8, 3, 3}, ElemType: proto.Int32(elemFloat), RawData: make([]byte, 4*64*8*3*3)}
	data := modelWith(t, [4]int64{1, 8, 4, 4}, 13, nil, []*onnxpb.Tensor{w, rawInt64("shape", 1, -1)},
		node("Reshape", "r", []string{"x", "shape"}, "y"))
	for _, values := range []bool{false, true} {
		_, consts, err := decode(data, values)
		if err != nil {
			t.Fatal(err)
		}
		if c := consts["w"]; c == nil || len(c.GetRawData()) != 0 || len(c.GetDims()) != 4 {
			t.Errorf("values %v: weight %v: dims kept, values not read", values, c)
		}
		if c := consts["shape"]; c == nil || len(c.GetRawData()) != map[bool]int{false: 0, true: 16}[values] {
			t.Errorf("values %v: shape vector %v", values, c)
		}
	}
}

// TestImportStops: a node the import cannot express is named with its
// operator and position, and the layers before it come back.
func TestImportStops(t *testing.T) {
	sub := model(t, [4]int64{1, 3, 16, 16}, 13, map[string][]int64{"w": {3, 3, 3, 3}, "v": {3, 3, 1, 1}},
		node("Conv", "c0", []string{"x", "v"}, "x0", ints("kernel_shape", 1, 1)),
		node("Conv", "c1", []string{"x0", "w"}, "c", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
		node("Relu", "r1", []string{"c"}, "a"),
		node("Sub", "/block/Sub", []string{"a", "x0"}, "y"),
	)
	s, _, err := Import(sub, "res")
	var st *Stopped
	if !errors.As(err, &st) || st.Op != "Sub" || st.Position != 4 || st.Node != "/block/Sub" || !errors.Is(err, ErrImport) {
		t.Fatalf("error %v", err)
	}
	if s == nil || len(s.Layers) != 1 {
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
