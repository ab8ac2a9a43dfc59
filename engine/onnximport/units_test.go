package onnximport

import (
	"bytes"
	"fmt"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
	"stackfit/engine/stackfile"
)

// triples is a graph of n convolution → batch norm → ReLU triples, one
// module each (/cI/conv, /cI/bn, /cI/act), the convolutions without bias
// as a network with batch norms writes them; widths, kernels and strides
// from the table (a pad of k/2); the norms carry epsilon eps (0: none,
// which ONNX reads as 1e-5).
func triples(t *testing.T, eps float32, convs [][3]int64) []byte {
	weights := map[string][]int64{}
	var nodes []*onnxpb.Node
	x, in := "x", int64(3)
	for i, c := range convs {
		w, k, s := c[0], c[1], c[2]
		m := fmt.Sprintf("c%d", i+1)
		weights[m+"w"] = []int64{w, in, k, k}
		for _, b := range []string{"s", "o", "m", "v"} {
			weights[m+b] = []int64{w}
		}
		nodes = append(nodes,
			node("Conv", "/"+m+"/conv/Conv", []string{x, m + "w"}, m+"c", ints("kernel_shape", k, k), ints("strides", s, s), ints("pads", k/2, k/2, k/2, k/2)),
			node("BatchNormalization", "/"+m+"/bn/BatchNormalization", []string{m + "c", m + "s", m + "o", m + "m", m + "v"}, m+"n", epsAttr(eps)...),
			node("Relu", "/"+m+"/act/Relu", []string{m + "n"}, m+"a"))
		x, in = m+"a", w
	}
	return model(t, [4]int64{1, 3, 64, 64}, 13, weights, nodes...)
}

// leafRows are the rows of a stack's layers (blocks and uses aside): the
// shapes, parameters, buffers and MACs, in order.
func leafRows(s *engine.Stack) []string {
	var out []string
	for _, row := range engine.Evaluate(s).Rows {
		if !isConstruct(row.Layer.Kind) {
			out = append(out, fmt.Sprintf("%v %v→%v %d %d %d", row.Layer.Kind, row.In, row.Out, row.Params, row.Buffers, row.MACs))
		}
	}
	return out
}

// TestImportUnits: four convolution–norm–ReLU runs that differ in width,
// kernel, stride and pad become one unit with those four as parameters,
// each default the most common value (common practice: the unit written
// by hand for the cap inspector in README's units section has the same
// shape), and four uses named after their modules. The stack computes
// every row the plain layers do (the four triples written out; a 3×3
// convolution from 3 to 16 channels without bias has 3·3·3·16 = 432
// weights), saves and loads back the same; two runs stay plain layers:
// a unit would not shorten the file.
func TestImportUnits(t *testing.T) {
	convs := [][3]int64{{16, 3, 2}, {32, 3, 1}, {32, 1, 1}, {32, 3, 1}}
	s, _, err := Import(triples(t, 0, convs), "units")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Units) != 1 || len(s.Layers) != 4 {
		t.Fatalf("%d units, %d layers: %+v", len(s.Units), len(s.Layers), s.Layers)
	}
	u := s.Units[0]
	want := []engine.UnitParam{{Name: "c", Default: "32"}, {Name: "k", Default: "3"}, {Name: "s", Default: "1"}, {Name: "p", Default: "1"}}
	if u.Name != "conv-norm-act" || fmt.Sprint(u.Params) != fmt.Sprint(want) || len(u.Body) != 3 {
		t.Errorf("unit %s %v, %d layers; want conv-norm-act %v, 3 layers", u.Name, u.Params, len(u.Body), want)
	}
	args := []string{"[{c 16} {s 2}]", "[]", "[{k 1} {p 0}]", "[]"}
	for i, l := range s.Layers {
		if l.Unit != u.Name || fmt.Sprint(l.Args) != args[i] || l.Name != fmt.Sprintf("c%d", i+1) {
			t.Errorf("layer %d: unit %q args %v name %q; want %s %s c%d", i+1, l.Unit, l.Args, l.Name, u.Name, args[i], i+1)
		}
	}
	// the same layers written out, without units
	var plain engine.Stack
	plain.Input = engine.Shape{C: 3, H: 64, W: 64}
	for _, c := range convs {
		plain.Layers = append(plain.Layers,
			engine.Layer{Kind: engine.KindConv, Filters: c[0], Kernel: engine.Square(c[1]), Stride: engine.Square(c[2]),
				Pad: engine.Padding{Size: engine.Square(c[1] / 2)}, NoBias: true}.Normalized(),
			engine.Layer{Kind: engine.KindNorm, Norm: engine.NormBatch},
			engine.Layer{Kind: engine.KindAct, Act: engine.ActReLU})
	}
	got, ref := leafRows(s), leafRows(&plain)
	if fmt.Sprint(got) != fmt.Sprint(ref) || len(ref) != 12 {
		t.Errorf("rows with units:\n%v\nwritten out:\n%v", got, ref)
	}
	if r := engine.Evaluate(s); r.Totals.Params != 432+32+16*32*9+64+32*32+64+32*32*9+64 {
		t.Errorf("params %d", r.Totals.Params)
	}
	data, err := stackfile.Save(s)
	if err != nil {
		t.Fatal(err)
	}
	back, err := stackfile.Load(data)
	if err != nil {
		t.Fatalf("%v\n%s", err, data)
	}
	if fmt.Sprint(leafRows(back)) != fmt.Sprint(ref) || len(back.Units) != 1 {
		t.Errorf("loaded back: %d units, rows %v", len(back.Units), leafRows(back))
	}

	two, _, err := Import(triples(t, 0, convs[:2]), "two")
	if err != nil {
		t.Fatal(err)
	}
	if len(two.Units) != 0 || len(two.Layers) != 6 {
		t.Errorf("two runs: %d units, %d layers; want none and 6 plain layers", len(two.Units), len(two.Layers))
	}
}

// epsAttr is a norm node's epsilon attribute, none for 0.
func epsAttr(eps float32) []*onnxpb.Attribute {
	if eps == 0 {
		return nil
	}
	return []*onnxpb.Attribute{{Name: proto.String("epsilon"), Kind: proto.Int32(1), F: proto.Float32(eps)}}
}

// TestImportUnitsEpsDefault: when every norm shares an ε other than
// PyTorch's (torchvision's BasicConv2d, eps=0.001, in Inception v3 and
// GoogLeNet), the file's default holds it and the unit's norm does not
// repeat it; the rows compute with it all the same.
func TestImportUnitsEpsDefault(t *testing.T) {
	s, _, err := Import(triples(t, 0.001, [][3]int64{{16, 3, 2}, {32, 3, 1}, {32, 1, 1}, {32, 3, 1}}), "eps")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Units) != 1 {
		t.Fatalf("%d units, want 1", len(s.Units))
	}
	if d := s.Defaults.For(engine.KindNorm); d == nil || d.Eps != 0.001 {
		t.Fatalf("file defaults for norms %+v, want eps 0.001", d)
	}
	walk(s.Units[0].Body, func(l *engine.Layer) {
		if l.Kind == engine.KindNorm && l.Eps != 0 {
			t.Errorf("the unit's norm writes eps %g; the file's default has it", l.Eps)
		}
	})
	data, err := stackfile.Save(s)
	if err != nil {
		t.Fatal(err)
	}
	if n := bytes.Count(data, []byte("eps:")); n != 1 {
		t.Errorf("eps written %d times, want once:\n%s", n, data)
	}
	back, err := stackfile.Load(data)
	if err != nil {
		t.Fatal(err)
	}
	for _, row := range engine.Evaluate(back).Rows {
		if row.Layer.Kind == engine.KindNorm && row.Layer.Eps != 0.001 {
			t.Errorf("row %s computes with eps %g, want 0.001", row.Path, row.Layer.Eps)
		}
	}
}
