package onnximport

import (
	"errors"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// spatialGateModel is what torch.onnx 1.13 writes at opsets 13 and 17 for
// a 3×3 convolution (8 filters, bias) and then x · sigmoid(conv7×7(cat([
// mean(x, 1, keepdim), max(x, 1, keepdim)[0]]))) (read from its export of
// such a module with python3-onnx: ReduceMean and ReduceMax with axes [1]
// and keepdims 1, Concat axis 1, Conv with pads 3, Sigmoid, Mul), with
// the pooled pair in the order given, the gate's convolution's pads and
// its reductions' axis, and a BatchNormalization after it when norm.
func spatialGateModel(t *testing.T, maxFirst, norm bool, pad, axis int64) []byte {
	w := map[string][]int64{"w0": {8, 3, 3, 3}, "b0": {8}, "wg": {1, 2, 7, 7}, "bg": {1}}
	pair := []string{"mean", "max"}
	if maxFirst {
		pair = []string{"max", "mean"}
	}
	cat := node("Concat", "/gate/Concat", pair, "cat")
	cat.Attribute = append(cat.Attribute, axis1())
	keep := &onnxpb.Attribute{Name: proto.String("keepdims"), Kind: proto.Int32(2), I: proto.Int64(1)}
	nodes := []*onnxpb.Node{
		node("Conv", "/stem/Conv", []string{"x", "w0", "b0"}, "c", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
		node("ReduceMean", "/gate/ReduceMean", []string{"c"}, "mean", ints("axes", axis), keep),
		node("ReduceMax", "/gate/ReduceMax", []string{"c"}, "max", ints("axes", axis), keep),
		cat,
		node("Conv", "/gate/conv/Conv", []string{"cat", "wg", "bg"}, "g", ints("kernel_shape", 7, 7), ints("pads", pad, pad, pad, pad)),
	}
	s := "g"
	if norm {
		for _, n := range []string{"s", "o", "m", "v"} {
			w[n] = []int64{1}
		}
		nodes = append(nodes, node("BatchNormalization", "/gate/norm/BatchNormalization", []string{"g", "s", "o", "m", "v"}, "gn"))
		s = "gn"
	}
	nodes = append(nodes,
		node("Sigmoid", "/gate/Sigmoid", []string{s}, "sig"),
		node("Mul", "/gate/Mul", []string{"c", "sig"}, "y"))
	return model(t, [4]int64{1, 3, 12, 10}, 13, w, nodes...)
}

// TestImportSpatialGate: the pattern reads back as one spatial-gate
// layer (Woo et al. 2018, eq. 3) with the convolution's kernel, bias and
// norm, in either order of the pooled pair (the authors' code puts the
// maximum first, from memory); counts by common practice: 3·3·3·8 + 8 for
// the stem, 7·7·2 + 1 for the gate, 2 and 2 + 1 buffers for the norm as
// the engine counts batch norm. A gate whose convolution does not keep
// the size stops at that node; reductions over another axis are no
// spatial gate, and stop as a product of three paths would.
func TestImportSpatialGate(t *testing.T) {
	tests := []struct {
		name            string
		maxFirst, norm  bool
		params, buffers int64
	}{
		{"mean first (the paper's order)", false, false, 224 + 99, 0},
		{"max first", true, false, 224 + 99, 0},
		{"with batch norm", false, true, 224 + 99 + 2, 3},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, _, err := Import(spatialGateModel(t, tt.maxFirst, tt.norm, 3, 1), "gate")
			if err != nil {
				t.Fatal(err)
			}
			want := engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(7), GateNorm: tt.norm}
			if len(s.Layers) != 2 || !s.Layers[1].Equal(&want) {
				t.Fatalf("layers %+v", s.Layers)
			}
			r := engine.Evaluate(s)
			if r.Errors != 0 || r.Totals.Params != tt.params || r.Totals.Buffers != tt.buffers || r.Output != (engine.Shape{C: 8, H: 12, W: 10}) {
				t.Errorf("params %d buffers %d output %v, %v", r.Totals.Params, r.Totals.Buffers, r.Output, r.Diags)
			}
		})
	}
	var st *Stopped
	if _, _, err := Import(spatialGateModel(t, false, false, 2, 1), "shrinks"); !errors.As(err, &st) || st.Node != "/gate/conv/Conv" || !strings.Contains(err.Error(), "spatial gate") {
		t.Errorf("a gate convolution that shrinks the map: %v", err)
	}
	if _, _, err := Import(spatialGateModel(t, false, false, 3, 2), "rows"); !errors.As(err, &st) || st.Node != "/gate/Mul" {
		t.Errorf("reductions over the height: %v", err)
	}
}
