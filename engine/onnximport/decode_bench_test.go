package onnximport

import (
	"fmt"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine/onnximport/onnxpb"
)

// bigModel is a chain of 3×3 convolutions of 256 channels whose weights
// hold their values (about 2.4 MB each, 96 MB in all, a ResNet-50
// export's size); with folded it also stores a reshape's target as a
// valued initializer, as an export with constant folding does.
func bigModel(b *testing.B, folded bool) []byte {
	var nodes []*onnxpb.Node
	var vals []*onnxpb.Tensor
	prev := "x"
	for i := range 40 {
		w, out := fmt.Sprintf("w%d", i), fmt.Sprintf("c%d", i)
		vals = append(vals, &onnxpb.Tensor{Name: proto.String(w), Dims: []int64{256, 256, 3, 3}, ElemType: proto.Int32(elemFloat), RawData: make([]byte, 4*256*256*9)})
		nodes = append(nodes, node("Conv", out, []string{prev, w}, out, ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)))
		prev = out
	}
	if folded {
		vals = append(vals, rawInt64("shape", 1, -1))
		nodes = append(nodes, node("Reshape", "r", []string{prev, "shape"}, "y"))
	}
	return modelWith(b, [4]int64{1, 256, 14, 14}, 13, nil, vals, nodes...)
}

// BenchmarkImportLarge imports a 96 MB model: the weights' values are
// skipped (one decoding), or copied once more when a small initializer's
// values are needed (two).
func BenchmarkImportLarge(b *testing.B) {
	for _, folded := range []bool{false, true} {
		data := bigModel(b, folded)
		b.Run(fmt.Sprintf("folded=%v", folded), func(b *testing.B) {
			b.SetBytes(int64(len(data)))
			b.ReportAllocs()
			for b.Loop() {
				if _, _, err := Import(data, "big"); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
