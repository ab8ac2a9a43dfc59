package onnximport

import (
	"errors"
	"math"
	"slices"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// constNode is a Constant node holding a float scalar, as the exporter
// writes eps, the exponent 2 and the GELU constants.
func constNode(out string, v float32) *onnxpb.Node {
	n := node("Constant", out, nil, out)
	n.Attribute = []*onnxpb.Attribute{{Name: proto.String("value"), Kind: proto.Int32(4), T: rawFloat(out, v)}}
	return n
}

// floatConst is a Constant node holding float values.
func floatConst(out string, v ...float32) *onnxpb.Node {
	n := node("Constant", out, nil, out)
	t := &onnxpb.Tensor{Name: proto.String(out), Dims: []int64{int64(len(v))}, ElemType: proto.Int32(elemFloat), FloatData: v}
	n.Attribute = []*onnxpb.Attribute{{Name: proto.String("value"), Kind: proto.Int32(4), T: t}}
	return n
}

// intConst is a Constant node holding int64 values (a shape vector).
func intConst(out string, v ...int64) *onnxpb.Node {
	n := node("Constant", out, nil, out)
	n.Attribute = []*onnxpb.Attribute{{Name: proto.String("value"), Kind: proto.Int32(4), T: rawInt64(out, v...)}}
	return n
}

func fAttr(name string, v float32) *onnxpb.Attribute { return fattr(name, v) }

// layerNormNodes is the layer norm over the channels as PyTorch's
// exporter writes F.layer_norm at opset 13 (the ONNX operator
// LayerNormalization only exists from opset 17): the mean over the last
// axis, the centred input, its squared mean plus eps under a square root,
// a division, then γ and β. in is a channels-last map.
func layerNormNodes(in, out string, affine bool) []*onnxpb.Node {
	ns := []*onnxpb.Node{
		node("ReduceMean", "/ln/ReduceMean", []string{in}, "m", ints("axes", -1)),
		node("Sub", "/ln/Sub", []string{in, "m"}, "d"),
		constNode("two", 2),
		node("Pow", "/ln/Pow", []string{"d", "two"}, "p"),
		node("ReduceMean", "/ln/ReduceMean_1", []string{"p"}, "v", ints("axes", -1)),
		constNode("eps", 1e-6),
		node("Add", "/ln/Add", []string{"v", "eps"}, "ve"),
		node("Sqrt", "/ln/Sqrt", []string{"ve"}, "sd"),
	}
	if !affine {
		return append(ns, node("Div", "/ln/Div", []string{"d", "sd"}, out))
	}
	return append(ns, node("Div", "/ln/Div", []string{"d", "sd"}, "n"),
		node("Mul", "/ln/Mul", []string{"n", "gamma"}, "ng"),
		node("Add", "/ln/Add_1", []string{"ng", "beta"}, out))
}

// TestRewrites reads each subgraph an exporter writes for one layer and
// checks the layers it becomes and the parameters counted.
func TestRewrites(t *testing.T) {
	toLast := node("Transpose", "/t/Transpose", []string{"x"}, "xl", ints("perm", 0, 2, 3, 1))
	toFirst := func(in string) *onnxpb.Node {
		return node("Transpose", "/t/Transpose_1", []string{in}, "y", ints("perm", 0, 3, 1, 2))
	}
	w8 := map[string][]int64{"gamma": {8}, "beta": {8}}
	cases := []struct {
		name    string // and the source of the pattern
		weights map[string][]int64
		valued  []*onnxpb.Tensor
		nodes   []*onnxpb.Node
		want    []engine.Layer // kind and the fields that matter
		params  int64
	}{
		{
			name:    "layer norm, decomposed with γ and β (PyTorch's F.layer_norm exported at opset 13; ONNX LayerNormalization's definition)",
			weights: w8,
			nodes:   append(append([]*onnxpb.Node{toLast}, layerNormNodes("xl", "ln", true)...), toFirst("ln")),
			want:    []engine.Layer{{Kind: engine.KindNorm, Norm: engine.NormLayer, Eps: 1e-6}},
			params:  16,
		},
		{
			name:   "layer norm without γ and β (PyTorch's elementwise_affine=False)",
			nodes:  append(append([]*onnxpb.Node{toLast}, layerNormNodes("xl", "ln", false)...), toFirst("ln")),
			want:   []engine.Layer{{Kind: engine.KindNorm, Norm: engine.NormLayer, Eps: 1e-6, Affine: engine.Off}},
			params: 0,
		},
		{
			name:    "per-position linear layer: MatMul by the transposed weight plus bias on channels-last (PyTorch's nn.Linear export)",
			weights: map[string][]int64{"fw": {16, 8}, "fb": {16}},
			nodes: []*onnxpb.Node{toLast,
				node("Transpose", "/fc/Transpose", []string{"fw"}, "fwt", ints("perm", 1, 0)),
				node("MatMul", "/fc/MatMul", []string{"xl", "fwt"}, "mm"),
				node("Add", "/fc/Add", []string{"fb", "mm"}, "fc"),
				toFirst("fc")},
			want:   []engine.Layer{{Kind: engine.KindDense, Filters: 16, PerPosition: true}},
			params: 8*16 + 16,
		},
		{
			name:    "group norm via instance norm (PyTorch's group_norm export below opset 18; ONNX GroupNormalization's definition)",
			weights: map[string][]int64{"gamma": {8, 1, 1}, "beta": {8, 1, 1}, "ones": {2}, "zeros": {2}},
			valued:  []*onnxpb.Tensor{rawInt64("g3", 1, 2, -1), rawInt64("back", 1, 8, 4, 4)},
			nodes: []*onnxpb.Node{
				node("Reshape", "/gn/Reshape", []string{"x", "g3"}, "r"),
				node("InstanceNormalization", "/gn/InstanceNormalization", []string{"r", "ones", "zeros"}, "i", fAttr("epsilon", 1e-6)),
				node("Reshape", "/gn/Reshape_1", []string{"i", "back"}, "rb"),
				node("Mul", "/gn/Mul", []string{"rb", "gamma"}, "m"),
				node("Add", "/gn/Add", []string{"m", "beta"}, "y")},
			want:   []engine.Layer{{Kind: engine.KindNorm, Norm: engine.NormGroup, NormGroups: 2, Eps: 1e-6}},
			params: 16,
		},
		{
			name:   "channel shuffle (ShuffleNet's channel_shuffle: view(N, g, C/g, H, W), transpose(1, 2), view back)",
			valued: []*onnxpb.Tensor{rawInt64("five", 1, 2, 4, 4, 4), rawInt64("four", 1, -1, 4, 4)},
			nodes: []*onnxpb.Node{
				node("Reshape", "/s/Reshape", []string{"x", "five"}, "r"),
				node("Transpose", "/s/Transpose", []string{"r"}, "t", ints("perm", 0, 2, 1, 3, 4)),
				node("Reshape", "/s/Reshape_1", []string{"t", "four"}, "y")},
			want: []engine.Layer{{Kind: engine.KindShuffle, Groups: 2}},
		},
		{
			name: "mean over height and width without keepdims is global average pooling (ONNX ReduceMean; torchvision's MNASNet x.mean([2, 3]))",
			nodes: []*onnxpb.Node{node("ReduceMean", "/ReduceMean", []string{"x"}, "y", ints("axes", 2, 3),
				&onnxpb.Attribute{Name: proto.String("keepdims"), Kind: proto.Int32(2), I: proto.Int64(0)})},
			want: []engine.Layer{{Kind: engine.KindGlobalPool, Pool: engine.PoolAvg}},
		},
		{
			name: "x·sigmoid(x) is SiLU (PyTorch's nn.SiLU exported at opset 13)",
			nodes: []*onnxpb.Node{node("Sigmoid", "/a/Sigmoid", []string{"x"}, "s"),
				node("Mul", "/a/Mul", []string{"x", "s"}, "y")},
			want: []engine.Layer{{Kind: engine.KindAct, Act: engine.ActSiLU}},
		},
		{
			name: "x·hardsigmoid(x; 1/6, 1/2) is hard swish (PyTorch's nn.Hardswish at opset 13; ONNX HardSwish's definition)",
			nodes: []*onnxpb.Node{node("HardSigmoid", "/a/HardSigmoid", []string{"x"}, "s", fAttr("alpha", 1.0/6), fAttr("beta", 0.5)),
				node("Mul", "/a/Mul", []string{"x", "s"}, "y")},
			want: []engine.Layer{{Kind: engine.KindAct, Act: engine.ActHardSwish}},
		},
		{
			name: "x·(1 + erf(x/√2))·0.5 is GELU (PyTorch's nn.GELU exported at opset 13; ONNX Gelu's definition)",
			nodes: []*onnxpb.Node{constNode("r2", float32(math.Sqrt2)), constNode("one", 1), constNode("half", 0.5),
				node("Div", "/g/Div", []string{"x", "r2"}, "d"),
				node("Erf", "/g/Erf", []string{"d"}, "e"),
				node("Add", "/g/Add", []string{"e", "one"}, "a"),
				node("Mul", "/g/Mul", []string{"x", "a"}, "m"),
				node("Mul", "/g/Mul_1", []string{"m", "half"}, "y")},
			want: []engine.Layer{{Kind: engine.KindAct, Act: engine.ActGELU}},
		},
		{
			name:   "an all-zero Pad is nothing (ONNX Pad; DenseNet's transitions as exported)",
			valued: []*onnxpb.Tensor{rawInt64("pads", 0, 0, 0, 0, 0, 0, 0, 0)},
			nodes: []*onnxpb.Node{node("Pad", "/p/Pad", []string{"x", "pads"}, "p"),
				node("Relu", "/r/Relu", []string{"p"}, "y")},
			want: []engine.Layer{{Kind: engine.KindAct, Act: engine.ActReLU}},
		},
		{
			name: "a Concat of one input is that input (ONNX Concat; torch.cat of a one-element list)",
			nodes: []*onnxpb.Node{node("Concat", "/c/Concat", []string{"x"}, "c", &onnxpb.Attribute{Name: proto.String("axis"), Kind: proto.Int32(2), I: proto.Int64(1)}),
				node("Relu", "/r/Relu", []string{"c"}, "y")},
			want: []engine.Layer{{Kind: engine.KindAct, Act: engine.ActReLU}},
		},
		{
			name:   "Resize by whole factors is upsampling (ONNX Resize; PyTorch's nn.Upsample(scale_factor=2))",
			valued: []*onnxpb.Tensor{{Name: proto.String("scales"), Dims: []int64{4}, ElemType: proto.Int32(elemFloat), FloatData: []float32{1, 1, 2, 2}}},
			nodes:  []*onnxpb.Node{node("Resize", "/u/Resize", []string{"x", "", "scales"}, "y")},
			want:   []engine.Layer{{Kind: engine.KindUpsample, Factor: engine.Square(2)}},
		},
		{
			// torch 1.13's export of F.interpolate(x, scale_factor=2.0):
			// the scales are a Concat of two Constants, [1, 1] and [2, 2].
			name: "Resize with scales joined from constants is upsampling (PyTorch's F.interpolate(scale_factor=2.0))",
			nodes: []*onnxpb.Node{floatConst("k1", 1, 1), floatConst("k2", 2, 2),
				node("Concat", "/Concat", []string{"k1", "k2"}, "scales", &onnxpb.Attribute{Name: proto.String("axis"), Kind: proto.Int32(2), I: proto.Int64(0)}),
				node("Resize", "/u/Resize", []string{"x", "", "scales"}, "y")},
			want: []engine.Layer{{Kind: engine.KindUpsample, Factor: engine.Square(2)}},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, _, err := Import(modelWith(t, [4]int64{1, 8, 4, 4}, 13, c.weights, c.valued, c.nodes...), "r")
			if err != nil {
				t.Fatal(err)
			}
			if len(s.Layers) != len(c.want) {
				t.Fatalf("%d layers, want %d: %+v", len(s.Layers), len(c.want), s.Layers)
			}
			for i, w := range c.want {
				g := s.Layers[i]
				if g.Kind != w.Kind || g.Norm != w.Norm || g.Eps != w.Eps || g.Act != w.Act || g.Filters != w.Filters || g.NormGroups != w.NormGroups ||
					g.Groups != w.Groups || g.PerPosition != w.PerPosition || g.Affine != w.Affine || g.Pool != w.Pool || g.Factor != w.Factor && w.Kind == engine.KindUpsample {
					t.Errorf("layer %d: %+v, want %+v", i+1, g, w)
				}
			}
			if r := engine.Evaluate(s); r.Totals.Params != c.params || r.Errors != 0 {
				t.Errorf("params %d, want %d (%v)", r.Totals.Params, c.params, r.Diags)
			}
		})
	}
}

// TestRewriteRefusals: near misses of the patterns are not rewritten and
// stop with the node (ONNX operator definitions: each differs from the
// layer's computation).
func TestRewriteRefusals(t *testing.T) {
	notLN := layerNormNodes("xl", "ln", false)
	notLN[2] = constNode("two", 3) // a cube, not a variance
	cases := []struct {
		name   string
		valued []*onnxpb.Tensor
		nodes  []*onnxpb.Node
		op     string // the operator the import stops at
	}{
		{"a mean of cubes is not a layer norm", nil,
			append([]*onnxpb.Node{node("Transpose", "/t/Transpose", []string{"x"}, "xl", ints("perm", 0, 2, 3, 1))}, notLN...), "Sub"},
		{"a transpose of other axes is not a shuffle", []*onnxpb.Tensor{rawInt64("five", 1, 2, 4, 4, 4), rawInt64("four", 1, 8, 4, 4)},
			[]*onnxpb.Node{
				node("Reshape", "/s/Reshape", []string{"x", "five"}, "r"),
				node("Transpose", "/s/Transpose", []string{"r"}, "t", ints("perm", 0, 1, 2, 4, 3)),
				node("Reshape", "/s/Reshape_1", []string{"t", "four"}, "y")}, "Reshape"},
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

// graphOf runs the import's first phases (folding, shapes, rewrites) on
// a model and returns the graph the structure phase reads.
func graphOf(t *testing.T, data []byte) *graph {
	t.Helper()
	m, consts, err := decode(data, true)
	if err != nil {
		t.Fatal(err)
	}
	im := newImporter(false)
	im.res = &Result{}
	for name, c := range consts {
		im.consts[name], im.initial[name] = c, true
	}
	_, x, err := im.input(m.GetGraph())
	if err != nil {
		t.Fatal(err)
	}
	gr, err := im.graph(m.GetGraph(), x)
	if err != nil {
		t.Fatal(err)
	}
	return gr
}

// TestChunkToSplit: torch.chunk(x, 2, dim=1) as PyTorch 1.13 exports it
// at opset 13 (bounds computed from Shape: (C + 1)/2 · k; ONNX Slice)
// becomes one Split on axis 1 whose outputs are the parts in channel
// order, whatever order the Slices come in; unequal parts stay Slices.
func TestChunkToSplit(t *testing.T) {
	chunk := func(second int64) []*onnxpb.Node {
		return []*onnxpb.Node{
			node("Conv", "/c/Conv", []string{"x", "w"}, "c", ints("kernel_shape", 1, 1)),
			node("Shape", "/k/Shape", []string{"c"}, "sh"),
			intConst("one", 1), intConst("zero", 0), intConst("two", 2), intConst("k2", second),
			node("Gather", "/k/Gather", []string{"sh", "one"}, "ch"),
			node("Add", "/k/Add", []string{"ch", "one"}, "ch1"),
			node("Div", "/k/Div", []string{"ch1", "two"}, "half"),
			node("Mul", "/k/Mul", []string{"half", "one"}, "e1"),
			node("Mul", "/k/Mul_1", []string{"half", "k2"}, "e2"),
			// the second part first: the Split orders its outputs by channel
			node("Slice", "/k/Slice_1", []string{"c", "e1", "e2", "one"}, "b"),
			node("Slice", "/k/Slice", []string{"c", "zero", "e1", "one"}, "a"),
			node("Relu", "/r/Relu", []string{"a"}, "ra"),
			node("Relu", "/r/Relu_1", []string{"b"}, "rb"),
			node("Concat", "/cat/Concat", []string{"ra", "rb"}, "y", &onnxpb.Attribute{Name: proto.String("axis"), Kind: proto.Int32(2), I: proto.Int64(1)}),
		}
	}
	w := map[string][]int64{"w": {6, 3, 1, 1}}
	gr := graphOf(t, model(t, [4]int64{2, 3, 4, 4}, 13, w, chunk(2)...))
	var ops []string
	for _, n := range gr.nodes {
		ops = append(ops, n.GetOpType())
	}
	if !slices.Equal(ops, []string{"Conv", "Split", "Relu", "Relu", "Concat"}) {
		t.Fatalf("nodes %v", ops)
	}
	sp := gr.nodes[1]
	if !slices.Equal(sp.GetOutput(), []string{"a", "b"}) || attr(sp, "axis").GetI() != 1 || !slices.Equal(gr.data[1], []string{"c"}) {
		t.Errorf("split outputs %v, axis %d, reads %v", sp.GetOutput(), attr(sp, "axis").GetI(), gr.data[1])
	}
	if gr.prod["a"] != 1 || gr.prod["b"] != 1 || !slices.Equal(gr.cons["c"], []int{1}) {
		t.Errorf("links: prod a %d b %d, readers of c %v", gr.prod["a"], gr.prod["b"], gr.cons["c"])
	}
	// Channels 0–2 and 3–4 of 6 are not equal parts of the whole map:
	// they stay Slices.
	uneq := chunk(2)
	uneq[10] = node("Add", "/k/Mul_1", []string{"half", "two"}, "e2") // 3 + 2 = 5: channels 3–4 of 6
	gr = graphOf(t, model(t, [4]int64{2, 3, 4, 4}, 13, w, uneq...))
	for _, n := range gr.nodes {
		if n.GetOpType() == "Split" {
			t.Fatalf("unequal parts became a Split")
		}
	}
}
